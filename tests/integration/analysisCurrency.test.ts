import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { and, eq } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { analysisRuns, protocols, protocolVersions, results } from '../../src/db/schema';
import { defaultSettingsFromTemplate } from '../../src/lib/protocolSchema';
import { loadTemplate } from '../../src/server/templates';
import { createLabWithMembers, signIn, type HttpClient, type TestLab } from './helpers';
import { PROCEDURES } from './studySetup';

afterAll(() => getDb().$client.end());

/** Invented duplicate pairs for eight samples (demo-style data, not a reference). */
const ROWS = [
  ['C-01', ['52', '53'], ['54', '55']],
  ['C-02', ['81', '80'], ['84', '83']],
  ['C-03', ['104', '105'], ['107', '108']],
  ['C-04', ['133', '132'], ['137', '136']],
  ['C-05', ['171', '172'], ['176', '175']],
  ['C-06', ['208', '209'], ['214', '215']],
  ['C-07', ['256', '255'], ['262', '263']],
  ['C-08', ['301', '302'], ['309', '308']],
] as const;

interface Saved {
  id: string;
  version: number;
}

describe('analysis currency follows every change of the data at once', () => {
  let lab: TestLab;
  let scientist: HttpClient;
  let technician: HttpClient;
  let api: string;
  const saved = new Map<string, Saved>();

  const current = async () => {
    const response = await scientist.get(`${api}/analysis`);
    expect(response.status).toBe(200);
    return (await response.json()) as { current: boolean; run: { id: string; stale: boolean; createdAt: string } | null };
  };

  /** Saves sample C-03 with `candidate` as its candidate replicates (a reason is needed once it has results). */
  const saveC03 = async (candidate: [string, string]) => {
    const sample = saved.get('C-03')!;
    const response = await technician.put(`${api}/samples/${sample.id}`, {
      version: sample.version,
      code: 'C-03',
      comparative: ['104', '105'],
      candidate,
      runDate: '2026-11-20',
      flags: [],
      flagNote: '',
      reason: 'Transcription error corrected',
    });
    expect(response.status).toBe(200);
    const body = await response.json();
    saved.set('C-03', { id: sample.id, version: body.row.version });
  };

  beforeAll(async () => {
    lab = await createLabWithMembers('currency');
    const base = defaultSettingsFromTemplate(loadTemplate('glucose')!);
    const settings = { ...base, samplePlan: { ...base.samplePlan, count: 8, replicates: 2 as const, days: 1 }, bootstrap: { resamples: 200, seed: 7 } };
    const author = lab.people.lab_scientist.id;
    const db = getDb();
    const [protocol] = await db.insert(protocols).values({ laboratoryId: lab.id, title: 'Glucose', analyte: 'Glucose', createdBy: author }).returning();
    const [version] = await db
      .insert(protocolVersions)
      .values({ protocolId: protocol.id, laboratoryId: lab.id, versionNumber: 1, status: 'approved', settings, createdBy: author, approvedBy: author, approvedAt: new Date() })
      .returning();
    scientist = await signIn(lab.people.lab_scientist.email);
    technician = await signIn(lab.people.technician.email);
    const opened = await scientist.post(`/api/labs/${lab.slug}/studies`, { title: 'Currency', protocolVersionId: version.id, ...PROCEDURES, technicianIds: [lab.people.technician.id] });
    expect(opened.status).toBe(201);
    const { study } = await opened.json();
    api = `/api/labs/${lab.slug}/studies/${study.id}`;
    expect((await scientist.post(`${api}/transitions`, { transition: 'start_collecting', version: study.version })).status).toBe(200);
    for (const [code, comparative, candidate] of ROWS) {
      const response = await technician.post(`${api}/samples`, { code, comparative, candidate, runDate: '2026-11-20', flags: [], flagNote: '' });
      expect(response.status).toBe(201);
      const body = await response.json();
      saved.set(code, { id: body.row.id, version: body.row.version });
    }
    expect((await scientist.post(`${api}/analysis`)).status).toBe(201);
  });

  it('answers the run as stored', async () => {
    const view = await current();
    const [stored] = await getDb().select().from(analysisRuns).where(eq(analysisRuns.id, view.run!.id));
    expect(view.run).toMatchObject({ id: stored.id, stale: stored.stale, createdAt: stored.createdAt.toISOString() });
  });

  it('an edited result value makes the run not current, and the old value makes it current again', async () => {
    expect((await current()).current).toBe(true);
    // Read twice, so that a second read of unchanged data is answered the same way.
    expect((await current()).current).toBe(true);
    await saveC03(['117', '108']);
    const edited = await current();
    expect(edited.current).toBe(false);
    expect(edited.run?.stale).toBe(true);
    await saveC03(['107', '108']);
    expect((await current()).current).toBe(true);
  });

  it('an exclusion makes the run not current, and its revocation makes it current again', async () => {
    const url = `${api}/samples/${saved.get('C-05')!.id}/exclusion`;
    expect((await current()).current).toBe(true);
    expect((await scientist.post(url, { reason: 'Haemolysed on inspection' })).status).toBe(201);
    expect((await current()).current).toBe(false);
    expect((await scientist.request('DELETE', url, { reason: 'Re-inspected: not haemolysed' })).status).toBe(200);
    expect((await current()).current).toBe(true);
    expect((await scientist.post(url, { reason: 'Haemolysed after all' })).status).toBe(201);
    expect((await current()).current).toBe(false);
    expect((await scientist.request('DELETE', url, { reason: 'Second opinion: not haemolysed' })).status).toBe(200);
    expect((await current()).current).toBe(true);
  });

  it('a value changed in the database by another server makes the run not current at once', async () => {
    expect((await current()).current).toBe(true);
    const db = getDb();
    const where = and(eq(results.sampleId, saved.get('C-07')!.id), eq(results.procedure, 'candidate'), eq(results.replicate, 1));
    await db.update(results).set({ value: 270 }).where(where);
    expect((await current()).current).toBe(false);
    await db.update(results).set({ value: 262 }).where(where);
    expect((await current()).current).toBe(true);
  });
});
