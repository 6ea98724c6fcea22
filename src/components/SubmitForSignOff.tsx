import { useMutation } from '@tanstack/react-query';
import { useEffect, useState, type FormEvent } from 'react';
import { api, ApiError } from '../lib/apiClient';
import { QueryRoot } from './QueryRoot';
import { FormMessage } from './ui/Field';

interface SubmitProps {
  slug: string;
  studyId: string;
  version: number;
  /** Why the study cannot be submitted yet (analysis missing, out of date or still running); null when it can. */
  blocker: string | null;
}

const buttonClass = 'rounded bg-brand-700 px-4 py-1.5 font-medium text-white hover:bg-brand-800 disabled:opacity-60';

function Submit({ slug, studyId, version, blocker }: SubmitProps) {
  const [message, setMessage] = useState<{ tone: 'error' | 'info'; text: string } | null>(null);
  // Disabled until the island runs, so that an early click is not lost.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const submit = useMutation({
    mutationFn: () => api<{ notified: string[] }>('POST', `/api/labs/${slug}/studies/${studyId}/submit`, { version }),
    onSuccess: (data) => {
      setMessage({ tone: 'info', text: `Submitted for sign-off; ${data.notified.length} medical director${data.notified.length === 1 ? ' was' : 's were'} e-mailed. The page reloads.` });
      window.location.reload();
    },
    onError: (error) => setMessage({ tone: 'error', text: error instanceof ApiError ? error.problem.detail : String(error) }),
  });
  return (
    <div className="grid gap-2" data-testid="submit-for-sign-off">
      {blocker && <FormMessage tone="info">{blocker}</FormMessage>}
      {message && <FormMessage tone={message.tone}>{message.text}</FormMessage>}
      <div>
        <button type="button" className={buttonClass} disabled={!!blocker || submit.isPending || !hydrated} onClick={() => submit.mutate()}>
          {submit.isPending ? 'Working…' : 'Submit for sign-off'}
        </button>
      </div>
    </div>
  );
}

/** The lab scientist's button that sends a collecting study with a current analysis to the medical directors. */
export default function SubmitForSignOff(props: SubmitProps) {
  return (
    <QueryRoot>
      <Submit {...props} />
    </QueryRoot>
  );
}

interface AmendProps {
  slug: string;
  studyId: string;
  version: number;
}

function Amend({ slug, studyId, version }: AmendProps) {
  const [error, setError] = useState<string | null>(null);
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const amend = useMutation({
    mutationFn: (reason: string) => api<{ study: { id: string } }>('POST', `/api/labs/${slug}/studies/${studyId}/amend`, { reason, version }),
    onSuccess: (data) => window.location.assign(`/labs/${slug}/studies/${data.study.id}/sign`),
    onError: (e) => setError(e instanceof ApiError ? e.problem.errors?.[0]?.message ?? e.problem.detail : String(e)),
  });
  function send(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const reason = String(new FormData(event.currentTarget).get('reason') ?? '').trim();
    if (!reason) return setError('Say why the signed study needs a new revision.');
    setError(null);
    amend.mutate(reason);
  }
  return (
    <form onSubmit={send} className="grid max-w-xl gap-2" noValidate data-testid="amend-study">
      <label htmlFor="amend-reason" className="text-sm font-medium text-neutral-800">
        Why a new revision is needed
      </label>
      <textarea
        id="amend-reason"
        name="reason"
        rows={2}
        maxLength={2000}
        aria-invalid={error ? true : undefined}
        aria-describedby={error ? 'amend-reason-error' : undefined}
        className="rounded border border-neutral-300 bg-white px-2.5 py-1.5 aria-[invalid]:border-attention-600"
      />
      {error && (
        <p id="amend-reason-error" className="text-xs text-attention-800" role="alert">
          ⚠ {error}
        </p>
      )}
      <div>
        <button type="submit" className={buttonClass} disabled={amend.isPending || !hydrated}>
          {amend.isPending ? 'Working…' : 'Open a new revision'}
        </button>
      </div>
    </form>
  );
}

/** The lab scientist's amendment of a signed study: a new revision with a copy of its data. */
export function AmendStudy(props: AmendProps) {
  return (
    <QueryRoot>
      <Amend {...props} />
    </QueryRoot>
  );
}
