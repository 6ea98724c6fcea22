import { roleChangeSchema } from '../../../../../lib/memberSchemas';
import { endpoint, json, requireLab } from '../../../../../server/endpoint';
import { changeRole, removeMember } from '../../../../../server/laboratories';
import { notFound, parseBody, readJson } from '../../../../../server/problem';
import { isUuid } from '../../../../../server/studies';

export const PATCH = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'members.manage');
  const body = parseBody(roleChangeSchema, await readJson(request));
  // A malformed id names no member (and must not reach PostgreSQL's uuid parser).
  if (!isUuid(params.membershipId)) throw notFound('member');
  return json({ member: await changeRole(user.id, lab.id, params.membershipId, body.role, body.version) });
});

export const DELETE = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'members.manage');
  if (!isUuid(params.membershipId)) throw notFound('member');
  await removeMember(user.id, lab.id, params.membershipId);
  return new Response(null, { status: 204 });
});
