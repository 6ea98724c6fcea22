import { transitionSchema } from '../../../../../../lib/resultSchemas';
import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../server/problem';
import { transitionStudy } from '../../../../../../server/studies';

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'read');
  const body = parseBody(transitionSchema, await readJson(request));
  return json({ study: await transitionStudy({ id: user.id, role: locals.role }, lab.id, params.id, body.transition, body.version) });
});
