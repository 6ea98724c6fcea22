import { sql } from 'drizzle-orm';
import { getDb } from './db';

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
