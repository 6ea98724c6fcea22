/**
 * The integration stack: a throwaway PostgreSQL cluster on a free port in .data/, migrated, and the SMTP
 * capture, handed to the tests through the same environment variables the app reads; all removed at the end.
 */
import { rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { createDatabase } from '../../src/db/client';
import { applyMigrations } from '../../scripts/migrate';
import { ensureCluster, removeCluster } from '../../scripts/postgres';
import { DATA_DIR } from '../../scripts/local';
import { startSmtpFake } from '../../scripts/smtp-fake';

async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      server.close(() => resolve(typeof address === 'object' && address ? address.port : 0));
    });
  });
}

export default async function setup() {
  const dataDir = `${DATA_DIR}/test-integration-${process.pid}`;
  const mailDir = `${DATA_DIR}/test-integration-mail-${process.pid}`;
  const cluster = await ensureCluster({ dataDir, port: await freePort(), database: 'biaswise_test' });
  const db = createDatabase(cluster.url, 2);
  await applyMigrations(db);
  await db.$client.end();
  const smtp = await startSmtpFake({ port: await freePort(), dir: mailDir });

  Object.assign(process.env, {
    DATABASE_URL: cluster.url,
    BETTER_AUTH_SECRET: 'integration-only-secret-0123456789abcdefgh',
    PUBLIC_BASE_URL: 'http://127.0.0.1:4321',
    SMTP_URL: `smtp://127.0.0.1:${smtp.port}`,
    MAIL_CAPTURE_DIR: mailDir,
  });
  return async () => {
    await smtp.close();
    removeCluster(dataDir);
    rmSync(mailDir, { recursive: true, force: true });
  };
}
