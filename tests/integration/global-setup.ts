/**
 * The integration stack: a throwaway PostgreSQL cluster on a free port in .data/, migrated; the SMTP capture;
 * and the built server (`npx astro build` first; `npm test` does it), two processes, on a free port. The tests get the same
 * environment variables the app reads, plus TEST_BASE_URL; everything is removed at the end.
 */
import { existsSync, mkdirSync, rmSync } from 'node:fs';
import { createDatabase } from '../../src/db/client';
import { applyMigrations } from '../../scripts/migrate';
import { ensureCluster, removeCluster } from '../../scripts/postgres';
import { DATA_DIR, SERVER_ENTRY } from '../../scripts/local';
import { startSmtpFake } from '../../scripts/smtp-fake';
import { waitForHealth } from '../../scripts/wait-for-health';
import { freePort, removeAbandoned, spawnServer } from '../../scripts/stacks';

export default async function setup() {
  mkdirSync(DATA_DIR, { recursive: true });
  removeAbandoned(/^test-(?:integration|recovery)-(?:mail-)?(\d+)$/);
  const entry = SERVER_ENTRY;
  if (!existsSync(entry)) throw new Error('Integration tests need the built server: run `npx astro build` first (npm test does).');
  const dataDir = `${DATA_DIR}/test-integration-${process.pid}`;
  const mailDir = `${DATA_DIR}/test-integration-mail-${process.pid}`;
  const cluster = await ensureCluster({ dataDir, port: await freePort(), database: 'biaswise_test' });
  const db = createDatabase(cluster.url, 2);
  await applyMigrations(db);
  await db.$client.end();
  const smtp = await startSmtpFake({ port: await freePort(), dir: mailDir });
  const webPort = await freePort();
  const baseUrl = `http://127.0.0.1:${webPort}`;

  const env = {
    DATABASE_URL: cluster.url,
    BETTER_AUTH_SECRET: 'integration-only-secret-0123456789abcdefgh',
    PUBLIC_BASE_URL: baseUrl,
    SMTP_URL: `smtp://127.0.0.1:${smtp.port}`,
    MAIL_CAPTURE_DIR: mailDir,
    // Many tests sign in from 127.0.0.1; the per-account lock is what the rate-limit test checks.
    SIGN_IN_LIMIT_PER_MINUTE: '1000',
  };
  Object.assign(process.env, env, { TEST_BASE_URL: baseUrl });
  // Two server processes on the one port, as a deployment with several may run: every test also checks that
  // nothing the app needs lives in one process only.
  const server = spawnServer({ ...process.env, ...env, HOST: '127.0.0.1', PORT: String(webPort), WEB_PROCESSES: '2' }, ['ignore', 'ignore', 'inherit']);
  await waitForHealth(baseUrl, 60);

  return async () => {
    server.kill('SIGTERM');
    await smtp.close();
    removeCluster(dataDir);
    rmSync(mailDir, { recursive: true, force: true });
  };
}
