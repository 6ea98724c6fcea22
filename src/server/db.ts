import { DATABASE_URL } from 'astro:env/server';
import { createDatabase, type Database } from '../db/client';

let instance: Database | undefined;

/** The app's one pool, created on first use from DATABASE_URL (set by scripts/start.ts or by the lab). */
export function getDb(): Database {
  instance ??= createDatabase(DATABASE_URL);
  return instance;
}
