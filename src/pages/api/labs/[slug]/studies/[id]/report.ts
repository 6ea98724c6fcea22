import { endpoint, json, requireLab } from '../../../../../../server/endpoint';
import { Problem } from '../../../../../../server/problem';
import { downloadName, latestReport, requestReport } from '../../../../../../server/reportJobs';

/** Queues the study's report PDF; the answer names the job to poll. */
export const POST = endpoint(async ({ locals, params }) => {
  const { lab, user } = requireLab(locals, 'dossier.export');
  const job = await requestReport({ id: user.id }, lab.id, params.id);
  return json({ job: { id: job.id, status: job.status, progress: job.progress, message: job.message } }, 202);
});

/** The latest stored report PDF of the study; everyone in the laboratory may read it. */
export const GET = endpoint(async ({ locals, params }) => {
  const { lab } = requireLab(locals, 'read');
  const report = await latestReport(lab.id, params.id);
  if (!report) throw new Problem(404, 'Not found', 'No report has been made for this study yet.');
  return new Response(new Uint8Array(report.content), {
    headers: {
      'content-type': 'application/pdf',
      'content-length': String(report.size),
      'content-disposition': `attachment; filename="${downloadName('report', report.title, report.sha256, 'pdf')}"`,
      'x-report-current': String(report.current),
      'cache-control': 'no-store',
    },
  });
});
