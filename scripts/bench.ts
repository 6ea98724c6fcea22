/**
 * `npm run bench`: speed and memory of the statistics engine on seeded synthetic data, printed as a table with
 * the target beside each figure. Targets are ours (no external source): interactive use wants every fit on a
 * study-sized data set well under a frame budget, and the whole analysis of 200 samples with 2,000-resample
 * bootstrap CIs at three levels in ≤ 300 ms on the 2-core build machine.
 */
import v8 from 'node:v8';
import vm from 'node:vm';
import os from 'node:os';
import {
  analyzeComparison,
  fitDeming,
  fitLadLine,
  fitMMLine,
  fitOlsLine,
  fitPassingBablok,
  fitRobustLine,
  fitWeightedDeming,
  seededRandom,
  type MethodKey,
} from '../src/lib/stats/index';

type Fit = (x: number[], y: number[]) => unknown;

const FITS: [MethodKey, Fit][] = [
  ['ols', (x, y) => fitOlsLine(x, y)],
  ['deming', (x, y) => fitDeming(x, y, { lambda: 1 })],
  ['weightedDeming', (x, y) => fitWeightedDeming(x, y, { lambda: 1 })],
  ['passingBablok', (x, y) => fitPassingBablok(x, y)],
  ['huber', (x, y) => fitRobustLine(x, y, 'huber')],
  ['tukey', (x, y) => fitRobustLine(x, y, 'tukey')],
  ['hampel', (x, y) => fitRobustLine(x, y, 'hampel')],
  ['mm', (x, y) => fitMMLine(x, y)],
  ['lad', (x, y) => fitLadLine(x, y)],
];

/** Median time target per fit by n (ours). */
const FIT_TARGET_MS: Record<number, number> = { 100: 5, 1000: 50, 10000: 500, 100000: 5000 };
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

function medianTime(run: () => void, repeats: number): number {
  run(); // warm-up: JIT compilation is not what is being measured
  const times: number[] = [];
  for (let r = 0; r < repeats; r++) {
    const start = performance.now();
    run();
    times.push(performance.now() - start);
  }
  times.sort((a, b) => a - b);
  return times[times.length >> 1];
}

// a collector we can call between measurements, without a command-line flag
v8.setFlagsFromString('--expose-gc');
const gc = vm.runInNewContext('gc') as () => void;

/** Memory held right after one run (heap plus typed-array buffers), over a collected baseline. */
function memoryGrowth(run: () => unknown): number {
  const used = () => {
    const m = process.memoryUsage();
    return m.heapUsed + m.arrayBuffers;
  };
  gc();
  const before = used();
  const result = run();
  const after = used();
  void result;
  return after - before;
}

const rows: string[][] = [];
const met = (value: number, target: number) => (value <= target ? 'yes' : 'NO');
const ms = (v: number) => (v < 10 ? v.toFixed(2) : v.toFixed(0));

for (const [method, fit] of FITS) {
  const sizes = method === 'passingBablok' ? [100, 1000, 10000, 100000] : [100, 1000, 10000];
  for (const n of sizes) {
    const { x, y } = syntheticStudy(n, 42);
    const repeats = n <= 1000 ? 11 : n <= 10000 ? 5 : 3;
    const time = medianTime(() => void fit(x, y), repeats);
    rows.push([method, String(n), `${ms(time)} ms`, `≤ ${FIT_TARGET_MS[n]} ms`, met(time, FIT_TARGET_MS[n])]);
  }
}

const memory: Record<number, number> = {};
for (const n of [10000, 100000]) {
  const { x, y } = syntheticStudy(n, 43);
  memory[n] = memoryGrowth(() => fitPassingBablok(x, y));
}
const mb = (bytes: number) => `${(bytes / 2 ** 20).toFixed(1)} MB`;
const growth = memory[100000] / Math.max(1, memory[10000]);
rows.push(['passingBablok memory held after the fit', '10000', mb(memory[10000]), '', '']);
rows.push(['passingBablok memory held after the fit', '100000', mb(memory[100000]), '≤ 15× the 10k figure (grows like n)', met(growth, 15)]);

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
const analysisTime = medianTime(() => void analyzeComparison(input), 5);
rows.push([
  'analyzeComparison (all fits, diagnostics, BCa 2,000 × 3 levels)',
  '200',
  `${ms(analysisTime)} ms`,
  `≤ ${ANALYSIS_TARGET_MS} ms`,
  met(analysisTime, ANALYSIS_TARGET_MS),
]);

const header = ['what', 'n', 'measured', 'target', 'met'];
const widths = header.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)) + 2);
const line = (r: string[]) => r.map((c, k) => c.padEnd(widths[k])).join('').trimEnd();
console.log(`Statistics engine bench — Node ${process.version}, ${process.platform}/${process.arch}, ${os.cpus().length} cores`);
console.log(line(header));
for (const r of rows) console.log(line(r));
console.log(`Passing–Bablok memory growth 10k → 100k: ×${growth.toFixed(1)} (n grew ×10; n² would be ×100)`);
