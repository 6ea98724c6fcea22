/** "Edit this protocol": starts the next version as a draft copy of the approved one and opens it. */
import { useState } from 'react';
import { api, ApiError } from '../../lib/apiClient';
import { FormMessage } from '../ui/Field';
import { useHydrated } from '../ui/useHydrated';

/**
 * POST /protocols/:id/versions, then reload into the designer.
 *
 * @example
 * <StartVersionButton client:load slug="eastmere" protocolId={protocol.id} nextNumber={2} />
 */
export default function StartVersionButton({ slug, protocolId, nextNumber }: { slug: string; protocolId: string; nextNumber: number }) {
  const hydrated = useHydrated();
  const [busy, setBusy] = useState(false);
  const [problem, setProblem] = useState<string | null>(null);
  async function start() {
    setBusy(true);
    try {
      await api('POST', `/api/labs/${slug}/protocols/${protocolId}/versions`);
      window.location.reload();
    } catch (error) {
      setProblem(error instanceof ApiError ? error.problem.detail : 'The server could not be reached.');
      setBusy(false);
    }
  }
  return (
    <div className="grid gap-2">
      <div>
        <button
          type="button"
          onClick={() => void start()}
          disabled={busy || !hydrated}
          className="rounded bg-brand-700 px-3 py-1.5 text-sm font-medium text-white hover:bg-brand-800 focus:outline-2 focus:outline-offset-2 focus:outline-brand-600 disabled:opacity-60"
        >
          {busy ? 'Starting…' : `Edit: start version ${nextNumber} as a draft`}
        </button>
      </div>
      {problem && <FormMessage tone="error">{problem}</FormMessage>}
    </div>
  );
}
