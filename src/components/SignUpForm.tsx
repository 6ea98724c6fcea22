import { useState, type FormEvent } from 'react';
import { authClient } from '../lib/authClient';
import { Field, FormMessage, SubmitButton } from './ui/Field';

export const MIN_PASSWORD = 10;

export default function SignUpForm({ next, email: invitedEmail }: { next: string | null; email?: string }) {
  const [busy, setBusy] = useState(false);
  const [errors, setErrors] = useState<Record<string, string>>({});
  const [failure, setFailure] = useState<string | null>(null);
  const [sentTo, setSentTo] = useState<string | null>(null);

  async function submit(event: FormEvent<HTMLFormElement>) {
    event.preventDefault();
    const form = new FormData(event.currentTarget);
    const name = String(form.get('name')).trim();
    const email = String(form.get('email')).trim();
    const password = String(form.get('password'));
    const found: Record<string, string> = {};
    if (!name) found.name = 'Give your name as it should appear on signatures.';
    if (!/^[^@\s]+@[^@\s]+\.[^@\s]+$/.test(email)) found.email = 'Give a valid e-mail address.';
    if (password.length < MIN_PASSWORD) found.password = `Use at least ${MIN_PASSWORD} characters.`;
    if (password !== String(form.get('confirm'))) found.confirm = 'The two passwords differ.';
    setErrors(found);
    if (Object.keys(found).length > 0) return;
    setBusy(true);
    const callbackURL = next && next.startsWith('/') && !next.startsWith('//') ? next : '/labs';
    const { error } = await authClient.signUp.email({ name, email, password, callbackURL });
    setBusy(false);
    if (error) {
      setFailure(error.status === 422 || error.status === 400 ? error.message ?? 'That address cannot be used.' : 'The account could not be created. Try again.');
      return;
    }
    setSentTo(email);
  }

  if (sentTo) {
    return (
      <FormMessage tone="info">
        We sent a confirmation link to {sentTo}. Open it to finish creating your account.
      </FormMessage>
    );
  }
  return (
    <form method="post" onSubmit={submit} className="flex flex-col gap-4" noValidate>
      {failure && <FormMessage tone="error">{failure}</FormMessage>}
      <Field label="Full name" name="name" autoComplete="name" error={errors.name} required />
      <Field label="E-mail" name="email" type="email" autoComplete="email" defaultValue={invitedEmail} error={errors.email} required />
      <Field label="Password" name="password" type="password" autoComplete="new-password" error={errors.password} hint={`At least ${MIN_PASSWORD} characters.`} required />
      <Field label="Password again" name="confirm" type="password" autoComplete="new-password" error={errors.confirm} required />
      <div>
        <SubmitButton busy={busy}>Create the account</SubmitButton>
      </div>
    </form>
  );
}
