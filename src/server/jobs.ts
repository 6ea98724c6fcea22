/**
 * Long work runs as jobs in a PostgreSQL-backed queue (pg-boss), so several app servers can share one
 * database and a job interrupted by a crash is retried. The `jobs` table carries what people see: status,
 * progress and outcome.
 */
import PgBoss from 'pg-boss';
import { and, eq } from 'drizzle-orm';
import { DATABASE_URL, JOB_EXPIRE_SECONDS } from 'astro:env/server';
import { getDb } from './db';
import { jobs } from '../db/schema';
import { notFound } from './problem';

export type JobRow = typeof jobs.$inferSelect;
export type ReportProgress = (fraction: number, message?: string) => Promise<void>;
/** Does the work; returns the id of what it made (or null). Throwing fails the attempt (pg-boss retries it). */
export type JobHandler = (job: JobRow, progress: ReportProgress) => Promise<string | null>;

/** Attempts after the first, and how long an attempt may run before it counts as lost (a killed server). */
export const JOB_POLICY = { retryLimit: 2, retryDelaySeconds: 2, expireInSeconds: JOB_EXPIRE_SECONDS } as const;

/** Lost attempts are looked for at least twice per expiry (pg-boss's own default is every 120 s). */
const MAINTENANCE_SECONDS = Math.min(120, Math.max(1, Math.ceil(JOB_POLICY.expireInSeconds / 2)));

const handlers = new Map<string, JobHandler>();

/** Registers the handler of one kind of job; modules call it when they are imported (see workers.ts). */
export function defineJobHandler(kind: string, handler: JobHandler) {
  handlers.set(kind, handler);
}

let boss: Promise<PgBoss> | undefined;

/** The started queue of this process; a start that failed (the database was away) is tried again on the next call. */
function queue(): Promise<PgBoss> {
  boss ??= (async () => {
    const instance = new PgBoss({ connectionString: DATABASE_URL, schema: 'pgboss', max: 4, maintenanceIntervalSeconds: MAINTENANCE_SECONDS });
    instance.on('error', (error) => console.error('job queue:', error));
    await instance.start();
    return instance;
  })().catch((error: unknown) => {
    boss = undefined;
    throw error;
  });
  return boss;
}

export async function enqueueJob(input: {
  laboratoryId: string;
  studyId?: string | null;
  kind: string;
  payload?: Record<string, unknown>;
  createdBy?: string | null;
  message?: string;
}): Promise<JobRow> {
  const [row] = await getDb()
    .insert(jobs)
    .values({
      laboratoryId: input.laboratoryId,
      studyId: input.studyId ?? null,
      kind: input.kind,
      payload: input.payload ?? {},
      createdBy: input.createdBy ?? null,
      message: input.message ?? 'Waiting to start',
    })
    .returning();
  try {
    const q = await queue();
    await q.createQueue(input.kind);
    await q.send(input.kind, { jobId: row.id }, {
      retryLimit: JOB_POLICY.retryLimit,
      retryDelay: JOB_POLICY.retryDelaySeconds,
      expireInSeconds: JOB_POLICY.expireInSeconds,
    });
  } catch (error) {
    // not queued: remove the row, so that nobody waits for a job that will never run (if the database answers now)
    await getDb().delete(jobs).where(eq(jobs.id, row.id)).catch(() => undefined);
    throw error;
  }
  return row;
}

async function runJob(jobId: string, handler: JobHandler) {
  const db = getDb();
  const [row] = await db.select().from(jobs).where(eq(jobs.id, jobId));
  if (!row) return;
  await db
    .update(jobs)
    .set({ status: 'running', attempts: row.attempts + 1, error: null, updatedAt: new Date() })
    .where(eq(jobs.id, jobId));
  const progress: ReportProgress = async (fraction, message) => {
    await db
      .update(jobs)
      .set({ progress: Math.min(1, Math.max(0, fraction)), message: message ?? null, updatedAt: new Date() })
      .where(eq(jobs.id, jobId));
  };
  try {
    const resultId = await handler({ ...row, attempts: row.attempts + 1 }, progress);
    await db
      .update(jobs)
      .set({ status: 'done', progress: 1, message: 'Done', resultId, updatedAt: new Date() })
      .where(eq(jobs.id, jobId));
  } catch (error) {
    await db
      .update(jobs)
      .set({ status: 'failed', error: (error as Error).message, message: 'Failed', updatedAt: new Date() })
      .where(eq(jobs.id, jobId));
    throw error;
  }
}

let started: Promise<void> | undefined;

/** Starts one worker per registered kind of job in this process (once). */
export function startWorkers(): Promise<void> {
  started ??= (async () => {
    const q = await queue();
    for (const [kind, handler] of handlers) {
      await q.createQueue(kind);
      await q.work<{ jobId: string }>(kind, { pollingIntervalSeconds: 0.5 }, async ([job]) => runJob(job.data.jobId, handler));
    }
  })().catch((error: unknown) => {
    started = undefined; // the next request tries again (workers.ts)
    throw error;
  });
  return started;
}

/** Stops the queue cleanly (waits for running jobs), e.g. on SIGTERM. */
export async function stopWorkers() {
  if (boss) await (await boss).stop({ graceful: true, wait: true });
}

export async function getJob(laboratoryId: string, jobId: string): Promise<JobRow> {
  const [row] = await getDb().select().from(jobs).where(and(eq(jobs.id, jobId), eq(jobs.laboratoryId, laboratoryId)));
  if (!row) throw notFound('job');
  return row;
}
