import { PUBLIC_BASE_URL } from 'astro:env/server';
import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../server/problem';
import { submitForSignOff, submitSchema } from '../../../../../../server/signoff';

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'study.submit');
  const body = parseBody(submitSchema, await readJson(request));
  return json(await submitForSignOff({ id: user.id, name: user.name }, lab, params.id, body.version, PUBLIC_BASE_URL));
});
