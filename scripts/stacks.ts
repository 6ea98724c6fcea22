/** What every throwaway stack (integration tests, fault test, load bench) needs: free ports and cleaning up after killed runs. */
import { readdirSync } from 'node:fs';
import { createServer } from 'node:net';
import { DATA_DIR } from './local';
import { processAlive, removeCluster } from './postgres';

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
