import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import { useState, type FormEvent } from 'react';
import { api, ApiError } from '../lib/apiClient';
import { QueryRoot } from './QueryRoot';
import { Field, FormMessage, SubmitButton } from './ui/Field';

const ROLE_OPTIONS = [
  ['lab_scientist', 'Lab scientist'],
  ['technician', 'Technician'],
  ['medical_director', 'Medical director'],
  ['quality', 'Quality & regulatory'],
  ['lab_admin', 'Lab administrator'],
] as const;

interface Member {
  membershipId: string;
  userId: string;
  name: string;
  email: string;
  role: string;
  version: number;
}

function Members({ slug, selfId }: { slug: string; selfId: string }) {
  const base = `/api/labs/${slug}`;
  const queryClient = useQueryClient();
  const members = useQuery({ queryKey: ['members', slug], queryFn: () => api<{ members: Member[] }>('GET', `${base}/members`) });
  const [message, setMessage] = useState<{ tone: 'error' | 'info'; text: string } | null>(null);
  const [inviteErrors, setInviteErrors] = useState<Record<string, string>>({});
  const refresh = () => queryClient.invalidateQueries({ queryKey: ['members', slug] });
  const report = (error: unknown) => setMessage({ tone: 'error', text: error instanceof ApiError ? error.problem.detail : String(error) });

  const changeRole = useMutation({
    mutationFn: (m: { member: Member; role: string }) => api('PATCH', `${base}/members/${m.member.membershipId}`, { role: m.role, version: m.member.version }),
    onSuccess: (_data, m) => setMessage({ tone: 'info', text: `${m.member.name} is now ${ROLE_OPTIONS.find(([k]) => k === m.role)?.[1]}.` }),
    onError: report,
    onSettled: refresh,
  });
  const remove = useMutation({
    mutationFn: (member: Member) => api('DELETE', `${base}/members/${member.membershipId}`),
    onSuccess: (_d, member) => setMessage({ tone: 'info', text: `${member.name} was removed from the laboratory.` }),
    onError: report,
    onSettled: refresh,
  });
  const invite = useMutation({
    mutationFn: (body: { email: string; role: string }) => api('POST', `${base}/invitations`, body),
    onSuccess: (_d, body) => {
      setInviteErrors({});
      setMessage({ tone: 'info', text: `Invitation sent to ${body.email}.` });
    },
    onError: (error) => {
      if (error instanceof ApiError && error.problem.errors) {
        setInviteErrors(Object.fromEntries(error.problem.errors.map((e) => [e.field, e.message])));
      } else report(error);
    },
  });

  function submitInvite(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    invite.mutate({ email: String(form.get('email')), role: String(form.get('role')) });
  }

  return (
    <div className="grid gap-6">
      {message && <FormMessage tone={message.tone}>{message.text}</FormMessage>}
      <table className="w-full border-collapse bg-white text-sm" data-testid="members-table">
        <thead>
          <tr className="border-b border-neutral-200 text-left text-neutral-500">
            <th className="px-3 py-2 font-medium">Name</th>
            <th className="px-3 py-2 font-medium">E-mail</th>
            <th className="px-3 py-2 font-medium">Role</th>
            <th className="px-3 py-2 font-medium"><span className="sr-only">Actions</span></th>
          </tr>
        </thead>
        <tbody>
          {members.data?.members.map((m) => (
            <tr key={m.membershipId} className="border-b border-neutral-100">
              <td className="px-3 py-2">{m.name}</td>
              <td className="px-3 py-2">{m.email}</td>
              <td className="px-3 py-2">
                <select
                  aria-label={`Role of ${m.name}`}
                  value={m.role}
                  onChange={(e) => changeRole.mutate({ member: m, role: e.currentTarget.value })}
                  className="rounded border border-neutral-300 bg-white px-2 py-1"
                >
                  {ROLE_OPTIONS.map(([key, label]) => (
                    <option key={key} value={key}>{label}</option>
                  ))}
                </select>
              </td>
              <td className="px-3 py-2 text-right">
                {m.userId !== selfId && (
                  <button
                    type="button"
                    className="text-attention-800 underline"
                    onClick={() => window.confirm(`Remove ${m.name} from this laboratory?`) && remove.mutate(m)}
                  >
                    Remove
                  </button>
                )}
              </td>
            </tr>
          ))}
        </tbody>
      </table>
      {members.isError && <FormMessage tone="error">The member list could not be loaded.</FormMessage>}

      <form onSubmit={submitInvite} className="grid max-w-xl gap-3 rounded border border-neutral-200 bg-white p-4" noValidate>
        <h2 className="font-semibold">Invite someone</h2>
        <Field label="E-mail address" name="email" type="email" error={inviteErrors.email} required />
        <div className="flex flex-col gap-1">
          <label htmlFor="invite-role" className="text-sm font-medium">Role</label>
          <select id="invite-role" name="role" defaultValue="technician" className="rounded border border-neutral-300 bg-white px-2 py-1.5">
            {ROLE_OPTIONS.map(([key, label]) => (
              <option key={key} value={key}>{label}</option>
            ))}
          </select>
        </div>
        <div>
          <SubmitButton busy={invite.isPending}>Send the invitation</SubmitButton>
        </div>
      </form>
    </div>
  );
}

export default function MembersAdmin(props: { slug: string; selfId: string }) {
  return (
    <QueryRoot>
      <Members {...props} />
    </QueryRoot>
  );
}
