import { rowRemoveSchema, rowSaveSchema } from '../../../../../../../lib/resultSchemas';
import { endpoint, json, requireLab } from '../../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../../server/problem';
import { removeRow, saveRow } from '../../../../../../../server/results';

export const PUT = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'results.enter');
  const body = parseBody(rowSaveSchema, await readJson(request));
  return json(await saveRow({ userId: user.id, tokenName: null }, lab.id, params.id, params.sampleId!, body));
});

/** Removes the row with its results: `{ version, reason }`; a stale version answers 409 with the saved row. */
export const DELETE = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'results.enter');
  const body = parseBody(rowRemoveSchema, await readJson(request));
  return json(await removeRow({ userId: user.id, tokenName: null }, lab.id, params.id, params.sampleId!, body));
});
