/**
 * A stack of its own for the fault tests and the HTTP bench: a throwaway PostgreSQL cluster on a free loopback
 * port with the migrations and the demo laboratory, and the BUILT server as a child process that the caller may
 * stop, kill and start again. Nothing is shared with the integration stack or the project's own database.
 */
import type { ChildProcess } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync } from 'node:fs';
import { createDatabase, type Database } from '../src/db/client';
import { DEMO_LAB, DEMO_STUDY_TITLE, seedDemo } from './demo';
import type { HttpSession } from './http-session';
import { DATA_DIR, SERVER_ENTRY } from './local';
import { applyMigrations } from './migrate';
import { ensureCluster, processAlive, removeCluster, type Cluster } from './postgres';
import { waitForHealth } from './wait-for-health';
import { freePort, removeAbandoned, spawnServer } from './stacks';

export interface ThrowawayStack {
  cluster: Cluster;
  /** A small pool of the caller's own on the cluster (for setup and for checking what is stored). */
  db: Database;
  baseUrl: string;
  /** The running server process, or null between a stop and the next start. */
  readonly server: ChildProcess | null;
  /** Starts the built server and waits until /api/health answers 200. */
  startServer(): Promise<void>;
  /** Sends `signal` to the server (SIGKILL: to each of its processes) and waits until they have all ended. */
  stopServer(signal?: NodeJS.Signals): Promise<void>;
  /**
   * Starts another server on the same cluster, with the same secret and settings, on a port of its own (as two app
   * servers of one deployment); returns its base URL. remove() stops it.
   */
  startOtherServer(): Promise<string>;
  /** Server, pool and cluster, all gone. */
  remove(): Promise<void>;
}

const PREFIX = 'throwaway-';

/** The worker processes the server's primary (scripts/serve.ts) has forked, as Linux lists a process's children. */
function serverProcesses(primaryPid: number): number[] {
  try {
    return readFileSync(`/proc/${primaryPid}/task/${primaryPid}/children`, 'utf8').trim().split(/\s+/).filter(Boolean).map(Number);
  } catch {
    return [];
  }
}

/** Whether a process runs: it exists and has not ended as a zombie (ended, not yet reaped by its new parent). */
function stillRunning(pid: number): boolean {
  if (!processAlive(pid)) return false;
  try {
    return readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1]?.[0] !== 'Z';
  } catch {
    return false;
  }
}

/** Waits until none of `pids` runs; after 10 s the ones left are killed. */
async function processesEnded(pids: number[]) {
  const deadline = Date.now() + 10_000;
  for (;;) {
    const left = pids.filter(stillRunning);
    if (left.length === 0) return;
    if (Date.now() > deadline) {
      for (const pid of left) process.kill(pid, 'SIGKILL');
      return;
    }
    await new Promise((resolve) => setTimeout(resolve, 20));
  }
}

/** Sends `signal` to a server (SIGKILL: to each of its processes) and waits until they have all ended. */
async function stopProcesses(primary: ChildProcess, signal: NodeJS.Signals) {
  if (primary.exitCode !== null || primary.signalCode !== null) return;
  const ended = new Promise<void>((resolve) => primary.once('exit', () => resolve()));
  const workers = serverProcesses(primary.pid!);
  primary.kill(signal);
  // Killing the server kills all of its processes at once, as a crash would; a worker left to notice its
  // primary gone could still finish a job first.
  if (signal === 'SIGKILL') for (const pid of workers.filter(stillRunning)) process.kill(pid, 'SIGKILL');
  await ended;
  // Otherwise the primary passes the signal on; either way, wait until no process of this server runs.
  await processesEnded(workers);
}

/**
 * Creates the cluster (folder .data/throwaway-<name>-<pid>), migrates it, seeds the demo laboratory and prepares the
 * built server on a free port with `env` added to what the app reads; `serverStderr` 'ignore' keeps its log out of
 * the caller's output.
 *
 * @example
 * const stack = await startThrowawayStack('faults', { env: { JOB_EXPIRE_SECONDS: '10' } });
 * await stack.startServer();
 * await fetch(`${stack.baseUrl}/api/health`);
 * await stack.remove();
 */
export async function startThrowawayStack(name: string, options: { env?: Record<string, string>; serverStderr?: 'inherit' | 'ignore' } = {}): Promise<ThrowawayStack> {
  const { env = {}, serverStderr = 'inherit' } = options;
  if (!existsSync(SERVER_ENTRY)) throw new Error(`No built server at ${SERVER_ENTRY}: run \`npx astro build\` first.`);
  mkdirSync(DATA_DIR, { recursive: true });
  removeAbandoned(/^throwaway-[a-z]+-(\d+)$/);
  const dataDir = `${DATA_DIR}/${PREFIX}${name}-${process.pid}`;
  const cluster = await ensureCluster({ dataDir, port: await freePort(), database: `biaswise_${name}` });
  const db = createDatabase(cluster.url, 4);
  await applyMigrations(db);
  await seedDemo(db);
  const webPort = await freePort();
  const baseUrl = `http://127.0.0.1:${webPort}`;
  let server: ChildProcess | null = null;
  const serverEnv = (port: number) => ({
    ...process.env,
    HOST: '127.0.0.1',
    PORT: String(port),
    DATABASE_URL: cluster.url,
    BETTER_AUTH_SECRET: `throwaway-only-secret-${name}-0123456789abcdef`,
    PUBLIC_BASE_URL: baseUrl,
    SIGN_IN_LIMIT_PER_MINUTE: '1000',
    ...env,
  });
  const others: ChildProcess[] = [];

  const stopServer = async (signal: NodeJS.Signals = 'SIGTERM') => {
    const running = server;
    if (!running) return;
    server = null;
    await stopProcesses(running, signal);
  };

  return {
    cluster,
    db,
    baseUrl,
    get server() {
      return server;
    },
    async startServer() {
      if (server) throw new Error('the server is already running');
      server = spawnServer(serverEnv(webPort), ['ignore', 'ignore', serverStderr]);
      await waitForHealth(baseUrl, 60);
    },
    stopServer,
    async startOtherServer() {
      const port = await freePort();
      const other = spawnServer(serverEnv(port), ['ignore', 'ignore', serverStderr]);
      others.push(other);
      const otherUrl = `http://127.0.0.1:${port}`;
      await waitForHealth(otherUrl, 60);
      return otherUrl;
    },
    async remove() {
      await Promise.all([stopServer('SIGKILL'), ...others.map((other) => stopProcesses(other, 'SIGKILL'))]);
      await db.$client.end().catch(() => {});
      removeCluster(dataDir);
    },
  };
}

async function okJson<T>(response: Response, what: string): Promise<T> {
  if (!response.ok) throw new Error(`${what} failed: ${response.status} ${await response.text()}`);
  return (await response.json()) as T;
}

/**
 * Opens a study on the demo's approved protocol version through the API and starts collection, as the lab
 * scientist would; returns its id.
 *
 * @example
 * const studyId = await openStudyOnDemoProtocol(scientist, 'Fault: database stopped during an import');
 */
export async function openStudyOnDemoProtocol(scientist: HttpSession, title: string): Promise<string> {
  const api = `/api/labs/${DEMO_LAB.slug}`;
  const { studies } = await okJson<{ studies: { id: string; title: string }[] }>(await scientist.get(`${api}/studies`), 'listing studies');
  const demo = studies.find((s) => s.title === DEMO_STUDY_TITLE);
  if (!demo) throw new Error('the demo collecting study is missing');
  const { study: pinned } = await okJson<{ study: { protocolVersionId: string } }>(await scientist.get(`${api}/studies/${demo.id}`), 'reading the demo study');
  const { study } = await okJson<{ study: { id: string; version: number } }>(
    await scientist.post(`${api}/studies`, {
      title,
      protocolVersionId: pinned.protocolVersionId,
      candidate: { instrument: 'Bench analyser "Wren" (serial W-11)', reagentLot: 'LOT-C1', softwareVersion: '2.0' },
      comparative: { instrument: 'Core analyser "Lark" (serial L-7)', reagentLot: 'LOT-R9', softwareVersion: '5.1' },
      technicianIds: [],
    }),
    'opening a study',
  );
  await okJson(await scientist.post(`${api}/studies/${study.id}/transitions`, { transition: 'start_collecting', version: study.version }), 'starting collection');
  return study.id;
}
