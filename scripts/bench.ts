/**
 * `npm run bench`: speed and memory of the statistics engine on seeded synthetic data, printed as a table with
 * the project's targets beside the figures they apply to (on the 2-core build machine): Huber, Tukey and Hampel at
 * n = 10,000 in ≤ 1 ms per fit, MM at n = 10,000 in ≤ 20 ms, Passing–Bablok with CIs in ≤ 100 ms at n = 10,000 and
 * ≤ 1.5 s at n = 100,000 with memory growing like n, and the whole analysis of 200 samples with 2,000-resample
 * bootstrap CIs at three levels in ≤ 300 ms. Tukey and Hampel start from the S-estimate by default; an analysis
 * computes it once and hands it to Tukey, Hampel and MM (whose first stage it is, inside MM's 20 ms), so their 1 ms
 * rows time the fit from an S-estimate at hand, and from OLS; the S search has a row of its own, and the fit that
 * runs its own search is shown for information.
 * The npm script bundles this file with esbuild and runs the bundle, so the engine runs as compiled for the server
 * (`astro build`), not through tsx's on-the-fly transform, which wraps every closure it creates to keep its name and
 * makes the bootstrap loops about a quarter slower.
 */
import { spawnSync } from 'node:child_process';
import os from 'node:os';
import { fileURLToPath } from 'node:url';
import {
  analyzeComparison,
  createLineDesign,
  fitDeming,
  fitLadLine,
  fitMMLine,
  fitOlsLine,
  fitPassingBablok,
  fitRobustLine,
  fitWeightedDeming,
  sEstimateOnDesign,
  seededRandom,
  type MethodKey,
  type SEstimate,
} from '../src/lib/stats/index';

type Fit = (x: number[], y: number[]) => unknown;

/** The S-estimate of the data last handed to sEstimateOf, so that the 'S-estimate given' rows time only their fit. */
const sEstimates = new WeakMap<number[], SEstimate>();
const sEstimateOf = (x: number[], y: number[]): SEstimate => {
  let s = sEstimates.get(x);
  if (!s) {
    s = sEstimateOnDesign(createLineDesign(x), new Float64Array(y));
    sEstimates.set(x, s);
  }
  return s;
};

const FITS: [string, Fit][] = [
  ['ols', (x, y) => fitOlsLine(x, y)],
  ['deming', (x, y) => fitDeming(x, y, { lambda: 1 })],
  ['weightedDeming', (x, y) => fitWeightedDeming(x, y, { lambda: 1 })],
  ['passingBablok', (x, y) => fitPassingBablok(x, y)],
  ['huber', (x, y) => fitRobustLine(x, y, 'huber')],
  ['S-estimate (fast-S search)', (x, y) => sEstimateOnDesign(createLineDesign(x), new Float64Array(y))],
  ['tukey, S-estimate given', (x, y) => fitRobustLine(x, y, 'tukey', { sEstimate: sEstimateOf(x, y) })],
  ['tukey from OLS', (x, y) => fitRobustLine(x, y, 'tukey', { start: 'ols' })],
  ['tukey with its own S search', (x, y) => fitRobustLine(x, y, 'tukey')],
  ['hampel, S-estimate given', (x, y) => fitRobustLine(x, y, 'hampel', { sEstimate: sEstimateOf(x, y) })],
  ['hampel from OLS', (x, y) => fitRobustLine(x, y, 'hampel', { start: 'ols' })],
  ['hampel with its own S search', (x, y) => fitRobustLine(x, y, 'hampel')],
  ['mm', (x, y) => fitMMLine(x, y)],
  ['lad', (x, y) => fitLadLine(x, y)],
];

/** Targets per fit, by estimator and n, in ms; fits without one are shown for information. */
const FIT_TARGET_MS: Record<string, Record<number, number>> = {
  huber: { 10000: 1 },
  'tukey, S-estimate given': { 10000: 1 },
  'tukey from OLS': { 10000: 1 },
  'hampel, S-estimate given': { 10000: 1 },
  'hampel from OLS': { 10000: 1 },
  mm: { 10000: 20 },
  passingBablok: { 10000: 100, 100000: 1500 },
};
const ANALYSIS_TARGET_MS = 300;

/** Seeded data resembling a comparison study: x over 20–400, y = 1.5 + 1.02x with 3 % CV noise, 2 % gross outliers. */
function syntheticStudy(n: number, seed: number): { x: number[]; y: number[] } {
  const rng = seededRandom(seed);
  const normal = () => Math.sqrt(-2 * Math.log(1 - rng.next())) * Math.cos(2 * Math.PI * rng.next());
  const x: number[] = [];
  const y: number[] = [];
  for (let i = 0; i < n; i++) {
    const truth = 20 + 380 * rng.next();
    x.push(truth * (1 + 0.02 * normal()));
    const outlier = rng.next() < 0.02 ? 0.3 * truth : 0;
    y.push(1.5 + 1.02 * truth * (1 + 0.03 * normal()) + outlier);
  }
  return { x, y };
}

/** Warm-up runs go on until this much time has passed (and at least WARM_UP_RUNS), so that the JIT has settled. */
const WARM_UP_MS = 200;
const WARM_UP_RUNS = 5;

/**
 * Median wall-clock and CPU time of `repeats` runs after a warm-up (WARM_UP_RUNS runs and WARM_UP_MS at least:
 * JIT compilation is not what is being measured); a first run slower than `slowMs` is itself the figure (one run).
 * CPU time is shown too because other work on the machine inflates wall-clock time; on a shared host stretches of
 * slower runs come and go, so fits up to n = 10,000 take the median of 21 runs. (No forced garbage collection:
 * it makes V8 shrink its heap and collect more often afterwards, which slowed the rows after it down severalfold.)
 */
function medianTime(run: () => void, repeats: number, slowMs = 1000): { ms: number; cpuMs: number; runs: number } {
  const cpuOf = (usage: NodeJS.CpuUsage) => (usage.user + usage.system) / 1000;
  const warmStart = performance.now();
  const warmCpu = process.cpuUsage();
  run();
  const first = performance.now() - warmStart;
  if (first > slowMs) return { ms: first, cpuMs: cpuOf(process.cpuUsage(warmCpu)), runs: 1 };
  for (let runs = 1; runs < WARM_UP_RUNS || performance.now() - warmStart < WARM_UP_MS; runs++) run();
  const times: number[] = [];
  const cpuTimes: number[] = [];
  for (let r = 0; r < repeats; r++) {
    const start = performance.now();
    const cpuStart = process.cpuUsage();
    run();
    times.push(performance.now() - start);
    cpuTimes.push(cpuOf(process.cpuUsage(cpuStart)));
  }
  const median = (values: number[]) => values.sort((a, b) => a - b)[values.length >> 1];
  return { ms: median(times), cpuMs: median(cpuTimes), runs: repeats };
}

/**
 * Memory a Passing–Bablok fit allocates, measured in a child process with a young generation large enough that no
 * collection runs during the fit: heap plus typed-array buffers after the fit minus before it. Total allocation
 * bounds the peak from above, so growth like n here shows the peak grows at most like n.
 */
function passingBablokAllocation(n: number): number {
  const child = spawnSync(
    process.execPath,
    [...process.execArgv, '--expose-gc', '--max-semi-space-size=1024', fileURLToPath(import.meta.url), MEMORY_CHILD_FLAG, String(n)],
    { encoding: 'utf8' },
  );
  if (child.status !== 0) throw new Error(`memory measurement for n = ${n} failed: ${child.stderr}`);
  return Number(child.stdout.trim());
}

/** The child side of passingBablokAllocation. */
function measureAllocationInThisProcess(n: number): void {
  const warmUp = syntheticStudy(2000, 45);
  fitPassingBablok(warmUp.x, warmUp.y); // compile first, so that code allocation is not counted
  const { x, y } = syntheticStudy(n, 43);
  const used = () => {
    const m = process.memoryUsage();
    return m.heapUsed + m.arrayBuffers;
  };
  (globalThis as { gc?: () => void }).gc?.();
  const before = used();
  const fit = fitPassingBablok(x, y);
  const after = used();
  process.stdout.write(`${after - before}\n`);
  void fit;
}

/**
 * The machine's speed in the units the line fits are made of: the median time of one pass over 10,000 samples
 * computing y − a − b·x and summing it, so that figures from machines of different speed can be compared.
 */
function calibrationPassMicroseconds(): number {
  const n = 10000;
  const x = Float64Array.from({ length: n }, (_, i) => 20 + (i * 380) / n);
  const y = x.map((v, i) => 1.5 + 1.02 * v + ((i * 7919) % 13) - 6);
  let sink = 0;
  const pass = () => {
    let sum = 0;
    for (let i = 0; i < n; i++) sum += y[i] - 1.5 - 1.02 * x[i];
    sink += sum;
  };
  const { ms } = medianTime(pass, 501);
  if (!Number.isFinite(sink)) throw new Error('calibration pass gave a non-finite sum');
  return ms * 1000;
}

const MEMORY_CHILD_FLAG = '--passing-bablok-memory';
const met = (value: number, target: number) => (value <= target ? 'yes' : 'NO');
const ms = (v: number) => (v < 10 ? v.toFixed(2) : v.toFixed(0));
const timing = (t: { ms: number; cpuMs: number; runs: number }) => `${ms(t.ms)} ms (CPU ${ms(t.cpuMs)} ms${t.runs === 1 ? ', 1 run' : ''})`;

function bench(): void {
  const rows: string[][] = [];
  for (const [method, fit] of FITS) {
    const sizes = method === 'passingBablok' ? [100, 1000, 10000, 100000] : [100, 1000, 10000];
    for (const n of sizes) {
      const { x, y } = syntheticStudy(n, 42);
      const repeats = n <= 10000 ? 21 : 3;
      const time = medianTime(() => void fit(x, y), repeats);
      const target = FIT_TARGET_MS[method]?.[n];
      rows.push([`${method} fit`, String(n), timing(time), target ? `≤ ${target} ms` : '—', target ? met(time.ms, target) : '']);
    }
  }

  const memory: Record<number, number> = {};
  for (const n of [10000, 100000]) memory[n] = passingBablokAllocation(n);
  const mb = (bytes: number) => `${(bytes / 2 ** 20).toFixed(1)} MB`;
  const growth = memory[100000] / Math.max(1, memory[10000]);
  rows.push(['passingBablok memory allocated by one fit', '10000', mb(memory[10000]), '', '']);
  rows.push(['passingBablok memory allocated by one fit', '100000', mb(memory[100000]), '≤ 15× the 10k figure (like n)', met(growth, 15)]);

  // every estimator but LAD, whose own 1,000-resample interval is a bench row of its own above
  const study = syntheticStudy(200, 44);
  const input = {
    sampleIds: study.x.map((_, i) => `B${String(i + 1).padStart(3, '0')}`),
    comparative: study.x,
    candidate: study.y,
    methods: ['ols', 'deming', 'weightedDeming', 'passingBablok', 'huber', 'tukey', 'hampel', 'mm'] as MethodKey[],
    decisionLevels: [70, 126, 200],
    allowable: { absolute: 6, percent: 10, rule: 'larger' as const },
    bootstrap: { resamples: 2000, method: 'bca' as const },
  };
  const analysisTime = medianTime(() => void analyzeComparison(input), 11, Infinity);
  const label = 'analyzeComparison: 8 estimators, diagnostics, BCa 2,000 × 3 levels';
  rows.push([label, '200', timing(analysisTime), `≤ ${ANALYSIS_TARGET_MS} ms`, met(analysisTime.ms, ANALYSIS_TARGET_MS)]);

  const header = ['what', 'n', 'measured: median wall clock (CPU)', 'target (wall clock)', 'met'];
  const widths = header.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)) + 2);
  const line = (r: string[]) => r.map((c, k) => c.padEnd(widths[k])).join('').trimEnd();
  const load = os.loadavg().map((v) => v.toFixed(2)).join(' ');
  console.log(`Statistics engine bench — Node ${process.version}, ${process.platform}/${process.arch}, ${os.cpus().length} cores, load average ${load}`);
  console.log(`Machine speed: one pass over 10,000 samples (y − a − b·x, summed) takes ${calibrationPassMicroseconds().toFixed(1)} µs (median)`);
  console.log(line(header));
  for (const r of rows) console.log(line(r));
  console.log(`Passing–Bablok allocation 10k → 100k: ×${growth.toFixed(1)} (n grew ×10; n² would give ×100)`);
}

if (process.argv[2] === MEMORY_CHILD_FLAG) measureAllocationInThisProcess(Number(process.argv[3]));
else bench();
