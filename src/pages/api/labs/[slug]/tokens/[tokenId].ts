import { endpoint, requireLab } from '../../../../../server/endpoint';
import { revokeApiToken } from '../../../../../server/laboratories';
import { notFound } from '../../../../../server/problem';
import { isUuid } from '../../../../../server/studies';

export const DELETE = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'tokens.manage');
  // A malformed id names no token (and must not reach PostgreSQL's uuid parser).
  if (!isUuid(params.tokenId)) throw notFound('active API token');
  await revokeApiToken(user.id, lab.id, params.tokenId);
  return new Response(null, { status: 204 });
});
