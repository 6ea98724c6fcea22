/**
 * What every stack (npm start, integration tests, fault test, load bench) needs: the built server started one way,
 * free ports, and cleaning up after killed runs.
 */
import { spawn, type ChildProcess, type StdioOptions } from 'node:child_process';
import { readdirSync } from 'node:fs';
import { createServer } from 'node:net';
import { availableParallelism } from 'node:os';
import { DATA_DIR, ROOT } from './local';
import { processAlive, removeCluster } from './postgres';

/**
 * How many processes scripts/serve.ts runs: WEB_PROCESSES, or one per core but one, since the database (npm start's
 * own cluster) runs on the same machine and needs a core. Measured with npm run bench:http on 2 cores, one process
 * saved rows faster than two (p95 82 ms at 794 saves/s against 102 ms at 632/s): two processes competed with
 * PostgreSQL and the clients for the same cores.
 *
 * @example
 * webProcesses(); // 1 on a 2-core machine without WEB_PROCESSES
 */
export function webProcesses(): number {
  const count = Number(process.env.WEB_PROCESSES ?? Math.max(1, availableParallelism() - 1));
  if (!Number.isInteger(count) || count < 1) throw new Error(`WEB_PROCESSES must be a whole number of at least 1, not "${process.env.WEB_PROCESSES}".`);
  return count;
}

/**
 * Starts the built server (`npx astro build` first) as scripts/serve.ts does it: several processes on one port.
 * `env` is the whole environment the server gets (HOST, PORT, DATABASE_URL, …; WEB_PROCESSES sets how many).
 *
 * @example
 * const server = spawnServer({ ...process.env, PORT: '4321', DATABASE_URL: url }, ['ignore', 'ignore', 'inherit']);
 */
export function spawnServer(env: NodeJS.ProcessEnv, stdio: StdioOptions): ChildProcess {
  return spawn(process.execPath, ['--import', 'tsx', `${ROOT}scripts/serve.ts`], { cwd: ROOT, env, stdio });
}

/**
 * A TCP port on 127.0.0.1 that nothing listens on right now.
 *
 * @example
 * const port = await freePort(); // e.g. 41873
 */
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

/**
 * Removes the folders in .data/ of runs killed before their clean-up: `pattern` captures the owning process id,
 * and folders whose process is gone are removed.
 *
 * @example
 * removeAbandoned(/^test-integration-(?:mail-)?(\d+)$/);
 */
export function removeAbandoned(pattern: RegExp) {
  let entries: string[];
  try {
    entries = readdirSync(DATA_DIR);
  } catch {
    return;
  }
  for (const entry of entries) {
    const match = entry.match(pattern);
    if (!match || processAlive(Number(match[1]))) continue;
    // Stops a cluster if it is one, then deletes the folder (and a cluster's password file).
    removeCluster(`${DATA_DIR}/${entry}`);
  }
}
