import { rowSaveSchema } from '../../../../../../../lib/resultSchemas';
import { endpoint, json, requireLab } from '../../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../../server/problem';
import { gridRows, saveRow } from '../../../../../../../server/results';
import { getStudy } from '../../../../../../../server/studies';

export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  const { study, rules } = await getStudy(lab.id, params.id);
  return json({ rows: await gridRows(study.id, rules.replicates), state: study.state });
});

export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'results.enter');
  const body = parseBody(rowSaveSchema, await readJson(request));
  return json(await saveRow({ userId: user.id, tokenName: null }, lab.id, params.id, null, body), 201);
});
