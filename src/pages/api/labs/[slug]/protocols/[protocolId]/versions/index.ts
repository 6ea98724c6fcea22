import { endpoint, json, requireLab } from '../../../../../../../server/endpoint';
import { startNextVersion } from '../../../../../../../server/protocols';

/** Edit an approved protocol: the next version as a draft copy (or the draft already open). */
export const POST = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'protocol.edit');
  const { version, created } = await startNextVersion(user.id, lab.id, params.protocolId!);
  return json({ version, created }, created ? 201 : 200);
});
