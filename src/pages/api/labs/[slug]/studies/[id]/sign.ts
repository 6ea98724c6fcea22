import { PUBLIC_BASE_URL } from 'astro:env/server';
import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../server/problem';
import { signSchema, signStudy } from '../../../../../../server/signoff';

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'study.sign');
  const body = parseBody(signSchema, await readJson(request));
  // requireLab has checked that the role may sign, so there is one.
  return json(await signStudy({ id: user.id, name: user.name, role: locals.role! }, lab, params.id, body, PUBLIC_BASE_URL), 201);
});
