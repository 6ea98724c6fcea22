import { useState, type FormEvent } from 'react';
import { authClient } from '../lib/authClient';
import { MIN_PASSWORD } from './SignUpForm';
import { Field, FormMessage, SubmitButton } from './ui/Field';

export function RequestResetForm() {
  const [busy, setBusy] = useState(false);
  const [done, setDone] = useState(false);
  async function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    setBusy(true);
    await authClient.requestPasswordReset({ email: String(new FormData(event.currentTarget).get('email')), redirectTo: '/reset-password' });
    setBusy(false);
    setDone(true);
  }
  // The same answer whether or not the address has an account.
  if (done) return <FormMessage tone="info">If that address has an account, a reset link is on its way.</FormMessage>;
  return (
    <form method="post" onSubmit={submit} className="flex flex-col gap-4">
      <Field label="E-mail" name="email" type="email" autoComplete="username" required />
      <div>
        <SubmitButton busy={busy}>Send a reset link</SubmitButton>
      </div>
    </form>
  );
}

export function ResetPasswordForm({ token }: { token: string | null }) {
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<string | null>(token ? null : 'This reset link is incomplete; ask for a new one.');
  const [done, setDone] = useState(false);
  async function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const password = String(form.get('password'));
    if (password.length < MIN_PASSWORD) return setError(`Use at least ${MIN_PASSWORD} characters.`);
    if (password !== String(form.get('confirm'))) return setError('The two passwords differ.');
    setBusy(true);
    const { error: failure } = await authClient.resetPassword({ newPassword: password, token: token ?? '' });
    setBusy(false);
    if (failure) return setError('This reset link is no longer valid; ask for a new one.');
    setDone(true);
  }
  if (done) {
    return (
      <FormMessage tone="info">
        Your password is changed. <a className="underline" href="/sign-in">Sign in</a> with it.
      </FormMessage>
    );
  }
  return (
    <form method="post" onSubmit={submit} className="flex flex-col gap-4">
      {error && <FormMessage tone="error">{error}</FormMessage>}
      <Field label="New password" name="password" type="password" autoComplete="new-password" required />
      <Field label="New password again" name="confirm" type="password" autoComplete="new-password" required />
      <div>
        <SubmitButton busy={busy}>Change the password</SubmitButton>
      </div>
    </form>
  );
}
