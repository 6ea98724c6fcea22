import { verifyChain } from '../../../../../server/audit';
import { getDb } from '../../../../../server/db';
import { endpoint, json, requireLab } from '../../../../../server/endpoint';

/** The laboratory's audit chain checked from its first event: intact with the last hash, or the first broken link. */
export const GET = endpoint(async ({ locals }) => {
  const { lab } = requireLab(locals, 'read');
  return json({ chain: await verifyChain(getDb(), lab.id) });
});
