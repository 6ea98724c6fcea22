/**
 * A throwaway PostgreSQL cluster for the integration tests: created on a free port in .data/, migrated,
 * handed to the tests through DATABASE_URL, and removed at the end.
 */
import { createServer } from 'node:net';
import { createDatabase } from '../../src/db/client';
import { applyMigrations } from '../../scripts/migrate';
import { ensureCluster, removeCluster } from '../../scripts/postgres';
import { DATA_DIR } from '../../scripts/local';

export async function freePort(): Promise<number> {
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
  const cluster = await ensureCluster({ dataDir, port: await freePort(), database: 'biaswise_test' });
  const db = createDatabase(cluster.url, 2);
  await applyMigrations(db);
  await db.$client.end();
  process.env.DATABASE_URL = cluster.url;
  return () => removeCluster(dataDir);
}
