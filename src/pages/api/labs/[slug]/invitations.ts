import { PUBLIC_BASE_URL } from 'astro:env/server';
import { inviteSchema } from '../../../../lib/memberSchemas';
import { endpoint, json, requireLab } from '../../../../server/endpoint';
import { invite } from '../../../../server/laboratories';
import { parseBody, readJson } from '../../../../server/problem';

export const POST = endpoint(async ({ locals, request }) => {
  const { lab, user } = requireLab(locals, 'members.manage');
  const body = parseBody(inviteSchema, await readJson(request));
  const invitation = await invite({ id: user.id, name: user.name }, lab, body.email, body.role, PUBLIC_BASE_URL);
  return json({ invitation: { id: invitation.id, email: invitation.email, role: invitation.role, expiresAt: invitation.expiresAt } }, 201);
});
