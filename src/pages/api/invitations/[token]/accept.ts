import { endpoint, json, requireUser } from '../../../../server/endpoint';
import { acceptInvitation } from '../../../../server/laboratories';

export const POST = endpoint(async ({ locals, params }) => {
  const person = requireUser(locals);
  return json(await acceptInvitation(person, params.token!));
});
