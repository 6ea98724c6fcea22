import { PUBLIC_BASE_URL } from 'astro:env/server';
import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../server/problem';
import { returnForChanges, returnSchema } from '../../../../../../server/signoff';

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'study.sign');
  const body = parseBody(returnSchema, await readJson(request));
  return json(await returnForChanges({ id: user.id, name: user.name }, lab, params.id, body, PUBLIC_BASE_URL));
});
