/**
 * The study report as queued work: a 'report-pdf' job reads the study, renders the PDF and stores it as an
 * attachment (purpose 'report'). A stored report is named by the key of the data it shows, so it is reused while
 * nothing it shows has changed and the dossier can tell whether it is current.
 */
import { createHash } from 'node:crypto';
import { and, desc, eq } from 'drizzle-orm';
import { attachments, jobs } from '../db/schema';
import { getDb } from './db';
import { defineJobHandler, enqueueJob, getJob, type JobRow } from './jobs';
import { notFound, Problem } from './problem';
import { loadReportData, reportKey, type ReportData } from './report/data';
import { renderReport } from './report/render';
import { getStudy, isUuid } from './studies';

export const REPORT_JOB_KIND = 'report-pdf';
export const REPORT_PURPOSE = 'report';

type AttachmentRow = typeof attachments.$inferSelect;

const storedName = (key: string) => `report-${key}.pdf`;

/**
 * A file name people get: what it is, the study title in safe characters and the start of a hash that tells
 * versions apart.
 *
 * @example
 * downloadName('report', 'Wren against Lark', 'ab12cd34ef…', 'pdf'); // 'report-Wren-against-Lark-ab12cd34.pdf'
 */
export function downloadName(what: string, title: string, hash: string, extension: string): string {
  const safe = title.replace(/[^A-Za-z0-9]+/g, '-').replace(/^-|-$/g, '').slice(0, 60) || 'study';
  return `${what}-${safe}-${hash.slice(0, 8)}.${extension}`;
}

async function storedReport(laboratoryId: string, studyId: string, key: string): Promise<AttachmentRow | undefined> {
  const [row] = await getDb()
    .select()
    .from(attachments)
    .where(and(eq(attachments.laboratoryId, laboratoryId), eq(attachments.studyId, studyId), eq(attachments.purpose, REPORT_PURPOSE), eq(attachments.fileName, storedName(key))))
    .limit(1);
  return row;
}

/**
 * The report PDF of the study as it stands: the stored one when its data key matches, otherwise rendered now
 * (and not stored; storing is the job's work).
 *
 * @example
 * const { pdf, data } = await currentReportPdf(lab.id, studyId);
 */
export async function currentReportPdf(laboratoryId: string, studyId: string | undefined): Promise<{ pdf: Buffer; data: ReportData; stored: boolean }> {
  const data = await loadReportData(laboratoryId, studyId);
  const found = await storedReport(laboratoryId, data.study.id, reportKey(data));
  if (found) return { pdf: found.content, data, stored: true };
  return { pdf: await renderReport(data), data, stored: false };
}

defineJobHandler(REPORT_JOB_KIND, async (job, progress) => {
  if (!job.studyId) throw new Error('a report job needs a study');
  await progress(0.1, 'Reading the study');
  const data = await loadReportData(job.laboratoryId, job.studyId);
  const key = reportKey(data);
  const existing = await storedReport(job.laboratoryId, job.studyId, key);
  if (existing) return existing.id;
  await progress(0.3, 'Drawing the report');
  const pdf = await renderReport(data);
  await progress(0.9, 'Storing the report');
  const [row] = await getDb()
    .insert(attachments)
    .values({
      laboratoryId: job.laboratoryId,
      studyId: job.studyId,
      purpose: REPORT_PURPOSE,
      fileName: storedName(key),
      mediaType: 'application/pdf',
      size: pdf.length,
      sha256: createHash('sha256').update(pdf).digest('hex'),
      content: pdf,
      uploadedBy: job.createdBy,
    })
    .returning({ id: attachments.id });
  return row.id;
});

/**
 * Queues the report of a study (409 when it has no current analysis, checked before queueing so the person
 * hears it at once).
 *
 * @example
 * const job = await requestReport({ id: user.id }, lab.id, studyId); // poll getReportJob(lab.id, job.id)
 */
export async function requestReport(actor: { id: string }, laboratoryId: string, studyId: string | undefined): Promise<JobRow> {
  const data = await loadReportData(laboratoryId, studyId);
  return enqueueJob({ laboratoryId, studyId: data.study.id, kind: REPORT_JOB_KIND, createdBy: actor.id, payload: { runId: data.run.id } });
}

/**
 * A report job of the laboratory, for progress polling (404 for another kind, study or laboratory).
 *
 * @example
 * const { status, progress, message } = await getReportJob(lab.id, studyId, jobId);
 */
export async function getReportJob(laboratoryId: string, studyId: string | undefined, jobId: string | undefined): Promise<JobRow> {
  if (!isUuid(jobId) || !isUuid(studyId)) throw notFound('report job');
  const job = await getJob(laboratoryId, jobId);
  if (job.kind !== REPORT_JOB_KIND || job.studyId !== studyId) throw notFound('report job');
  return job;
}

/**
 * The latest stored report of a study, with whether it still shows the study as it stands; null when none.
 *
 * @example
 * const latest = await latestReport(lab.id, studyId); // { id, createdAt, size, current } | null
 */
export async function latestReport(laboratoryId: string, studyId: string | undefined) {
  const { study } = await getStudy(laboratoryId, studyId);
  const [row] = await getDb()
    .select()
    .from(attachments)
    .where(and(eq(attachments.laboratoryId, laboratoryId), eq(attachments.studyId, study.id), eq(attachments.purpose, REPORT_PURPOSE)))
    .orderBy(desc(attachments.createdAt))
    .limit(1);
  if (!row) return null;
  let current = false;
  try {
    current = row.fileName === storedName(reportKey(await loadReportData(laboratoryId, study.id)));
  } catch (error) {
    // No current analysis: the stored report cannot be current.
    if (!(error instanceof Problem)) throw error;
  }
  return { id: row.id, createdAt: row.createdAt.toISOString(), size: row.size, sha256: row.sha256, current, content: row.content, title: study.title };
}

/**
 * The latest running or queued report job of a study, so a page opened mid-way shows its progress.
 *
 * @example
 * const pending = await pendingReportJob(lab.id, studyId); // JobRow | null
 */
export async function pendingReportJob(laboratoryId: string, studyId: string): Promise<JobRow | null> {
  const [row] = await getDb()
    .select()
    .from(jobs)
    .where(and(eq(jobs.laboratoryId, laboratoryId), eq(jobs.studyId, studyId), eq(jobs.kind, REPORT_JOB_KIND)))
    .orderBy(desc(jobs.createdAt))
    .limit(1);
  return row && (row.status === 'queued' || row.status === 'running') ? row : null;
}
