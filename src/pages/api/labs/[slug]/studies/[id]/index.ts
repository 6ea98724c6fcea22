import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { availableTransitions, getStudy } from '../../../../../../server/studies';

export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  const found = await getStudy(lab.id, params.id);
  return json({ ...found, transitions: availableTransitions(found.study.state, locals.role) });
});
