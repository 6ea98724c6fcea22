import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { and, eq } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { auditTrail } from '../../src/server/audit';
import { analysisRuns, protocols, protocolVersions, results, samples, studies } from '../../src/db/schema';
import { defaultSettingsFromTemplate } from '../../src/lib/protocolSchema';
import { loadTemplate } from '../../src/server/templates';
import { demoPairs } from '../../scripts/demo';
import { createLabWithMembers, signIn, type HttpClient, type TestLab } from './helpers';
import { PROCEDURES, problemOf } from './studySetup';
import type { StoredResults } from '../../src/server/analysis';

afterAll(() => getDb().$client.end());

const READERS = ['technician', 'medical_director', 'quality', 'lab_admin'] as const;

/**
 * An approved glucose protocol whose settings the CLI can also express: Tukey bisquare ψ with its default
 * constant started from the S-estimate (the engine's default start), λ from duplicates, seed 1, 2,000 resamples.
 */
async function approvedVersion(lab: TestLab) {
  const template = loadTemplate('glucose')!;
  const base = defaultSettingsFromTemplate(template);
  const settings = {
    ...base,
    samplePlan: { ...base.samplePlan, count: 60, replicates: 2 as const, days: 5 },
    demingLambda: { mode: 'duplicates' as const },
    robust: { psi: 'tukey' as const, tuning: [4.685], start: 's-estimate' as const },
    bootstrap: { resamples: 2000, seed: 1 },
  };
  const scientist = lab.people.lab_scientist.id;
  const db = getDb();
  const [protocol] = await db.insert(protocols).values({ laboratoryId: lab.id, title: 'Glucose', analyte: 'Glucose', createdBy: scientist }).returning();
  const [version] = await db
    .insert(protocolVersions)
    .values({ protocolId: protocol.id, laboratoryId: lab.id, versionNumber: 1, status: 'approved', settings, createdBy: scientist, approvedBy: scientist, approvedAt: new Date() })
    .returning();
  return { version, settings };
}

interface AnalysisStudy {
  lab: TestLab;
  studyId: string;
  scientist: HttpClient;
  api: string;
  settings: Awaited<ReturnType<typeof approvedVersion>>['settings'];
  sampleIdOf: Map<string, string>;
  pairs: ReturnType<typeof demoPairs>;
}

/** A study in Collecting with 60 invented duplicate pairs (the demo's generator, other seed) written to the database. */
async function analysisStudy(label: string): Promise<AnalysisStudy> {
  const lab = await createLabWithMembers(label);
  const { version, settings } = await approvedVersion(lab);
  const scientist = await signIn(lab.people.lab_scientist.email);
  const opened = await scientist.post(`/api/labs/${lab.slug}/studies`, { title: 'Wren against Lark', protocolVersionId: version.id, ...PROCEDURES, technicianIds: [] });
  expect(opened.status).toBe(201);
  const { study } = await opened.json();
  const started = await scientist.post(`/api/labs/${lab.slug}/studies/${study.id}/transitions`, { transition: 'start_collecting', version: study.version });
  expect(started.status).toBe(200);
  const pairs = demoPairs(60, 424242, true);
  const db = getDb();
  const sampleIdOf = new Map<string, string>();
  for (const [index, pair] of pairs.entries()) {
    const [sample] = await db.insert(samples).values({ laboratoryId: lab.id, studyId: study.id, code: pair.code, position: index + 1 }).returning();
    sampleIdOf.set(pair.code, sample.id);
    await db.insert(results).values(
      (['comparative', 'candidate'] as const).flatMap((procedure) =>
        pair[procedure].map((value, r) => ({ laboratoryId: lab.id, studyId: study.id, sampleId: sample.id, procedure, replicate: r + 1, value, unit: 'mg/dL' })),
      ),
    );
  }
  return { lab, studyId: study.id, scientist, api: `/api/labs/${lab.slug}/studies/${study.id}`, settings, sampleIdOf, pairs };
}

/** Polls the analysis until its bootstrap job is done. */
async function waitForBootstrap(client: HttpClient, api: string, timeoutMs = 120_000) {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const body = await (await client.get(`${api}/analysis`)).json();
    if (body.bootstrapDone) return body;
    if (body.job?.status === 'failed') throw new Error(`bootstrap failed: ${body.job.error}`);
    await new Promise((r) => setTimeout(r, 500));
  }
  throw new Error('bootstrap not done in time');
}

describe('analysis runs', () => {
  let s: AnalysisStudy;
  let dir: string;
  beforeAll(async () => {
    s = await analysisStudy('analysis');
    dir = mkdtempSync(join(tmpdir(), 'biaswise-analysis-'));
  });
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('stores the same fits, agreement and bias as the CLI on the same data, settings and seed', { timeout: 180_000 }, async () => {
    const first = await s.scientist.post(`${s.api}/analysis`);
    expect(first.status).toBe(201);
    const started = await first.json();
    expect(started.current).toBe(true);
    expect(started.run.results.bootstrap.jobId).toMatch(/^[0-9a-f-]{36}$/);
    const done = await waitForBootstrap(s.scientist, s.api);
    const stored = done.run.results as StoredResults;
    expect(done.run.id).toBe(started.run.id);

    const csv = ['sample_id,comparative_1,comparative_2,candidate_1,candidate_2', ...s.pairs.map((p) => [p.code, ...p.comparative, ...p.candidate].join(','))].join('\n');
    const file = join(dir, 'study.csv');
    writeFileSync(file, `${csv}\n`);
    const levels = s.settings.decisionLevels.map((l) => l.value).join(',');
    const out = execFileSync('npx', ['tsx', 'scripts/analyze.ts', file, '--json', '--methods', stored.analysis.methods.join(','), '--decision-levels', levels, '--seed', '1'], { encoding: 'utf8' });
    const cli = JSON.parse(out);

    expect(stored.analysis.n).toBe(cli.n);
    expect(Object.keys(stored.analysis.fits).sort()).toEqual(Object.keys(cli.fits).sort());
    for (const [method, fit] of Object.entries(cli.fits) as [string, Record<string, unknown>][]) {
      const mine = stored.analysis.fits[method as keyof typeof stored.analysis.fits]!;
      expect(mine.intercept, method).toBe(fit.intercept);
      expect(mine.slope, method).toBe(fit.slope);
      expect(mine.interceptCI, method).toEqual(fit.interceptCI);
      expect(mine.slopeCI, method).toEqual(fit.slopeCI);
      expect(mine.weights, method).toEqual(fit.weights);
    }
    const ba = stored.analysis.blandAltman.absolute;
    expect({ meanDifference: ba.meanDifference, sdDifference: ba.sdDifference, lowerLoA: ba.lowerLoA, upperLoA: ba.upperLoA }).toEqual(cli.blandAltman);
    expect(stored.analysis.diagnostics.cooksDistance).toEqual(cli.diagnostics.cooksDistance);
    expect(stored.analysis.biasAtDecisionLevels.map((row) => row.level)).toEqual(cli.biasAtDecisionLevels.map((row: { level: number }) => row.level));
    stored.analysis.biasAtDecisionLevels.forEach((row, k) => {
      for (const [method, entry] of Object.entries(cli.biasAtDecisionLevels[k].fits) as [string, { bias: number; percentBias: number; ci: [number, number] }][]) {
        const mine = row.fits[method as keyof typeof row.fits]!;
        expect(mine.bias, `${method} at ${row.level}`).toBe(entry.bias);
        expect(mine.percentBias).toBe(entry.percentBias);
        expect(mine.ci, `${method} CI at ${row.level}`).toEqual(entry.ci);
        expect(mine.verdict).toMatch(/^(within|beyond|inconclusive)$/);
      }
    });
    // The high-leverage caution names the far-out sample.
    expect(stored.analysis.cautions.find((c) => c.code === 'high-leverage')?.sampleIds).toContain('EM-0060');

    const actions = (await auditTrail(getDb(), s.lab.id, { entityId: s.studyId })).map((e) => e.action);
    expect(actions.filter((a) => a === 'analysis.run')).toHaveLength(1);
  });

  it('reuses the run while nothing changed', async () => {
    const again = await s.scientist.post(`${s.api}/analysis`);
    expect(again.status).toBe(200);
    const body = await again.json();
    expect(body.reused).toBe(true);
    const rows = await getDb().select().from(analysisRuns).where(eq(analysisRuns.studyId, s.studyId));
    expect(rows).toHaveLength(1);
    expect(body.run.id).toBe(rows[0].id);
  });

  it('lets every other role read the analysis and refuses them running it or excluding', async () => {
    const sampleId = s.sampleIdOf.get('EM-0017')!;
    for (const role of READERS) {
      const client = await signIn(s.lab.people[role].email);
      expect((await client.get(`${s.api}/analysis`)).status, role).toBe(200);
      const page = await client.get(`/labs/${s.lab.slug}/studies/${s.studyId}/analysis`);
      expect(page.status, role).toBe(200);
      expect(await page.text(), role).toContain('read only');
      expect((await client.get(`${s.api}/analysis/samples/${sampleId}`)).status, role).toBe(200);
      expect((await client.post(`${s.api}/analysis`)).status, role).toBe(403);
      expect((await client.post(`${s.api}/samples/${sampleId}/exclusion`, { reason: 'mine' })).status, role).toBe(403);
      expect((await client.request('DELETE', `${s.api}/samples/${sampleId}/exclusion`, { reason: 'mine' })).status, role).toBe(403);
    }
  });

  it("answers another laboratory's study and sample as missing (404)", async () => {
    const other = await createLabWithMembers('elsewhere');
    const outsider = await signIn(other.people.lab_scientist.email);
    const sampleId = s.sampleIdOf.get('EM-0017')!;
    const ownSlug = `/api/labs/${other.slug}/studies/${s.studyId}`;
    expect((await outsider.get(`/api/labs/${s.lab.slug}/studies/${s.studyId}/analysis`)).status).toBe(404);
    expect((await outsider.get(`${ownSlug}/analysis`)).status).toBe(404);
    expect((await outsider.post(`${ownSlug}/analysis`)).status).toBe(404);
    expect((await outsider.get(`${ownSlug}/analysis/samples/${sampleId}`)).status).toBe(404);
    expect((await outsider.post(`${ownSlug}/samples/${sampleId}/exclusion`, { reason: 'not mine' })).status).toBe(404);
    expect((await outsider.get(`/labs/${other.slug}/studies/${s.studyId}/analysis`)).status).toBe(404);
  });

  it('excludes only with a reason, audits it, and makes the analysis not current; including again needs a reason too', { timeout: 60_000 }, async () => {
    const sampleId = s.sampleIdOf.get('EM-0042')!;
    const url = `${s.api}/samples/${sampleId}/exclusion`;
    for (const body of [{}, { reason: '' }, { reason: '   ' }]) {
      const refused = await s.scientist.post(url, body);
      expect(refused.status).toBe(422);
      expect((await problemOf(refused)).errors?.map((e) => e.field)).toContain('reason');
    }
    expect((await (await s.scientist.get(`${s.api}/analysis`)).json()).current).toBe(true);

    const excluded = await s.scientist.post(url, { reason: 'Candidate result 34 % low; sample mix-up suspected' });
    expect(excluded.status).toBe(201);
    expect((await s.scientist.post(url, { reason: 'twice' })).status).toBe(409);
    const after = await (await s.scientist.get(`${s.api}/analysis`)).json();
    expect(after.current).toBe(false);
    expect(after.run.stale).toBe(true);

    const events = await auditTrail(getDb(), s.lab.id, { entityId: sampleId });
    const exclusionEvent = events.find((e) => e.action === 'sample.excluded');
    expect(exclusionEvent?.data).toMatchObject({ code: 'EM-0042', reason: 'Candidate result 34 % low; sample mix-up suspected', studyId: s.studyId });
    expect(exclusionEvent?.actorUserId).toBe(s.lab.people.lab_scientist.id);

    const rerun = await s.scientist.post(`${s.api}/analysis`);
    expect(rerun.status).toBe(201);
    const rerunBody = await rerun.json();
    const inputs = (rerunBody.run.results as StoredResults).inputs;
    expect(inputs.excluded).toEqual([{ sampleId, code: 'EM-0042', reason: 'Candidate result 34 % low; sample mix-up suspected', results: expect.any(Array) }]);
    // The hash covers the excluded sample's own results too.
    expect(inputs.excluded[0].results).toHaveLength(4);
    expect(rerunBody.run.results.analysis.n).toBe(59);
    expect(rerunBody.run.results.analysis.sampleIds).not.toContain('EM-0042');

    const detail = await (await s.scientist.get(`${s.api}/analysis/samples/${sampleId}`)).json();
    expect(detail.excluded).toBe(true);
    expect(detail.history.map((h: { action: string }) => h.action)).toContain('sample.excluded');

    expect((await s.scientist.request('DELETE', url, { reason: ' ' })).status).toBe(422);
    const included = await s.scientist.request('DELETE', url, { reason: 'Re-measured: the first candidate result was a mix-up' });
    expect(included.status).toBe(200);
    const actions = (await auditTrail(getDb(), s.lab.id, { entityId: sampleId })).map((e) => e.action);
    expect(actions.slice(-2)).toEqual(['sample.excluded', 'sample.included']);
    expect((await s.scientist.request('DELETE', url, { reason: 'again' })).status).toBe(409);
    // Back to the first run's inputs: that run is current again.
    const back = await (await s.scientist.get(`${s.api}/analysis`)).json();
    expect(back.current).toBe(false);
    // Two requests at once with the new inputs store one run.
    const both = await Promise.all([s.scientist.post(`${s.api}/analysis`), s.scientist.post(`${s.api}/analysis`)]);
    expect(both.map((r) => r.status).sort()).toEqual([200, 201]);
    const [reran, twin] = await Promise.all(both.map((r) => r.json()));
    expect(reran.run.id).toBe(twin.run.id);
    expect(reran.run.results.analysis.n).toBe(60);
    const runs = await getDb().select().from(analysisRuns).where(eq(analysisRuns.studyId, s.studyId));
    expect(runs).toHaveLength(3);
    expect(runs.filter((r) => !r.stale).map((r) => r.id)).toEqual([reran.run.id]);
  });

  it('refuses exclusions once the study is in review', async () => {
    await getDb().update(studies).set({ state: 'in_review' }).where(and(eq(studies.id, s.studyId), eq(studies.laboratoryId, s.lab.id)));
    const sampleId = s.sampleIdOf.get('EM-0017')!;
    const refused = await s.scientist.post(`${s.api}/samples/${sampleId}/exclusion`, { reason: 'too late' });
    expect(refused.status).toBe(409);
    expect((await problemOf(refused)).detail).toMatch(/before sign-off/);
  });
});
