import { endpoint, json, requireLab } from '../../../../../server/endpoint';
import { listMembers } from '../../../../../server/laboratories';

export const GET = endpoint(async ({ locals }) => {
  const { lab } = requireLab(locals, 'members.manage');
  return json({ members: await listMembers(lab.id) });
});
