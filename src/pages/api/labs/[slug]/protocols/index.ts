import { endpoint, json, requireLab } from '../../../../../server/endpoint';
import { createProtocol, createProtocolBodySchema, listProtocols } from '../../../../../server/protocols';
import { parseBody, readJson } from '../../../../../server/problem';

export const GET = endpoint(async ({ locals }) => {
  const { lab } = requireLab(locals, 'read');
  return json({ protocols: await listProtocols(lab.id) });
});

export const POST = endpoint(async ({ locals, request }) => {
  const { lab, user } = requireLab(locals, 'protocol.edit');
  const body = parseBody(createProtocolBodySchema, await readJson(request));
  return json(await createProtocol(user.id, lab.id, body), 201);
});
