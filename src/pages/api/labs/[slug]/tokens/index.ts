import { tokenCreateSchema } from '../../../../../lib/memberSchemas';
import { endpoint, json, requireLab } from '../../../../../server/endpoint';
import { createApiToken, listApiTokens } from '../../../../../server/laboratories';
import { parseBody, readJson } from '../../../../../server/problem';

export const GET = endpoint(async ({ locals }) => {
  const { lab } = requireLab(locals, 'tokens.manage');
  return json({ tokens: await listApiTokens(lab.id) });
});

export const POST = endpoint(async ({ locals, request }) => {
  const { lab, user } = requireLab(locals, 'tokens.manage');
  const body = parseBody(tokenCreateSchema, await readJson(request));
  return json({ token: await createApiToken(user.id, lab.id, body.name) }, 201);
});
