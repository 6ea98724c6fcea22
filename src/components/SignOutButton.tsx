import { useState } from 'react';
import { authClient } from '../lib/authClient';

export default function SignOutButton() {
  const [busy, setBusy] = useState(false);
  return (
    <button
      type="button"
      disabled={busy}
      className="rounded border border-brand-100/40 px-2 py-0.5 text-brand-50 hover:bg-brand-700"
      onClick={async () => {
        setBusy(true);
        await authClient.signOut();
        window.location.assign('/');
      }}
    >
      Sign out
    </button>
  );
}
