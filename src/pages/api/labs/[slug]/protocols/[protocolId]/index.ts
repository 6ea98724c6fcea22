import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { getProtocol } from '../../../../../../server/protocols';

export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  return json({ protocol: await getProtocol(lab.id, params.protocolId!) });
});
