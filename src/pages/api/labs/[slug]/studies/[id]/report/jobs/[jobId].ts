import { endpoint, json, requireLab } from '../../../../../../../../server/endpoint';
import { getReportJob } from '../../../../../../../../server/reportJobs';

/** Progress of a report job: status, fraction done, what it is doing, and the stored report once done. */
export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  const job = await getReportJob(lab.id, params.id, params.jobId);
  return json({ job: { id: job.id, status: job.status, progress: job.progress, message: job.message, resultId: job.resultId, error: job.error } });
});
