import { useState, type FormEvent } from 'react';
import { authClient } from '../lib/authClient';
import { Field, FormMessage, SubmitButton } from './ui/Field';

/** Only paths inside the app are followed after sign-in. */
function safeNext(next: string | null) {
  return next && next.startsWith('/') && !next.startsWith('//') ? next : '/labs';
}

export default function SignInForm({ next }: { next: string | null }) {
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<string | null>(null);
  const [unverified, setUnverified] = useState<string | null>(null);
  const [resent, setResent] = useState(false);

  async function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const email = String(form.get('email'));
    setBusy(true);
    setError(null);
    const { error: failure } = await authClient.signIn.email({ email, password: String(form.get('password')) });
    setBusy(false);
    if (!failure) {
      window.location.assign(safeNext(next));
      return;
    }
    if (failure.status === 403) {
      setUnverified(email);
      setError('This address is not confirmed yet. Open the link in the e-mail we sent, or send it again.');
    } else if (failure.status === 429) {
      setError(failure.message || 'Too many attempts. Wait a minute and try again.');
    } else {
      setError('The e-mail address or the password is not right.');
    }
  }

  return (
    <form method="post" onSubmit={submit} className="flex flex-col gap-4" noValidate>
      {error && <FormMessage tone="error">{error}</FormMessage>}
      {resent && <FormMessage tone="info">A new confirmation e-mail is on its way.</FormMessage>}
      <Field label="E-mail" name="email" type="email" autoComplete="username" required />
      <Field label="Password" name="password" type="password" autoComplete="current-password" required />
      <div className="flex items-center gap-4">
        <SubmitButton busy={busy}>Sign in</SubmitButton>
        {unverified && (
          <button
            type="button"
            className="text-sm text-brand-700 underline"
            onClick={async () => {
              await authClient.sendVerificationEmail({ email: unverified, callbackURL: safeNext(next) });
              setResent(true);
            }}
          >
            Send the confirmation again
          </button>
        )}
      </div>
    </form>
  );
}
