import { useState } from 'react';
import { api, ApiError } from '../lib/apiClient';
import { FormMessage } from './ui/Field';

export default function AcceptInvitation({ token, laboratory }: { token: string; laboratory: string }) {
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<string | null>(null);
  return (
    <div className="grid gap-3">
      {error && <FormMessage tone="error">{error}</FormMessage>}
      <div>
        <button
          type="button"
          disabled={busy}
          className="rounded bg-brand-700 px-4 py-1.5 font-medium text-white hover:bg-brand-800 disabled:opacity-60"
          onClick={async () => {
            setBusy(true);
            try {
              const joined = await api<{ slug: string }>('POST', `/api/invitations/${encodeURIComponent(token)}/accept`);
              window.location.assign(`/labs/${joined.slug}`);
            } catch (e) {
              setError(e instanceof ApiError ? e.problem.detail : String(e));
              setBusy(false);
            }
          }}
        >
          Join {laboratory}
        </button>
      </div>
    </div>
  );
}
