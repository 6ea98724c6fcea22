import { useMutation } from '@tanstack/react-query';
import { useEffect, useState, type FormEvent } from 'react';
import { api, ApiError } from '../lib/apiClient';
import { VERDICT_LABELS } from '../lib/labels';
import type { Verdict } from '../db/schema';
import { QueryRoot } from './QueryRoot';
import { Field, FormMessage, SubmitButton } from './ui/Field';

interface SignOffFormProps {
  slug: string;
  studyId: string;
  /** The study version the page was drawn from. */
  version: number;
  analysisRunId: string;
  /** What the signature means, exactly as the server stores it. */
  meaning: string;
  signerName: string;
}

const VERDICT_ORDER: Verdict[] = ['accepted', 'accepted_with_conditions', 'rejected'];

const COMMENT_LABELS: Record<Verdict, { label: string; required: boolean }> = {
  accepted: { label: 'Comment (optional)', required: false },
  accepted_with_conditions: { label: 'Conditions of the acceptance (required)', required: true },
  rejected: { label: 'Reason for rejecting (required)', required: true },
};

function Form({ slug, studyId, version, analysisRunId, meaning, signerName }: SignOffFormProps) {
  const [verdict, setVerdict] = useState<Verdict | null>(null);
  const [errors, setErrors] = useState<Record<string, string>>({});
  const [message, setMessage] = useState<{ tone: 'error' | 'info'; text: string } | null>(null);
  // Until the island runs, the button stays disabled, so a click never submits the password as a plain form.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);

  const sign = useMutation({
    mutationFn: (body: { verdict: Verdict; comment: string; password: string }) =>
      api('POST', `/api/labs/${slug}/studies/${studyId}/sign`, { ...body, version, analysisRunId }),
    onSuccess: () => {
      setErrors({});
      setMessage({ tone: 'info', text: 'Signed. The study is now locked; the page reloads.' });
      window.location.reload();
    },
    onError: (error) => {
      if (error instanceof ApiError && error.problem.errors) {
        setErrors(Object.fromEntries(error.problem.errors.map((e) => [e.field, e.message])));
      } else setErrors({});
      setMessage({ tone: 'error', text: error instanceof ApiError ? error.problem.detail : String(error) });
    },
  });

  function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const comment = String(form.get('comment') ?? '').trim();
    const password = String(form.get('password') ?? '');
    const found: Record<string, string> = {};
    if (!verdict) found.verdict = 'Choose a verdict.';
    else if (COMMENT_LABELS[verdict].required && !comment) found.comment = verdict === 'rejected' ? 'Give the reason for rejecting.' : 'State the conditions of the acceptance.';
    if (!password) found.password = 'Enter your password to sign.';
    setErrors(found);
    if (Object.keys(found).length > 0 || !verdict) {
      setMessage({ tone: 'error', text: 'Nothing was signed: complete the fields marked below.' });
      return;
    }
    setMessage(null);
    sign.mutate({ verdict, comment, password });
  }

  const commentLabel = verdict ? COMMENT_LABELS[verdict] : COMMENT_LABELS.accepted;
  return (
    <form method="post" onSubmit={submit} className="grid max-w-3xl gap-4 rounded border border-neutral-200 bg-white p-4" noValidate data-testid="sign-off-form">
      <h2 className="text-lg font-semibold text-brand-900">Your verdict</h2>
      <fieldset className="grid gap-2" aria-describedby={errors.verdict ? 'verdict-error' : undefined}>
        <legend className="text-sm font-medium text-neutral-800">Verdict</legend>
        {VERDICT_ORDER.map((key) => (
          <label key={key} className="flex items-center gap-2 text-sm">
            <input type="radio" name="verdict" value={key} checked={verdict === key} onChange={() => setVerdict(key)} />
            <span aria-hidden="true">{VERDICT_LABELS[key].icon}</span> {VERDICT_LABELS[key].word}
          </label>
        ))}
        {errors.verdict && (
          <p id="verdict-error" className="text-xs text-attention-800" role="alert">
            ⚠ {errors.verdict}
          </p>
        )}
      </fieldset>
      <div className="flex flex-col gap-1">
        <label htmlFor="sign-comment" className="text-sm font-medium text-neutral-800">
          {commentLabel.label}
        </label>
        <textarea
          id="sign-comment"
          name="comment"
          rows={3}
          maxLength={4000}
          aria-invalid={errors.comment ? true : undefined}
          aria-describedby={errors.comment ? 'sign-comment-error' : undefined}
          className="rounded border border-neutral-300 bg-white px-2.5 py-1.5 aria-[invalid]:border-attention-600"
        />
        {errors.comment && (
          <p id="sign-comment-error" className="text-xs text-attention-800" role="alert">
            ⚠ {errors.comment}
          </p>
        )}
      </div>
      <section aria-labelledby="meaning-heading" className="rounded border border-brand-100 bg-brand-50 p-3 text-sm text-brand-900">
        <h3 id="meaning-heading" className="font-semibold">What your signature means</h3>
        <p className="mt-1" data-testid="signature-meaning">{meaning}</p>
        <p className="mt-1 text-neutral-600">Signed as {signerName}, medical director, with the time recorded in UTC.</p>
      </section>
      <div className="max-w-sm">
        <Field
          label="Your password"
          name="password"
          type="password"
          autoComplete="current-password"
          error={errors.password}
          hint="Entering it again confirms that it is you who signs."
          onChange={() => {
            if (!errors.password) return;
            setErrors(({ password: _answered, ...rest }) => rest);
            setMessage(null);
          }}
        />
      </div>
      {message && <FormMessage tone={message.tone}>{message.text}</FormMessage>}
      <div>
        <SubmitButton busy={sign.isPending || !hydrated}>Sign the study</SubmitButton>
      </div>
    </form>
  );
}

/** The medical director's signature: verdict, conditions or reason, the meaning of signing, and the password. */
export default function SignOffForm(props: SignOffFormProps) {
  return (
    <QueryRoot>
      <Form {...props} />
    </QueryRoot>
  );
}

interface ReturnProps {
  slug: string;
  studyId: string;
  version: number;
}

function Return({ slug, studyId, version }: ReturnProps) {
  const [error, setError] = useState<string | null>(null);
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const send = useMutation({
    mutationFn: (reason: string) => api('POST', `/api/labs/${slug}/studies/${studyId}/return`, { reason, version }),
    onSuccess: () => window.location.reload(),
    onError: (e) => setError(e instanceof ApiError ? e.problem.errors?.[0]?.message ?? e.problem.detail : String(e)),
  });
  function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const reason = String(new FormData(event.currentTarget).get('reason') ?? '').trim();
    if (!reason) return setError('Say what needs to change before you can sign.');
    setError(null);
    send.mutate(reason);
  }
  return (
    <form onSubmit={submit} className="grid max-w-3xl gap-2 rounded border border-neutral-200 bg-white p-4" noValidate data-testid="return-for-changes">
      <h2 className="text-lg font-semibold text-brand-900">Or return it unsigned</h2>
      <p className="text-sm text-neutral-600">The study goes back to collecting results; the lab scientists are e-mailed your reason and submit it again after a new analysis.</p>
      <label htmlFor="return-reason" className="text-sm font-medium text-neutral-800">
        What needs to change
      </label>
      <textarea
        id="return-reason"
        name="reason"
        rows={2}
        maxLength={2000}
        aria-invalid={error ? true : undefined}
        aria-describedby={error ? 'return-reason-error' : undefined}
        className="rounded border border-neutral-300 bg-white px-2.5 py-1.5 aria-[invalid]:border-attention-600"
      />
      {error && (
        <p id="return-reason-error" className="text-xs text-attention-800" role="alert">
          ⚠ {error}
        </p>
      )}
      <div>
        <button type="submit" disabled={send.isPending || !hydrated} className="rounded border border-brand-700 px-4 py-1.5 font-medium text-brand-800 hover:bg-brand-50 disabled:opacity-60">
          {send.isPending ? 'Working…' : 'Return for changes'}
        </button>
      </div>
    </form>
  );
}

/** The medical director's other answer to a study in review: back to collecting, with what needs to change. */
export function ReturnForChanges(props: ReturnProps) {
  return (
    <QueryRoot>
      <Return {...props} />
    </QueryRoot>
  );
}
