import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../server/problem';
import { amendSchema, amendStudy } from '../../../../../../server/signoff';

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'study.open');
  const body = parseBody(amendSchema, await readJson(request));
  return json(await amendStudy({ id: user.id }, lab.id, params.id, body), 201);
});
