import { roleChangeSchema } from '../../../../../lib/memberSchemas';
import { endpoint, json, requireLab } from '../../../../../server/endpoint';
import { changeRole, removeMember } from '../../../../../server/laboratories';
import { parseBody, readJson } from '../../../../../server/problem';

export const PATCH = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'members.manage');
  const body = parseBody(roleChangeSchema, await readJson(request));
  return json({ member: await changeRole(user.id, lab.id, params.membershipId!, body.role, body.version) });
});

export const DELETE = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'members.manage');
  await removeMember(user.id, lab.id, params.membershipId!);
  return new Response(null, { status: 204 });
});
