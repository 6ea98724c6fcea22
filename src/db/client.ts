import { drizzle, type NodePgDatabase } from 'drizzle-orm/node-postgres';
import pg from 'pg';
import * as schema from './schema';

export type Database = NodePgDatabase<typeof schema> & { $client: pg.Pool };

/**
 * One connection pool and its Drizzle handle. The app makes one per process (src/server/db.ts);
 * scripts and tests make their own with the URL they were given.
 */
export function createDatabase(url: string, max = 10): Database {
  // A connection that cannot be made within 10 s fails the request instead of leaving it waiting.
  const pool = new pg.Pool({ connectionString: url, max, connectionTimeoutMillis: 10_000 });
  // The server ending a connection (database stopped or restarted) must not end this process. The pool drops an
  // idle one and reports it here; one in use fails its query, and its client's own 'error' event needs a listener
  // too. New connections are made when the database is back.
  pool.on('error', (error) => console.error('database: an idle connection was lost:', error.message));
  pool.on('connect', (client) => client.on('error', () => {}));
  return drizzle(pool, { schema }) as Database;
}
