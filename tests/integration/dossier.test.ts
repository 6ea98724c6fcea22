import { createHash } from 'node:crypto';
import { asc, eq } from 'drizzle-orm';
import Papa from 'papaparse';
import { beforeAll, describe, expect, it } from 'vitest';
import yauzl from 'yauzl';
import { analysisRuns, auditEvents, results, samples } from '../../src/db/schema';
import { getDb } from '../../src/server/db';
import { analysedStudy, EXCLUDED_CODE, EXCLUSION_REASON, FORMULA_CODE, signStudy, type ReportStudy } from './dossierSetup';
import { createLabWithMembers, signIn } from './helpers';

/** The entries of a zip, in stored order, read with yauzl (an independent zip reader). */
function unzip(zip: Buffer): Promise<{ name: string; content: Buffer }[]> {
  return new Promise((resolve, reject) => {
    yauzl.fromBuffer(zip, { lazyEntries: true }, (error, file) => {
      if (error) return reject(error);
      const entries: { name: string; content: Buffer }[] = [];
      file.on('error', reject);
      file.on('end', () => resolve(entries));
      file.on('entry', (entry: yauzl.Entry) => {
        file.openReadStream(entry, (streamError, stream) => {
          if (streamError) return reject(streamError);
          const chunks: Buffer[] = [];
          stream.on('data', (chunk: Buffer) => chunks.push(chunk));
          stream.on('error', reject);
          stream.on('end', () => {
            entries.push({ name: entry.fileName, content: Buffer.concat(chunks) });
            file.readEntry();
          });
        });
      });
      file.readEntry();
    });
  });
}

const sha256 = (bytes: Buffer) => createHash('sha256').update(bytes).digest('hex');
const csvRows = (content: Buffer) => Papa.parse<Record<string, string>>(content.toString('utf8').trimEnd(), { header: true, newline: '\r\n' });

describe('the study dossier', () => {
  let study: ReportStudy;
  let base: string;
  let zip: Buffer;
  let files: Map<string, Buffer>;
  let names: string[];

  beforeAll(async () => {
    study = await analysedStudy('dossier');
    await signStudy(study);
    base = `/api/labs/${study.lab.slug}/studies/${study.studyId}`;
    const quality = await signIn(study.lab.people.quality.email);
    const response = await quality.get(`${base}/dossier`);
    expect(response.status).toBe(200);
    expect(response.headers.get('content-type')).toBe('application/zip');
    expect(response.headers.get('content-disposition')).toMatch(/^attachment; filename="dossier-Wren-bench-analyser-against-Lark-[0-9a-f]{8}\.zip"$/);
    zip = Buffer.from(await response.arrayBuffer());
    const entries = await unzip(zip);
    names = entries.map((e) => e.name);
    files = new Map(entries.map((e) => [e.name, e.content]));
  });

  it('holds the six files', () => {
    expect(names).toEqual(['report.pdf', 'results.csv', 'analysis.json', 'protocol.json', 'audit.csv', 'manifest.json']);
    expect(files.get('report.pdf')!.subarray(0, 5).toString()).toBe('%PDF-');
  });

  it('has a manifest whose sha256 and size match every other file', async () => {
    const manifest = JSON.parse(files.get('manifest.json')!.toString('utf8'));
    expect(Object.keys(manifest.files).sort()).toEqual(names.filter((n) => n !== 'manifest.json').sort());
    for (const [name, entry] of Object.entries(manifest.files) as [string, { sha256: string; size: number }][]) {
      const content = files.get(name)!;
      expect(entry.sha256, name).toBe(sha256(content));
      expect(entry.size, name).toBe(content.length);
    }
    expect(manifest).toMatchObject({ studyId: study.studyId, inputsHash: study.inputsHash, analysisRunId: study.runId, state: 'signed', verdict: 'accepted_with_conditions' });
    // The time is the analysis run's, never the clock's.
    const [run] = await getDb().select({ createdAt: analysisRuns.createdAt }).from(analysisRuns).where(eq(analysisRuns.id, study.runId));
    expect(manifest.generatedAt).toBe(run.createdAt.toISOString());
  });

  it('writes results.csv one row per result, the formula-like sample code escaped with a leading quote', async () => {
    const raw = files.get('results.csv')!.toString('utf8');
    // The code as a spreadsheet sees it: the quote prefix, then the text with its quotes doubled inside a quoted cell.
    expect(raw).toContain(`"'=HYPERLINK(""http://evil.example/x"",""open me"")"`);
    expect(raw.split('\r\n').some((line) => line.startsWith('='))).toBe(false);
    const parsed = csvRows(files.get('results.csv')!);
    expect(parsed.errors).toEqual([]);
    const stored = await getDb().select().from(results).where(eq(results.studyId, study.studyId));
    expect(parsed.data.length).toBe(stored.length);
    expect(parsed.meta.fields).toEqual(['sample_code', 'procedure', 'replicate', 'value', 'censored', 'unit', 'run_date', 'flags', 'flag_note', 'excluded', 'exclusion_reason']);
    const formulaRows = parsed.data.filter((r) => r.sample_code === `'${FORMULA_CODE}`);
    expect(formulaRows.length).toBe(4);
    const excluded = parsed.data.filter((r) => r.sample_code === EXCLUDED_CODE);
    expect(excluded.length).toBe(4);
    expect(excluded.every((r) => r.excluded === 'yes' && r.exclusion_reason === EXCLUSION_REASON && r.flags === 'clotted')).toBe(true);
    const censored = parsed.data.filter((r) => r.censored === '>');
    expect(censored.map((r) => `${r.sample_code} ${r.procedure} ${r.replicate}`).sort()).toEqual(['RP-CENS candidate 1', 'RP-CENS candidate 2']);
    // Every stored value comes back exactly.
    const byKey = new Map(parsed.data.map((r) => [`${r.sample_code.replace(/^'/, '')}|${r.procedure}|${r.replicate}`, Number(r.value)]));
    expect(stored.length).toBeGreaterThan(160);
    const sampleCodes = new Map((await getDb().select({ id: samples.id, code: samples.code }).from(samples).where(eq(samples.studyId, study.studyId))).map((r) => [r.id, r.code]));
    for (const r of stored) expect(byKey.get(`${sampleCodes.get(r.sampleId)}|${r.procedure}|${r.replicate}`)).toBe(r.value);
  });

  it('carries the stored analysis run and the pinned protocol version with its approver', () => {
    const analysis = JSON.parse(files.get('analysis.json')!.toString('utf8'));
    expect(analysis).toMatchObject({ id: study.runId, inputsHash: study.inputsHash, engineVersion: study.stored.analysis.engineVersion });
    expect(analysis.results.analysis.biasAtDecisionLevels).toEqual(study.stored.analysis.biasAtDecisionLevels);
    const protocol = JSON.parse(files.get('protocol.json')!.toString('utf8'));
    expect(protocol).toMatchObject({ title: 'Glucose comparison for the report', versionNumber: 1, approvedBy: study.lab.people.lab_scientist.name });
    expect(protocol.settings.decisionLevels.map((l: { value: number }) => l.value)).toEqual([54, 70, 100, 126, 200]);
  });

  it("writes the study's audit events with both hashes, as stored", async () => {
    const parsed = csvRows(files.get('audit.csv')!);
    expect(parsed.errors).toEqual([]);
    const stored = await getDb().select().from(auditEvents).where(eq(auditEvents.laboratoryId, study.lab.id)).orderBy(asc(auditEvents.id));
    // Every event of this lab is about this study (the lab was made for it).
    expect(parsed.data.map((r) => [Number(r.id), r.action, r.prev_hash, r.hash])).toEqual(stored.map((e) => [e.id, e.action, e.prevHash, e.hash]));
    expect(parsed.data.at(-1)!.action).toBe('study.signed');
  });

  it('is the same zip when downloaded again (entry dates and the manifest time come from the run)', async () => {
    const scientist = await signIn(study.lab.people.lab_scientist.email);
    const again = await scientist.get(`${base}/dossier`);
    expect(again.status).toBe(200);
    expect(Buffer.compare(Buffer.from(await again.arrayBuffer()), zip)).toBe(0);
  });

  it('is refused to technicians, medical directors and administrators (403), and to another laboratory (404)', async () => {
    for (const role of ['technician', 'medical_director', 'lab_admin'] as const) {
      const client = await signIn(study.lab.people[role].email);
      const response = await client.get(`${base}/dossier`);
      expect(response.status, role).toBe(403);
    }
    const other = await createLabWithMembers('dossier-other');
    const outsider = await signIn(other.people.quality.email);
    expect((await outsider.get(`${base}/dossier`)).status).toBe(404);
    expect((await outsider.get(`/api/labs/${other.slug}/studies/${study.studyId}/dossier`)).status).toBe(404);
  });
});
