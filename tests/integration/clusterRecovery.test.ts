/**
 * The project's own PostgreSQL survives a crash: after the server process is killed (kill -9, leaving its
 * postmaster.pid behind), starting again reuses the cluster and every committed row is still there.
 */
import { readFileSync } from 'node:fs';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import { DATA_DIR } from '../../scripts/local';
import { ensureCluster, removeCluster } from '../../scripts/postgres';
import { freePort } from '../../scripts/stacks';

const dataDir = `${DATA_DIR}/test-recovery-${process.pid}`;
afterAll(() => removeCluster(dataDir));

async function query(url: string, text: string) {
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  try {
    return (await client.query(text)).rows;
  } finally {
    await client.end();
  }
}

describe('own PostgreSQL cluster', () => {
  it('comes back with its data after the server process is killed', async () => {
    const port = await freePort();
    const first = await ensureCluster({ dataDir, port, database: 'recovery' });
    await query(first.url, 'create table kept (id int primary key, note text)');
    await query(first.url, "insert into kept values (1, 'committed before the crash')");

    const postmaster = Number(readFileSync(`${dataDir}/postmaster.pid`, 'utf8').split('\n')[0]);
    process.kill(postmaster, 'SIGKILL');
    await expect.poll(() => { try { process.kill(postmaster, 0); return true; } catch { return false; } }, { timeout: 10_000 }).toBe(false);

    // A second start reuses the same cluster (same password, same data) despite the stale postmaster.pid.
    const second = await ensureCluster({ dataDir, port, database: 'recovery' });
    expect(second.url).toBe(first.url);
    expect(await query(second.url, 'select note from kept')).toEqual([{ note: 'committed before the crash' }]);
  });
});
