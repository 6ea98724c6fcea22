import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import { useState, type FormEvent } from 'react';
import { api, ApiError } from '../lib/apiClient';
import { QueryRoot } from './QueryRoot';
import { Field, FormMessage, SubmitButton } from './ui/Field';

interface TokenRow {
  id: string;
  name: string;
  createdAt: string;
  lastUsedAt: string | null;
  revokedAt: string | null;
}

const when = (iso: string | null) => (iso ? new Date(iso).toISOString().slice(0, 16).replace('T', ' ') + ' UTC' : '—');

function Tokens({ slug }: { slug: string }) {
  const base = `/api/labs/${slug}/tokens`;
  const queryClient = useQueryClient();
  const tokens = useQuery({ queryKey: ['tokens', slug], queryFn: () => api<{ tokens: TokenRow[] }>('GET', base) });
  const [secret, setSecret] = useState<{ name: string; secret: string } | null>(null);
  const [error, setError] = useState<string | null>(null);
  const refresh = () => queryClient.invalidateQueries({ queryKey: ['tokens', slug] });
  const create = useMutation({
    mutationFn: (name: string) => api<{ token: { name: string; secret: string } }>('POST', base, { name }),
    onSuccess: (data) => {
      setSecret(data.token);
      setError(null);
    },
    onError: (e) => setError(e instanceof ApiError ? (e.fieldError('name') ?? e.problem.detail) : String(e)),
    onSettled: refresh,
  });
  const revoke = useMutation({ mutationFn: (id: string) => api('DELETE', `${base}/${id}`), onSettled: refresh });

  function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    create.mutate(String(new FormData(event.currentTarget).get('name')));
    event.currentTarget.reset();
  }

  return (
    <div className="grid gap-6">
      {secret && (
        <FormMessage tone="info">
          Token “{secret.name}” created. Copy it now; it is not shown again:{' '}
          <code className="break-all rounded bg-white px-1" data-testid="new-token">{secret.secret}</code>
        </FormMessage>
      )}
      <table className="w-full border-collapse bg-white text-sm" data-testid="tokens-table">
        <thead>
          <tr className="border-b border-neutral-200 text-left text-neutral-500">
            <th className="px-3 py-2 font-medium">Name</th>
            <th className="px-3 py-2 font-medium">Created</th>
            <th className="px-3 py-2 font-medium">Last used</th>
            <th className="px-3 py-2 font-medium">Status</th>
            <th className="px-3 py-2"><span className="sr-only">Actions</span></th>
          </tr>
        </thead>
        <tbody>
          {tokens.data?.tokens.map((t) => (
            <tr key={t.id} className="border-b border-neutral-100">
              <td className="px-3 py-2">{t.name}</td>
              <td className="px-3 py-2">{when(t.createdAt)}</td>
              <td className="px-3 py-2">{when(t.lastUsedAt)}</td>
              <td className="px-3 py-2">{t.revokedAt ? `✖ Revoked ${when(t.revokedAt)}` : '✔ Active'}</td>
              <td className="px-3 py-2 text-right">
                {!t.revokedAt && (
                  <button type="button" className="text-attention-800 underline" onClick={() => window.confirm(`Revoke “${t.name}”? Uploads using it stop at once.`) && revoke.mutate(t.id)}>
                    Revoke
                  </button>
                )}
              </td>
            </tr>
          ))}
        </tbody>
      </table>
      <form onSubmit={submit} className="grid max-w-xl gap-3 rounded border border-neutral-200 bg-white p-4" noValidate>
        <h2 className="font-semibold">New API token</h2>
        <Field label="Name" name="name" error={error ?? undefined} hint="Name it after the middleware or LIS that will upload results with it." required />
        <div>
          <SubmitButton busy={create.isPending}>Create the token</SubmitButton>
        </div>
      </form>
    </div>
  );
}

export default function TokensAdmin(props: { slug: string }) {
  return (
    <QueryRoot>
      <Tokens {...props} />
    </QueryRoot>
  );
}
