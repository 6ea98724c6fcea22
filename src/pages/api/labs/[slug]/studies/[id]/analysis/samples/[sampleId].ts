import { sampleDetail } from '../../../../../../../../server/analysis';
import { endpoint, json, requireLab } from '../../../../../../../../server/endpoint';

/** One sample's results, flags, exclusions and audit history. */
export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  return json(await sampleDetail(lab.id, params.id!, params.sampleId!));
});
