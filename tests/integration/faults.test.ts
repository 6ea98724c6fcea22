/**
 * Faults, on a stack of this file's own (scripts/throwaway-stack.ts) so that its database can be stopped and its
 * server killed: PostgreSQL stopped in the middle of a CSV import, and the app killed -9 while a report job runs.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import pg from 'pg';
import { DEMO_LAB, DEMO_PASSWORD, DEMO_PEOPLE, DEMO_STUDY_TITLE } from '../../scripts/demo';
import { signedInSession, type HttpSession } from '../../scripts/http-session';
import { ensureCluster, stopCluster } from '../../scripts/postgres';
import { openStudyOnDemoProtocol, startThrowawayStack, type ThrowawayStack } from '../../scripts/throwaway-stack';

/** Short enough that the attempt a killed server was running is retried within the test. */
const JOB_EXPIRE_SECONDS = 10;
const IMPORT_ROWS = 3000;
const API = `/api/labs/${DEMO_LAB.slug}`;

let stack: ThrowawayStack;
let scientist: HttpSession;
let technician: HttpSession;
let laboratoryId: string;

const emailOf = (role: (typeof DEMO_PEOPLE)[number]['role']) => DEMO_PEOPLE.find((p) => p.role === role)!.email;
const signInAs = (role: (typeof DEMO_PEOPLE)[number]['role']) => signedInSession(stack.baseUrl, emailOf(role), DEMO_PASSWORD);
const sleep = (ms: number) => new Promise((resolve) => setTimeout(resolve, ms));

async function until<T>(what: string, probe: () => Promise<T | undefined>, timeoutMs: number): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const found = await probe();
    if (found !== undefined) return found;
    await sleep(25);
  }
  throw new Error(`${what} did not happen within ${timeoutMs / 1000} s`);
}

async function okJson<T>(response: Response, what: string): Promise<T> {
  if (!response.ok) throw new Error(`${what}: ${response.status} ${await response.text()}`);
  return (await response.json()) as T;
}

/** Counts on this file's own database (the shared integration database is not involved). */
async function countFor(table: 'samples' | 'results' | 'import_logs' | 'attachments', studyId: string): Promise<number> {
  const { rows } = await stack.db.$client.query<{ n: number }>(`select count(*)::int as n from ${table} where study_id = $1`, [studyId]);
  return rows[0].n;
}

beforeAll(async () => {
  // Two server processes: a fault must be handled the same when several share the work.
  stack = await startThrowawayStack('faults', { env: { JOB_EXPIRE_SECONDS: String(JOB_EXPIRE_SECONDS), WEB_PROCESSES: '2' } });
  await stack.startServer();
  scientist = await signInAs('lab_scientist');
  technician = await signInAs('technician');
  const { rows } = await stack.db.$client.query<{ id: string }>('select id from laboratories where slug = $1', [DEMO_LAB.slug]);
  laboratoryId = rows[0].id;
}, 90_000);

afterAll(async () => {
  await stack?.remove();
});

/** Invented duplicate pairs inside the glucose measuring interval, one sample per row. */
function largeCsv(rows: number): Uint8Array {
  const lines = ['Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2'];
  for (let i = 1; i <= rows; i++) {
    const level = 40 + ((i * 37) % 290);
    lines.push(`F-${String(i).padStart(5, '0')},${level},${level + 0.4},${level + 2.1},${level + 2.5}`);
  }
  return new TextEncoder().encode(`${lines.join('\n')}\n`);
}

const MAPPING = { sampleCode: 'Sample', comparative: ['Comparative 1', 'Comparative 2'], candidate: ['Candidate 1', 'Candidate 2'] };

function postImport(studyId: string, file: Uint8Array, signal?: AbortSignal) {
  const form = new FormData();
  form.set('file', new Blob([new Uint8Array(file)], { type: 'text/csv' }), 'large.csv');
  form.set('settings', JSON.stringify({ mapping: MAPPING }));
  return fetch(`${stack.baseUrl}${API}/studies/${studyId}/imports`, { method: 'POST', body: form, headers: { cookie: technician.cookie, origin: stack.baseUrl }, signal });
}

async function health() {
  const response = await fetch(`${stack.baseUrl}/api/health`, { signal: AbortSignal.timeout(10_000) });
  return { status: response.status, body: (await response.json()) as { status: string; database: { status: string } } };
}

describe('PostgreSQL stopped in the middle of an import', () => {
  it('fails the import cleanly, reports the outage, keeps no partial rows and recovers when the database returns', async () => {
    const studyId = await openStudyOnDemoProtocol(scientist, 'Fault: database stopped during an import');
    const before = { samples: await countFor('samples', studyId), results: await countFor('results', studyId), logs: await countFor('import_logs', studyId), files: await countFor('attachments', studyId) };
    const file = largeCsv(IMPORT_ROWS);
    const serverPid = stack.server!.pid;

    // Holding the laboratory's audit-chain lock stops the import after it has written every sample and result in
    // its transaction and before it commits: the database is stopped with all of that in flight.
    const holder = new pg.Client({ connectionString: stack.cluster.url });
    holder.on('error', () => {});
    await holder.connect();
    await holder.query('select pg_advisory_lock(hashtext($1))', [`audit:${laboratoryId}`]);
    const answer = postImport(studyId, file, AbortSignal.timeout(30_000));
    await until(
      'the import waiting on the audit lock with its rows written',
      async () => {
        const { rows } = await holder.query<{ n: number }>(
          `select count(*)::int as n from pg_stat_activity where wait_event_type = 'Lock' and wait_event = 'advisory' and query like '%append_audit_event%'`,
        );
        return rows[0].n === 1 ? true : undefined;
      },
      20_000,
    );
    stopCluster(stack.cluster.dataDir, 'immediate');
    await holder.end().catch(() => {});

    const failed = await answer;
    expect(failed.status).toBe(503);
    expect(failed.headers.get('content-type')).toContain('application/problem+json');
    expect(await failed.json()).toMatchObject({ status: 503, title: 'Database unavailable', detail: expect.stringMatching(/nothing was saved/) });

    const down = await health();
    expect(down.status).toBe(503);
    expect(down.body.database.status).toBe('down');
    // A signed-in request while the database is away is answered with the outage, not left hanging.
    const listing = await technician.get(`${API}/studies`);
    expect(listing.status).toBe(503);
    expect(listing.headers.get('content-type')).toContain('application/problem+json');
    expect((await listing.json()).title).toBe('Database unavailable');

    await ensureCluster({ dataDir: stack.cluster.dataDir, port: stack.cluster.port, database: stack.cluster.database });
    const back = await until(
      'the health check to recover',
      async () => {
        const answer = await health();
        return answer.status === 200 ? answer : undefined;
      },
      30_000,
    );
    expect(back.body.database.status).toBe('up');
    // The same process recovered by itself: it was not restarted.
    expect(stack.server!.pid).toBe(serverPid);
    expect(stack.server!.exitCode).toBeNull();

    expect({ samples: await countFor('samples', studyId), results: await countFor('results', studyId), logs: await countFor('import_logs', studyId), files: await countFor('attachments', studyId) }).toEqual(before);

    const again = await postImport(studyId, file, AbortSignal.timeout(30_000));
    expect(again.status).toBe(201);
    expect(await again.json()).toMatchObject({ rows: IMPORT_ROWS, samplesCreated: IMPORT_ROWS, resultsWritten: IMPORT_ROWS * 4 });
    expect(await countFor('results', studyId)).toBe(before.results + IMPORT_ROWS * 4);
    expect(await countFor('import_logs', studyId)).toBe(before.logs + 1);
  }, 90_000);
});

interface JobState {
  status: string;
  attempts: number;
  message: string | null;
  error: string | null;
  result_id: string | null;
}

async function jobRow(jobId: string): Promise<JobState> {
  const { rows } = await stack.db.$client.query<JobState>('select status, attempts, message, error, result_id from jobs where id = $1', [jobId]);
  return rows[0];
}

describe('the app killed while a report job runs', () => {
  it('retries the lost attempt after a restart, stores the report, and a new request succeeds', async () => {
    const { studies } = await okJson<{ studies: { id: string; title: string }[] }>(await scientist.get(`${API}/studies`), 'listing studies');
    const base = `${API}/studies/${studies.find((s) => s.title === DEMO_STUDY_TITLE)!.id}`;
    await okJson(await scientist.post(`${base}/analysis`, {}), 'running the analysis');
    await until('the bootstrap to finish', async () => ((await okJson<{ bootstrapDone: boolean }>(await scientist.get(`${base}/analysis`), 'reading the analysis')).bootstrapDone ? true : undefined), 60_000);

    const queued = await scientist.post(`${base}/report`, {});
    expect(queued.status).toBe(202);
    const { job } = (await queued.json()) as { job: { id: string } };
    // Killed while drawing: the attempt started, wrote progress, and has not stored anything.
    await until('the report job to be drawing', async () => ((await jobRow(job.id)).message === 'Drawing the report' ? true : undefined), 30_000);
    await stack.stopServer('SIGKILL');
    const lost = await jobRow(job.id);
    expect(lost).toMatchObject({ status: 'running', attempts: 1, result_id: null });

    await stack.startServer();
    const finished = await until(
      'the retried report job to end',
      async () => {
        const row = await jobRow(job.id);
        return row.status === 'done' || row.status === 'failed' ? row : undefined;
      },
      (JOB_EXPIRE_SECONDS * 3 + 20) * 1000,
    );
    expect(finished).toMatchObject({ status: 'done', attempts: 2, error: null });
    const { rows: stored } = await stack.db.$client.query<{ purpose: string; media_type: string }>('select purpose, media_type from attachments where id = $1', [finished.result_id]);
    expect(stored).toEqual([{ purpose: 'report', media_type: 'application/pdf' }]);

    const download = await scientist.get(`${base}/report`);
    expect(download.status).toBe(200);
    expect(download.headers.get('x-report-current')).toBe('true');
    expect(Buffer.from(await download.arrayBuffer()).subarray(0, 5).toString('latin1')).toBe('%PDF-');

    // Asking again works after the restart (the stored report is reused).
    const retry = await scientist.post(`${base}/report`, {});
    expect(retry.status).toBe(202);
    const { job: second } = (await retry.json()) as { job: { id: string } };
    const secondDone = await until('the second report job to end', async () => {
      const row = await jobRow(second.id);
      return row.status === 'done' || row.status === 'failed' ? row : undefined;
    }, 30_000);
    expect(secondDone).toMatchObject({ status: 'done', result_id: finished.result_id });
  }, 120_000);
});
