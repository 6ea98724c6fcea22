/**
 * New grid rows saved at the same time through two server processes on one database (a stack of this file's own,
 * scripts/throwaway-stack.ts, with a second server on its own port): every row is stored once with its results and
 * its audit event, the laboratory's audit chain stays whole, racing saves of one code keep one row, and a session
 * signed out through one server is refused by the other at once.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEMO_LAB, DEMO_PASSWORD, DEMO_PEOPLE } from '../../scripts/demo';
import { createHttpSession, signedInSession, type HttpSession } from '../../scripts/http-session';
import { openStudyOnDemoProtocol, startThrowawayStack, type ThrowawayStack } from '../../scripts/throwaway-stack';
import { verifyChain } from '../../src/server/audit';

const API = `/api/labs/${DEMO_LAB.slug}`;
const ROWS = 60;

let stack: ThrowawayStack;
let otherUrl: string;
let laboratoryId: string;
/** The technician's one session, used through either server. */
let technician: { first: HttpSession; other: HttpSession };

const emailOf = (role: (typeof DEMO_PEOPLE)[number]['role']) => DEMO_PEOPLE.find((p) => p.role === role)!.email;

async function query<T>(text: string, values: unknown[] = []): Promise<T[]> {
  return (await stack.db.$client.query(text, values)).rows as T[];
}

/** A row of duplicate results inside the glucose measuring interval (invented). */
const rowBody = (code: string, level: number) => ({
  code,
  comparative: [String(level), String(level + 0.4)],
  candidate: [String(level + 2.1), String(level + 2.5)],
  runDate: '2026-11-20',
  flags: [],
  flagNote: '',
});

beforeAll(async () => {
  stack = await startThrowawayStack('rowsaves');
  await stack.startServer();
  otherUrl = await stack.startOtherServer();
  const first = await signedInSession(stack.baseUrl, emailOf('technician'), DEMO_PASSWORD);
  technician = { first, other: createHttpSession(otherUrl, first.cookie) };
  [{ id: laboratoryId }] = await query<{ id: string }>('select id from laboratories where slug = $1', [DEMO_LAB.slug]);
}, 120_000);

afterAll(async () => {
  await stack?.remove();
});

describe('new rows saved at once through two server processes', () => {
  it('stores each row once, with its results and its audit event, and the chain stays whole', async () => {
    const scientist = await signedInSession(stack.baseUrl, emailOf('lab_scientist'), DEMO_PASSWORD);
    const studyId = await openStudyOnDemoProtocol(scientist, 'Two servers: rows saved at once');
    const codes = Array.from({ length: ROWS }, (_, i) => `TWO-${String(i + 1).padStart(3, '0')}`);
    const answers = await Promise.all(
      codes.map((code, i) => (i % 2 === 0 ? technician.first : technician.other).post(`${API}/studies/${studyId}/samples`, rowBody(code, 60 + i))),
    );
    expect(answers.map((a) => a.status)).toEqual(codes.map(() => 201));
    const saved = await Promise.all(answers.map(async (a) => ((await a.json()) as { row: { id: string; code: string; candidate: { text: string }[] } }).row));

    const stored = await query<{ id: string; code: string; results: number }>(
      'select s.id, s.code, (select count(*)::int from results r where r.sample_id = s.id) as results from samples s where s.study_id = $1 order by s.code',
      [studyId],
    );
    expect(stored.map((s) => s.code)).toEqual(codes);
    expect(stored.every((s) => s.results === 4)).toBe(true);
    // Each answer names the row the database holds, with the values sent.
    expect(new Map(saved.map((r) => [r.code, r.id]))).toEqual(new Map(stored.map((s) => [s.code, s.id])));
    expect(saved.find((r) => r.code === 'TWO-001')!.candidate.map((c) => c.text)).toEqual(['62.1', '62.5']);

    const events = await query<{ entity_id: string }>(
      `select entity_id from audit_events where laboratory_id = $1 and action = 'sample.created' and data->>'studyId' = $2 order by entity_id`,
      [laboratoryId, studyId],
    );
    expect(events.map((e) => e.entity_id)).toEqual(stored.map((s) => s.id).sort());
    const [{ n: labEvents }] = await query<{ n: number }>('select count(*)::int as n from audit_events where laboratory_id = $1', [laboratoryId]);
    expect(await verifyChain(stack.db, laboratoryId)).toMatchObject({ intact: true, events: labEvents });
  }, 60_000);

  it('keeps one row when saves of the same code (in any capitals) race through both servers; the others answer 409', async () => {
    const scientist = await signedInSession(stack.baseUrl, emailOf('lab_scientist'), DEMO_PASSWORD);
    const studyId = await openStudyOnDemoProtocol(scientist, 'Two servers: one code raced');
    const answers = await Promise.all(
      // the same code in other capitals is the same specimen: the case-blind unique index keeps one of them all
      Array.from({ length: 10 }, (_, i) => (i % 2 === 0 ? technician.first : technician.other).post(`${API}/studies/${studyId}/samples`, rowBody(i % 3 === 0 ? 'race-1' : 'RACE-1', 80))),
    );
    const statuses = answers.map((a) => a.status).sort();
    expect(statuses).toEqual([201, ...Array.from({ length: 9 }, () => 409)]);
    expect(await query('select id from samples where study_id = $1', [studyId])).toHaveLength(1);
    expect(await query('select id from results where study_id = $1', [studyId])).toHaveLength(4);
    expect(await query(`select id from audit_events where action = 'sample.created' and data->>'studyId' = $1`, [studyId])).toHaveLength(1);
    expect(await verifyChain(stack.db, laboratoryId)).toMatchObject({ intact: true });
  }, 60_000);

  it('refuses a session on the other server as soon as it is signed out on one, also when the cookie is replayed', async () => {
    const first = await signedInSession(stack.baseUrl, emailOf('technician'), DEMO_PASSWORD);
    const replayed = createHttpSession(otherUrl, first.cookie);
    expect((await replayed.get(`${API}/studies`)).status).toBe(200);
    expect((await first.post('/api/auth/sign-out', {})).status).toBe(200);
    expect((await replayed.get(`${API}/studies`)).status).toBe(401);
    expect((await createHttpSession(stack.baseUrl, replayed.cookie).get(`${API}/studies`)).status).toBe(401);
  });
});
