import { analysisView, analysisViewJson, runAnalysis } from '../../../../../../../server/analysis';
import { endpoint, json, jsonText, requireLab } from '../../../../../../../server/endpoint';

/** The latest analysis run of the study, whether it is current, and the bootstrap job's progress. */
export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  return jsonText(analysisViewJson(await analysisView(lab.id, params.id!)));
});

/** Runs the analysis (or reuses the run while the inputs are unchanged). */
export const POST = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'analysis.run');
  const { reused } = await runAnalysis({ id: user.id }, lab.id, params.id!);
  return json({ reused, ...(await analysisView(lab.id, params.id!)) }, reused ? 200 : 201);
});
