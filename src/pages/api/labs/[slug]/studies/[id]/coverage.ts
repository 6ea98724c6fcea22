import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { studyCoverage } from '../../../../../../server/coverage';
import { getStudy } from '../../../../../../server/studies';

export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  const { study, settings } = await getStudy(lab.id, params.id);
  return json({ coverage: await studyCoverage(study.id, settings) });
});
