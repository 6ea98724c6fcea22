/**
 * The bootstrap job of an analysis run: recomputes the run from its own stored inputs with the seeded bootstrap
 * CIs (Efron 1987; 2,000 resamples by default) and stores the complete analysis in the run.
 */
import { defineJobHandler, JOB_POLICY } from './jobs';
import { biasIntervalKind, methodName } from '../lib/stats/index';
import { BOOTSTRAP_JOB_KIND, completeAnalysis, getRun, setRunResults, type StoredResults } from './analysis';

defineJobHandler(BOOTSTRAP_JOB_KIND, async (job, progress) => {
  const runId = (job.payload as { runId?: string }).runId;
  const run = runId ? await getRun(runId) : undefined;
  if (!run || run.laboratoryId !== job.laboratoryId) throw new Error(`analysis run ${runId ?? '(none)'} not found`);
  const stored = run.results as StoredResults;
  const bootstrapped = stored.analysis.methods.filter((m) => biasIntervalKind(m) === 'bootstrap').length;
  const resamples = stored.inputs.settings.bootstrap.resamples;
  await progress(0.02, `Resampling ${resamples} times for ${bootstrapped} estimators`);
  try {
    // the fits come first and take little; the bootstraps share the rest of the bar
    const analysis = await completeAnalysis(stored.inputs, ({ done, total, method }) =>
      progress(0.05 + (0.9 * done) / total, `Resampling ${resamples} times: ${methodName(method)} (${done + 1} of ${total})`),
    );
    await setRunResults(run.id, { ...stored, analysis, bootstrap: { ...stored.bootstrap, jobId: job.id, status: 'done' } });
  } catch (error) {
    // The last attempt's failure is what the page shows; earlier ones are retried.
    if (job.attempts > JOB_POLICY.retryLimit) {
      await setRunResults(run.id, { ...stored, bootstrap: { ...stored.bootstrap, jobId: job.id, status: 'failed', error: (error as Error).message } });
    }
    throw error;
  }
  return run.id;
});
