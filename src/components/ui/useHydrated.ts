import { useEffect, useState } from 'react';

/**
 * False in the server-rendered HTML and until the island has hydrated, then true: controls that need the island's
 * code stay disabled until it can handle them (a press before hydration would otherwise be lost).
 *
 * @example
 * const hydrated = useHydrated();
 * <button disabled={!hydrated}>Start the draft</button>;
 */
export function useHydrated(): boolean {
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  return hydrated;
}
