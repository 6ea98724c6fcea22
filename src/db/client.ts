import { drizzle, type NodePgDatabase } from 'drizzle-orm/node-postgres';
import pg from 'pg';
import * as schema from './schema';

export type Database = NodePgDatabase<typeof schema> & { $client: pg.Pool };

/**
 * One connection pool and its Drizzle handle. The app makes one per process (src/server/db.ts);
 * scripts and tests make their own with the URL they were given.
 */
export function createDatabase(url: string, max = 10): Database {
  const pool = new pg.Pool({ connectionString: url, max });
  return drizzle(pool, { schema }) as Database;
}
