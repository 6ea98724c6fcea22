import { endpoint, json, requireLab } from '../../../../../../../../server/endpoint';
import { approveBodySchema, approveVersion } from '../../../../../../../../server/protocols';
import { parseBody, readJson } from '../../../../../../../../server/problem';

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'protocol.approve');
  const body = parseBody(approveBodySchema, await readJson(request));
  return json({ version: await approveVersion(user.id, lab.id, params.protocolId!, params.versionId!, body) });
});
