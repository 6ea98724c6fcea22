import { migrate } from 'drizzle-orm/node-postgres/migrator';
import { fileURLToPath } from 'node:url';
import type { Database } from '../src/db/client';

const migrationsFolder = fileURLToPath(new URL('../drizzle', import.meta.url));

/** Applies the committed Drizzle migrations in drizzle/ (each once, in order). */
export async function applyMigrations(db: Database) {
  await migrate(db, { migrationsFolder });
}
