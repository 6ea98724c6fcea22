/** Where the project keeps its local services: one place, so start, seed, stop and the tests agree. */
import { randomBytes } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { ensureCluster } from './postgres';

export const ROOT = fileURLToPath(new URL('..', import.meta.url));
export const DATA_DIR = `${ROOT}.data`;
export const APP_CLUSTER_DIR = `${DATA_DIR}/postgres`;
/** Ports of `npm start`; BIASWISE_DB_PORT and BIASWISE_SMTP_PORT move them (e.g. for a second checkout), PORT moves the app. */
export const APP_DB_PORT = Number(process.env.BIASWISE_DB_PORT ?? 54329);
export const APP_SMTP_PORT = Number(process.env.BIASWISE_SMTP_PORT ?? 54325);
export const APP_WEB_PORT = 4321;
/** Where `astro build` writes (BIASWISE_BUILD_DIR, as in astro.config.mjs), and the server entry inside it. */
export const BUILD_DIR = resolve(ROOT, process.env.BIASWISE_BUILD_DIR ?? 'dist');
export const SERVER_ENTRY = `${BUILD_DIR}/server/entry.mjs`;

/** DATABASE_URL when the lab set one; otherwise the project's own cluster, started if needed. */
export async function appDatabaseUrl(): Promise<string> {
  if (process.env.DATABASE_URL) return process.env.DATABASE_URL;
  const cluster = await ensureCluster({ dataDir: APP_CLUSTER_DIR, port: APP_DB_PORT, database: 'biaswise' });
  return cluster.url;
}

/** BETTER_AUTH_SECRET when set; otherwise one generated once and kept in .data/ (never committed). */
export function authSecret(): string {
  if (process.env.BETTER_AUTH_SECRET) return process.env.BETTER_AUTH_SECRET;
  const file = `${DATA_DIR}/auth-secret`;
  if (!existsSync(file)) {
    mkdirSync(DATA_DIR, { recursive: true });
    writeFileSync(file, randomBytes(32).toString('base64url'), { mode: 0o600 });
  }
  return readFileSync(file, 'utf8').trim();
}
