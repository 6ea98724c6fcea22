/**
 * `npm run bench:http`: the BUILT server (`npx astro build` first) on loopback with a throwaway cluster of its own
 * (the demo laboratory plus a 200-sample study made through the API, analysed with its bootstrap done), loaded by
 * autocannon: 50 clients for 30 s saving result rows as the technician, then 50 clients for 30 s reading the
 * 200-sample analysis, each after 5 s of a single client (the time of one request with no queue). Prints p50, p95,
 * p99, requests/s and errors beside the targets (ours, for this 2-core machine): p95 under 100 ms for saves, under
 * 300 ms for analysis reads, no errors. Stops by itself and removes its
 * cluster; not part of `npm test`.
 */
import { createRequire } from 'node:module';
import os from 'node:os';
import { DEMO_LAB, DEMO_PASSWORD, DEMO_PEOPLE, DEMO_STUDY_TITLE, demoPairs } from './demo';
import { signedInSession, type HttpSession } from './http-session';
import { webProcesses } from './stacks';
import { openStudyOnDemoProtocol, startThrowawayStack, type ThrowawayStack } from './throwaway-stack';

const CONNECTIONS = 50;
const DURATION_SECONDS = 30;
/** A short one-client run before each load: the time one request takes when nothing waits in line (no target). */
const SINGLE_SECONDS = 5;
const ANALYSED_SAMPLES = 200;
const TARGET_P95_MS = { save: 100, read: 300 } as const;
/** The whole run (setup, both loads, clean-up) ends by this time even if something hangs. */
const DEADLINE_MS = 8 * 60_000;
const API = `/api/labs/${DEMO_LAB.slug}`;

/** The parts of autocannon (untyped CommonJS) this bench uses. */
interface LoadRequest {
  method: string;
  path: string;
  headers: Record<string, string>;
  body?: string;
  setupRequest?: (request: LoadRequest) => LoadRequest;
}
interface LoadResult {
  duration: number;
  errors: number;
  timeouts: number;
  non2xx: number;
}
interface LoadInstance extends PromiseLike<LoadResult> {
  on(event: 'response', listener: (client: unknown, statusCode: number, bytes: number, responseTimeMs: number) => void): void;
  stop(): void;
}
type Autocannon = (options: { url: string; connections: number; duration: number; timeout: number; requests: LoadRequest[] }) => LoadInstance;
const autocannon = createRequire(import.meta.url)('autocannon') as Autocannon;

interface Figures {
  p50: number;
  p95: number;
  p99: number;
  perSecond: number;
  errors: number;
  count: number;
}

/** Nearest-rank percentile of sorted values (ISO/NIST "nearest rank": the ⌈p·n⌉-th smallest). */
const percentile = (sorted: number[], p: number) => sorted[Math.max(0, Math.ceil(p * sorted.length) - 1)];

let running: LoadInstance | undefined;

async function load(url: string, request: LoadRequest, connections = CONNECTIONS, duration = DURATION_SECONDS): Promise<Figures> {
  const times: number[] = [];
  let failedStatus = 0;
  running = autocannon({ url, connections, duration, timeout: 10, requests: [request] });
  running.on('response', (_client, statusCode, _bytes, responseTimeMs) => {
    times.push(responseTimeMs);
    if (statusCode < 200 || statusCode >= 300) failedStatus += 1;
  });
  const result = await running;
  running = undefined;
  times.sort((a, b) => a - b);
  return {
    p50: percentile(times, 0.5),
    p95: percentile(times, 0.95),
    p99: percentile(times, 0.99),
    perSecond: times.length / result.duration,
    // Socket errors and timeouts get no response; a wrong status is counted once, from the responses.
    errors: result.errors + result.timeouts + Math.max(failedStatus, result.non2xx),
    count: times.length,
  };
}

async function okJson<T>(response: Response, what: string): Promise<T> {
  if (!response.ok) throw new Error(`${what} failed: ${response.status} ${await response.text()}`);
  return (await response.json()) as T;
}

const signInAs = (stack: ThrowawayStack, role: (typeof DEMO_PEOPLE)[number]['role']) =>
  signedInSession(stack.baseUrl, DEMO_PEOPLE.find((p) => p.role === role)!.email, DEMO_PASSWORD);

/** The 200-sample study: opened, uploaded by the technician, analysed, bootstrap done. Returns its API path. */
async function analysedStudy(scientist: HttpSession, technician: HttpSession): Promise<string> {
  const base = `${API}/studies/${await openStudyOnDemoProtocol(scientist, 'Bench: 200 samples')}`;
  const results = demoPairs(ANALYSED_SAMPLES, 20261201, false).flatMap((pair) =>
    (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, index) => ({ sampleCode: pair.code, procedure, replicate: index + 1, value, unit: 'mg/dL', runDate: pair.runDate })),
    ),
  );
  await okJson(await technician.post(`${base}/results`, { results }), 'uploading the 200 samples');
  await okJson(await scientist.post(`${base}/analysis`, {}), 'running the analysis');
  const deadline = Date.now() + 180_000;
  for (;;) {
    const view = await okJson<{ bootstrapDone: boolean; current: boolean; run: { results: { inputs: { included: unknown[] } } } | null }>(await scientist.get(`${base}/analysis`), 'reading the analysis');
    if (view.bootstrapDone && view.current) {
      const analysed = view.run?.results.inputs.included.length;
      if (analysed !== ANALYSED_SAMPLES) throw new Error(`the analysis has ${analysed} samples, not ${ANALYSED_SAMPLES}`);
      return base;
    }
    if (Date.now() > deadline) throw new Error('the bootstrap did not finish within 180 s');
    await new Promise((resolve) => setTimeout(resolve, 500));
  }
}

const ms = (v: number) => `${v < 10 ? v.toFixed(1) : v.toFixed(0)} ms`;

function report(rows: { what: string; figures: Figures; targetMs?: number }[]) {
  const header = ['what', 'p50', 'p95', 'p99', 'requests/s', 'errors', 'target', 'met'];
  const cells = rows.map(({ what, figures, targetMs }) => [
    what,
    ms(figures.p50),
    ms(figures.p95),
    ms(figures.p99),
    figures.perSecond.toFixed(0),
    `${figures.errors} of ${figures.count}`,
    targetMs === undefined ? '(one client: no target)' : `p95 < ${targetMs} ms, no errors`,
    targetMs === undefined ? '' : figures.p95 < targetMs && figures.errors === 0 ? 'yes' : 'NO',
  ]);
  const widths = header.map((h, k) => Math.max(h.length, ...cells.map((r) => r[k].length)) + 2);
  const line = (r: string[]) => r.map((c, k) => (k >= 1 && k <= 5 ? c.padStart(widths[k] - 2).padEnd(widths[k]) : c.padEnd(widths[k]))).join('').trimEnd();
  const loadAverage = os.loadavg().map((v) => v.toFixed(2)).join(' ');
  const processes = webProcesses();
  console.log(`\nHTTP bench — built server on loopback (${processes} process${processes === 1 ? '' : 'es'}, WEB_PROCESSES), ${CONNECTIONS} clients × ${DURATION_SECONDS} s per load; Node ${process.version}, ${os.cpus().length} cores, load average ${loadAverage}`);
  console.log(line(header));
  for (const r of cells) console.log(line(r));
}

async function main() {
  console.log('Starting a throwaway cluster with the demo laboratory and the built server …');
  // The server's log would only show the requests cut off when each load stops.
  const stack = await startThrowawayStack('bench', { serverStderr: 'ignore' });
  const cleanUp = async () => {
    running?.stop();
    await stack.remove();
  };
  const deadline = setTimeout(() => {
    console.error(`The bench did not finish within ${DEADLINE_MS / 60_000} minutes; stopping.`);
    void cleanUp().finally(() => process.exit(1));
  }, DEADLINE_MS);
  for (const signal of ['SIGINT', 'SIGTERM'] as const) process.once(signal, () => void cleanUp().finally(() => process.exit(130)));

  try {
    await stack.startServer();
    const scientist = await signInAs(stack, 'lab_scientist');
    const technician = await signInAs(stack, 'technician');
    console.log(`Making the ${ANALYSED_SAMPLES}-sample study through the API and running its analysis with the bootstrap …`);
    const analysed = await analysedStudy(scientist, technician);
    // Saves go to the demo's collecting study, so that the analysed study stays current for the reads.
    const { studies } = await okJson<{ studies: { id: string; title: string }[] }>(await technician.get(`${API}/studies`), 'listing studies');
    const collecting = studies.find((s) => s.title === DEMO_STUDY_TITLE)!;
    const headers = { 'content-type': 'application/json', origin: stack.baseUrl };

    let saved = 0;
    const saveRequest: LoadRequest = {
      method: 'POST',
      path: `${API}/studies/${collecting.id}/samples`,
      headers: { ...headers, cookie: technician.cookie },
      // Each request is a new sample with its own code: a valid save, never a conflict.
      setupRequest: (request) => {
        saved += 1;
        const level = 40 + ((saved * 37) % 290);
        const row = { code: `BENCH-${String(saved).padStart(6, '0')}`, comparative: [String(level), String(level + 0.4)], candidate: [String(level + 2.1), String(level + 2.5)], runDate: '2026-11-20', flags: [], flagNote: '' };
        return { ...request, body: JSON.stringify(row) };
      },
    };
    const readRequest: LoadRequest = { method: 'GET', path: `${analysed}/analysis`, headers: { ...headers, cookie: scientist.cookie } };

    console.log(`Saving new result rows: 1 client for ${SINGLE_SECONDS} s, then ${CONNECTIONS} clients for ${DURATION_SECONDS} s …`);
    const saveAlone = await load(stack.baseUrl, saveRequest, 1, SINGLE_SECONDS);
    const save = await load(stack.baseUrl, saveRequest);
    console.log(`Reading the ${ANALYSED_SAMPLES}-sample analysis: 1 client for ${SINGLE_SECONDS} s, then ${CONNECTIONS} clients for ${DURATION_SECONDS} s …`);
    const readAlone = await load(stack.baseUrl, readRequest, 1, SINGLE_SECONDS);
    const read = await load(stack.baseUrl, readRequest);

    report([
      { what: 'save a result row, 1 client', figures: saveAlone },
      { what: `save a result row, ${CONNECTIONS} clients`, figures: save, targetMs: TARGET_P95_MS.save },
      { what: `read the ${ANALYSED_SAMPLES}-sample analysis, 1 client`, figures: readAlone },
      { what: `read the ${ANALYSED_SAMPLES}-sample analysis, ${CONNECTIONS} clients`, figures: read, targetMs: TARGET_P95_MS.read },
    ]);
  } finally {
    clearTimeout(deadline);
    await cleanUp();
  }
}

await main();
