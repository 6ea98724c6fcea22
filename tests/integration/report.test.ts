import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { asc, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { exclusions, samples } from '../../src/db/schema';
import { getDb } from '../../src/server/db';
import { methodName } from '../../src/lib/stats/cautions';
import { loadReportData } from '../../src/server/report/data';
import { renderReport } from '../../src/server/report/render';
import { analysedStudy, EXCLUDED_CODE, EXCLUSION_REASON, SIGN_COMMENT, SIGN_MEANING, signStudy, type ReportStudy } from './dossierSetup';
import { createLabWithMembers, signIn, type HttpClient } from './helpers';

const scratch = mkdtempSync(join(tmpdir(), 'biaswise-report-'));
afterAll(() => rmSync(scratch, { recursive: true, force: true }));

/** The PDF's text as poppler's pdftotext extracts it (reading order, one page after another). */
function pdfText(pdf: Uint8Array, layout = false): string {
  const file = join(scratch, `${crypto.randomUUID()}.pdf`);
  writeFileSync(file, pdf);
  return execFileSync('pdftotext', [...(layout ? ['-layout'] : []), '-enc', 'UTF-8', file, '-'], { encoding: 'utf8' });
}

async function waitForJob(client: HttpClient, path: string) {
  const deadline = Date.now() + 25_000;
  for (;;) {
    const response = await client.get(path);
    expect(response.status).toBe(200);
    const { job } = await response.json();
    if (job.status === 'done' || job.status === 'failed') return job;
    if (Date.now() > deadline) throw new Error(`report job still ${job.status} (${job.message})`);
    await new Promise((r) => setTimeout(r, 200));
  }
}

describe('the study report PDF', () => {
  let study: ReportStudy;
  let base: string;
  let pdf: Uint8Array;
  let text: string;

  beforeAll(async () => {
    study = await analysedStudy('report');
    await signStudy(study);
    base = `/api/labs/${study.lab.slug}/studies/${study.studyId}`;
    const scientist = await signIn(study.lab.people.lab_scientist.email);
    const queued = await scientist.post(`${base}/report`);
    expect(queued.status).toBe(202);
    const { job } = await queued.json();
    const finished = await waitForJob(scientist, `${base}/report/jobs/${job.id}`);
    expect(finished).toMatchObject({ status: 'done', progress: 1 });
    expect(finished.resultId).toMatch(/^[0-9a-f-]{36}$/);
    const download = await scientist.get(`${base}/report`);
    expect(download.status).toBe(200);
    expect(download.headers.get('content-type')).toBe('application/pdf');
    expect(download.headers.get('x-report-current')).toBe('true');
    pdf = new Uint8Array(await download.arrayBuffer());
    text = pdfText(pdf);
  });

  it('is a PDF whose text names the laboratory, the study, both procedures and the protocol version', () => {
    expect(Buffer.from(pdf.subarray(0, 5)).toString()).toBe('%PDF-');
    expect(text).toContain(study.lab.name);
    expect(text).toContain('Wren bench analyser against Lark');
    expect(text).toContain('Bench analyser "Wren", reagent lot LOT-C1, software 2.0');
    expect(text).toContain('Core analyser "Lark", reagent lot LOT-R9, software 5.1');
    expect(text).toContain('Glucose comparison for the report, version 1');
  });

  it('holds the verdict and the signer with role, meaning and comment', () => {
    expect(text).toContain('Signed: Accepted with conditions');
    const director = study.lab.people.medical_director;
    expect(text).toContain(director.name);
    expect(text).toContain('Medical director');
    expect(text).toContain(SIGN_MEANING);
    expect(text).toContain(SIGN_COMMENT);
    expect(text).not.toContain('Not signed yet.');
  });

  it('holds the decision-level table: one line per level with its allowable limit and the primary verdict in words', () => {
    const layout = pdfText(pdf, true);
    expect(layout).toContain('Bias at the medical decision levels');
    const analysis = study.stored.analysis;
    const words = { within: 'Within limit', beyond: 'Beyond limit', inconclusive: 'Inconclusive' } as const;
    expect(analysis.biasAtDecisionLevels.length).toBe(5);
    for (const row of analysis.biasAtDecisionLevels) {
      const verdict = row.fits[analysis.primary]?.verdict;
      expect(verdict).toBeDefined();
      // The row starts with the level, then the allowable limit (as rounded in the table), and carries the verdict word.
      const line = layout.split('\n').find((l) => {
        const [level, limit] = l.trim().split(/\s+/);
        return Number(level) === row.level && Math.abs(Number(limit) - row.allowableLimit!) < 0.05;
      });
      expect(line, `row for level ${row.level}`).toBeDefined();
      expect(line).toContain(words[verdict!]);
    }
    expect(text).toContain(`Primary estimator ${methodName(analysis.primary)}`);
  });

  it('lists the exclusion with its reason, the standing caution and the audit summary', () => {
    expect(text).toContain(EXCLUDED_CODE);
    expect(text).toContain(EXCLUSION_REASON);
    expect(text).toContain("These statistics inform the medical director's decision and never take its place.");
    expect(text).toContain('The medical director decides under local regulation.');
    expect(text).toMatch(/Chain of the laboratory\s+Intact/);
    expect(text).toContain('study.signed');
  });

  it('puts page X of Y, the engine version and the inputs hash on every page', () => {
    const pages = text.split('\f').filter((p) => p.trim().length > 0);
    expect(pages.length).toBeGreaterThanOrEqual(2);
    pages.forEach((page, i) => {
      expect(page).toContain(`page ${i + 1} of ${pages.length}`);
      expect(page).toContain(`engine ${study.stored.analysis.engineVersion}`);
      expect(page).toContain(study.inputsHash);
    });
  });

  it('renders the same data to the same bytes, here and in the server that stored it', async () => {
    const data = await loadReportData(study.lab.id, study.studyId);
    const first = await renderReport(data);
    const second = await renderReport(await loadReportData(study.lab.id, study.studyId));
    expect(Buffer.compare(first, second)).toBe(0);
    expect(Buffer.compare(first, Buffer.from(pdf))).toBe(0);
    expect(pdfText(first)).toBe(text);
  });
});

describe('who may make and read the report', () => {
  let study: ReportStudy;
  let base: string;

  beforeAll(async () => {
    study = await analysedStudy('report-roles');
    base = `/api/labs/${study.lab.slug}/studies/${study.studyId}`;
  });

  it('says "not signed yet" before sign-off; quality staff make it, everyone in the lab downloads it', async () => {
    const quality = await signIn(study.lab.people.quality.email);
    const none = await quality.get(`${base}/report`);
    expect(none.status).toBe(404);
    expect((await none.json()).detail).toBe('No report has been made for this study yet.');
    const queued = await quality.post(`${base}/report`);
    expect(queued.status).toBe(202);
    const { job } = await queued.json();
    expect((await waitForJob(quality, `${base}/report/jobs/${job.id}`)).status).toBe('done');
    const technician = await signIn(study.lab.people.technician.email);
    const download = await technician.get(`${base}/report`);
    expect(download.status).toBe(200);
    const text = pdfText(new Uint8Array(await download.arrayBuffer()));
    expect(text).toContain('Collecting results: not signed yet');
    expect(text).toContain('Not signed yet.');
  });

  it('refuses technicians, medical directors and administrators making it (403)', async () => {
    for (const role of ['technician', 'medical_director', 'lab_admin'] as const) {
      const client = await signIn(study.lab.people[role].email);
      expect((await client.post(`${base}/report`)).status, role).toBe(403);
    }
  });

  it('answers another laboratory with 404, as for a study that does not exist', async () => {
    const other = await createLabWithMembers('report-other');
    const outsider = await signIn(other.people.quality.email);
    expect((await outsider.get(`${base}/report`)).status).toBe(404);
    expect((await outsider.post(`${base}/report`)).status).toBe(404);
    // Their own laboratory's address with our study's id: still 404.
    const ownLab = `/api/labs/${other.slug}/studies/${study.studyId}`;
    expect((await outsider.get(`${ownLab}/report`)).status).toBe(404);
    expect((await outsider.post(`${ownLab}/report`)).status).toBe(404);
  });
});

describe('a study whose data changed since its analysis', () => {
  it('cannot have a report until the analysis runs again (409 with the reason)', async () => {
    const study = await analysedStudy('report-stale');
    // Excluding one more sample changes the inputs: the stored run is no longer current.
    const [first] = await getDb().select().from(samples).where(eq(samples.studyId, study.studyId)).orderBy(asc(samples.position)).limit(1);
    await getDb().insert(exclusions).values({ laboratoryId: study.lab.id, studyId: study.studyId, sampleId: first.id, reason: 'Sample mix-up suspected', excludedBy: study.lab.people.lab_scientist.id });
    const scientist = await signIn(study.lab.people.lab_scientist.email);
    const response = await scientist.post(`/api/labs/${study.lab.slug}/studies/${study.studyId}/report`);
    expect(response.status).toBe(409);
    expect((await response.json()).detail).toMatch(/run the analysis again/);
  });
});
