import { apiUploadSchema, IMPORT_LIMITS } from '../../../../../../lib/resultSchemas';
import { endpoint, json, requireLabOrToken } from '../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../server/problem';
import { tokenNameOf, uploadResults } from '../../../../../../server/results';

/** Results from a middleware or LIS (Bearer token) or a technician's session: all stored, or none. */
export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLabOrToken(locals, 'results.enter');
  const body = parseBody(apiUploadSchema, await readJson(request, IMPORT_LIMITS.bytes));
  const writer = user ? { userId: user.id, tokenName: null } : { userId: null, tokenName: (await tokenNameOf(request, lab.id)) ?? 'API token' };
  return json(await uploadResults(writer, lab.id, params.id, body), 201);
});
