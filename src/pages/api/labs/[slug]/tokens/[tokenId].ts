import { endpoint, requireLab } from '../../../../../server/endpoint';
import { revokeApiToken } from '../../../../../server/laboratories';

export const DELETE = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'tokens.manage');
  await revokeApiToken(user.id, lab.id, params.tokenId!);
  return new Response(null, { status: 204 });
});
