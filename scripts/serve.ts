/**
 * The built server as several processes sharing one port (node:cluster): WEB_PROCESSES workers (see webProcesses in stacks.ts),
 * each the unchanged standalone entry with its own database pool and job workers. Nothing is kept in a
 * process that another one would need: sessions are read from the database on every request, jobs go through
 * PostgreSQL (pg-boss), and the analysis cache is keyed by a database fingerprint of the data.
 * The primary only forks, replaces a worker that dies after it has started, and passes SIGTERM/SIGINT on; when the
 * primary itself is killed, the workers lose their channel to it and exit (node:cluster's own rule).
 * Run by scripts/stacks.ts's spawnServer (npm start, the integration stack, the fault test, the HTTP bench).
 */
import cluster, { type Worker } from 'node:cluster';
import { SERVER_ENTRY } from './local';
import { webProcesses } from './stacks';

/** A worker that ends sooner than this after it was forked failed to start: replacing it would only loop. */
const STARTUP_SECONDS = 15;

const count = webProcesses();

// The workers run the built entry itself, without this script's TypeScript loader.
cluster.setupPrimary({ exec: SERVER_ENTRY, execArgv: [] });

let stopping: { code: number } | null = null;
const forkedAt = new Map<Worker, number>();
const alive = () => Object.values(cluster.workers ?? {}).filter((w): w is Worker => !!w && !w.isDead());

function fork() {
  forkedAt.set(cluster.fork(), Date.now());
}

/** Passes SIGTERM to every worker; the primary ends with `code` once they all have. */
function stop(code: number) {
  if (stopping) return;
  stopping = { code };
  const running = alive();
  if (running.length === 0) process.exit(code);
  for (const worker of running) worker.process.kill('SIGTERM');
}

cluster.on('exit', (worker, exitCode, signal) => {
  const started = forkedAt.get(worker) ?? 0;
  forkedAt.delete(worker);
  if (stopping) {
    if (alive().length === 0) process.exit(stopping.code);
    return;
  }
  const how = signal ? `signal ${signal}` : `code ${exitCode}`;
  if (Date.now() - started < STARTUP_SECONDS * 1000) {
    console.error(`Server process ${worker.process.pid} ended with ${how} while starting; stopping the others.`);
    stop(exitCode || 1);
    return;
  }
  console.error(`Server process ${worker.process.pid} ended with ${how}; starting another.`);
  fork();
});

for (const signal of ['SIGTERM', 'SIGINT'] as const) process.on(signal, () => stop(0));
for (let i = 0; i < count; i++) fork();
