import { sql } from 'drizzle-orm';
import { getDb } from './db';
import { Problem } from './problem';

export interface Health {
  status: 'ok' | 'degraded';
  database: { status: 'up' | 'down'; latencyMs?: number; error?: string };
}

/** A real round-trip to PostgreSQL: the app is only healthy when it can read its database. */
export async function checkHealth(): Promise<Health> {
  const started = performance.now();
  try {
    await getDb().execute(sql`select 1`);
    return { status: 'ok', database: { status: 'up', latencyMs: Math.round(performance.now() - started) } };
  } catch (error) {
    return { status: 'degraded', database: { status: 'down', error: (error as Error).message } };
  }
}

/**
 * For a request that failed unexpectedly: a 503 when the database cannot be reached (so people hear that the app is
 * waiting for its database, not that something is broken), or null when the database answers.
 *
 * @example
 * const outage = await outageProblem(); // Problem(503, 'Database unavailable', …) | null
 */
export async function outageProblem(): Promise<Problem | null> {
  const { database } = await checkHealth();
  if (database.status === 'up') return null;
  return new Problem(503, 'Database unavailable', 'The app cannot reach its database just now, so nothing was saved or changed. Try again in a minute.');
}
