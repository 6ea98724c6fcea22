/**
 * The end-to-end stack: a fresh PostgreSQL cluster with the demo laboratory, the SMTP capture, and the
 * built server (scripts/test.ts builds it first). Everything is removed when Playwright stops it.
 */
import { spawn } from 'node:child_process';
import { rmSync } from 'node:fs';
import { createDatabase } from '../../src/db/client';
import { applyMigrations } from '../../scripts/migrate';
import { seedDemo } from '../../scripts/demo';
import { ROOT, SERVER_ENTRY } from '../../scripts/local';
import { ensureCluster, removeCluster } from '../../scripts/postgres';
import { startSmtpFake } from '../../scripts/smtp-fake';
import { E2E_PORTS } from './ports';
import { E2E_DIRS } from './stack';

removeCluster(E2E_DIRS.cluster);
rmSync(E2E_DIRS.mail, { recursive: true, force: true });
const cluster = await ensureCluster({ dataDir: E2E_DIRS.cluster, port: E2E_PORTS.db, database: 'biaswise_e2e' });
const db = createDatabase(cluster.url, 2);
await applyMigrations(db);
await seedDemo(db);
await db.$client.end();
const smtp = await startSmtpFake({ port: E2E_PORTS.smtp, dir: E2E_DIRS.mail });

const server = spawn(process.execPath, [SERVER_ENTRY], {
  cwd: ROOT,
  stdio: 'inherit',
  env: {
    ...process.env,
    HOST: '127.0.0.1',
    PORT: String(E2E_PORTS.web),
    DATABASE_URL: cluster.url,
    BETTER_AUTH_SECRET: 'e2e-only-secret-0123456789abcdefghijklmnop',
    PUBLIC_BASE_URL: `http://127.0.0.1:${E2E_PORTS.web}`,
    SMTP_URL: `smtp://127.0.0.1:${E2E_PORTS.smtp}`,
    MAIL_CAPTURE_DIR: E2E_DIRS.mail,
    SIGN_IN_LIMIT_PER_MINUTE: '1000',
  },
});

let stopping = false;
async function shutdown() {
  if (stopping) return;
  stopping = true;
  server.kill('SIGTERM');
  await smtp.close();
  removeCluster(E2E_DIRS.cluster);
  process.exit(0);
}
process.on('SIGTERM', shutdown);
process.on('SIGINT', shutdown);
server.on('exit', (code) => {
  if (!stopping) {
    console.error(`The e2e server exited early (code ${code}).`);
    void shutdown();
  }
});
