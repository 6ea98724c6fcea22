import { normalCdf, normalQuantile } from './distributions';
import { StatsInputError } from './errors';
import { seededRandom } from './random';

/** How the bootstrap interval is read off the replicates. */
export type BootstrapMethod = 'percentile' | 'bca';

export interface BootstrapOptions {
  /** Number of case resamples (default 2,000). */
  resamples?: number;
  /** Seed of the Mersenne Twister stream that draws the resample indices (default 1). */
  seed?: number;
  /** Two-sided confidence level (default 0.95). */
  confidence?: number;
  /** 'bca' (default) or 'percentile'. */
  method?: BootstrapMethod;
}

export interface BootstrapResult {
  method: BootstrapMethod;
  confidence: number;
  /** Resamples asked for. */
  resamples: number;
  /** Resamples whose statistic could be computed; the intervals use only these. */
  validResamples: number;
  /** Resamples skipped because the statistic failed on them (e.g. all resampled x equal). */
  failedResamples: number;
  /** The statistic on the full data, one value per component. */
  estimates: number[];
  /** Interval per component, [lower, upper]. */
  intervals: [number, number][];
  /** BCa only: bias correction z0 and acceleration a per component. */
  biasCorrection?: number[];
  acceleration?: number[];
}

/** A statistic on a subset of the samples, given by their indices (repeats allowed). */
export type IndexedStatistic = (indices: Int32Array) => number[];

/**
 * Seeded case-resampling bootstrap confidence intervals, percentile or BCa
 * (Efron, JASA 1987; Efron & Tibshirani, An Introduction to the Bootstrap, 1993, ch. 13–14).
 *
 * - Resample b draws n indices uniformly with replacement: index = floor(u·n), u = uint32/2³² from
 *   `seededRandom(seed)`, drawn resample by resample, position by position (resampleIndices).
 * - The statistic is called on the full data, then on each resample in turn, then (BCa) on each leave-one-out
 *   subset; it receives the indices as an Int32Array that it must only read.
 * - A resample on which the statistic throws StatsInputError or returns a non-finite value is skipped
 *   and counted in `failedResamples`; if fewer than half succeed a StatsInputError is thrown.
 * - Quantiles of the replicates: linear interpolation between order statistics (Hyndman & Fan,
 *   Am Stat 1996, type 7): q(p) = θ*₍ⱼ₎ + (h − j)(θ*₍ⱼ₊₁₎ − θ*₍ⱼ₎), h = (B − 1)p, j = ⌊h⌋, 0-based.
 * - BCa: z0 = Φ⁻¹(share of replicates below the estimate, ties counted half), clamped to
 *   [1/(2B), 1 − 1/(2B)] so that it stays finite; acceleration from the leave-one-out jackknife,
 *   a = Σ(θ̄ − θ₍ᵢ₎)³ / (6·(Σ(θ̄ − θ₍ᵢ₎)²)^{3/2}) (0 when the jackknife values are all equal);
 *   adjusted levels α_k = Φ(z0 + (z0 + z_k)/(1 − a(z0 + z_k))) for z_k = Φ⁻¹(α/2), Φ⁻¹(1 − α/2);
 *   when 1 − a(z0 + z_k) ≤ 0 the level is taken as its limit, 0 or 1.
 *
 * @example
 * const values = [2.1, 3.4, 1.9, 5.0, 4.2, 3.3, 2.8];
 * const mean = (idx: Int32Array) => {
 *   let s = 0;
 *   for (const i of idx) s += values[i];
 *   return [s / idx.length];
 * };
 * bootstrapIntervals(values.length, mean, { seed: 7, method: 'bca' }).intervals[0]; // [2.5857…, 4.1]
 */
export function bootstrapIntervals(n: number, statistic: IndexedStatistic, options: BootstrapOptions = {}): BootstrapResult {
  const resamples = options.resamples ?? 2000;
  const seed = options.seed ?? 1;
  const confidence = options.confidence ?? 0.95;
  const method = options.method ?? 'bca';
  validateOptions(n, resamples, seed, confidence, method);

  const identity = new Int32Array(n);
  for (let i = 0; i < n; i++) identity[i] = i;
  const estimates = statistic(identity);
  if (estimates.length === 0 || estimates.some((v) => !Number.isFinite(v))) {
    throw new StatsInputError('the bootstrap statistic could not be computed on the full data', { field: 'statistic' });
  }
  const components = estimates.length;

  const replicates = drawReplicates(n, statistic, resamples, seed, components);
  const validResamples = replicates.count;
  if (validResamples * 2 < resamples) {
    throw new StatsInputError(
      `the statistic failed on ${resamples - validResamples} of ${resamples} bootstrap resamples, too many for an interval`,
      { field: 'statistic' },
    );
  }

  const alpha = 1 - confidence;
  const intervals: [number, number][] = [];
  const biasCorrection: number[] = [];
  const acceleration: number[] = [];
  const jackknife = method === 'bca' ? jackknifeValues(n, statistic, components) : [];

  for (let k = 0; k < components; k++) {
    const sorted = replicates.values[k].slice(0, validResamples).sort();
    let lowerLevel = alpha / 2;
    let upperLevel = 1 - alpha / 2;
    if (method === 'bca') {
      const z0 = biasCorrectionZ0(sorted, estimates[k]);
      const a = jackknifeAcceleration(jackknife[k]);
      lowerLevel = bcaLevel(z0, a, normalQuantile(alpha / 2));
      upperLevel = bcaLevel(z0, a, normalQuantile(1 - alpha / 2));
      biasCorrection.push(z0);
      acceleration.push(a);
    }
    intervals.push([quantileOfSorted(sorted, lowerLevel), quantileOfSorted(sorted, upperLevel)]);
  }

  const result: BootstrapResult = {
    method,
    confidence,
    resamples,
    validResamples,
    failedResamples: resamples - validResamples,
    estimates,
    intervals,
  };
  if (method === 'bca') {
    result.biasCorrection = biasCorrection;
    result.acceleration = acceleration;
  }
  return result;
}

/**
 * Quantile of sorted values by linear interpolation between order statistics
 * (Hyndman & Fan, Am Stat 1996, type 7 — the default of R `quantile` and NumPy `percentile`).
 *
 * @example
 * quantileOfSorted(Float64Array.from([1, 2, 3, 4]), 0.5); // 2.5
 */
export function quantileOfSorted(sorted: ArrayLike<number>, p: number): number {
  const h = (sorted.length - 1) * Math.min(1, Math.max(0, p));
  const j = Math.floor(h);
  if (j + 1 >= sorted.length) return sorted[sorted.length - 1];
  return sorted[j] + (h - j) * (sorted[j + 1] - sorted[j]);
}

function validateOptions(n: number, resamples: number, seed: number, confidence: number, method: string): void {
  if (!Number.isInteger(n) || n < 2) throw new StatsInputError(`the bootstrap needs at least 2 samples (got ${n})`, { field: 'n' });
  if (!Number.isInteger(resamples) || resamples < 10) {
    throw new StatsInputError(`resamples must be an integer of at least 10 (got ${resamples})`, { field: 'resamples' });
  }
  if (!Number.isFinite(seed)) throw new StatsInputError(`seed must be a finite number (got ${seed})`, { field: 'seed' });
  if (!(confidence > 0 && confidence < 1)) {
    throw new StatsInputError(`confidence must lie strictly between 0 and 1 (got ${confidence})`, { field: 'confidence' });
  }
  if (method !== 'bca' && method !== 'percentile') {
    throw new StatsInputError(`bootstrap method must be 'bca' or 'percentile' (got '${method}')`, { field: 'method' });
  }
}

/**
 * The resample indices of a bootstrap, all resamples one after another: index = floor(u·n) with u from
 * `seededRandom(seed)`, resample by resample, position by position. They depend only on (n, resamples, seed), so
 * the last plan drawn is kept and handed to the next bootstrap that asks for the same one: an analysis bootstraps
 * several fits of the same data with the same seed, and drawing the indices is a good part of a cheap refit's cost.
 *
 * @example
 * resampleIndices(5, 10, 1).length; // 50: ten resamples of five indices in 0..4
 */
export function resampleIndices(n: number, resamples: number, seed: number): Int32Array {
  if (lastPlan && lastPlan.n === n && lastPlan.resamples === resamples && lastPlan.seed === seed) return lastPlan.indices;
  const rng = seededRandom(seed);
  const indices = new Int32Array(n * resamples);
  for (let k = 0; k < indices.length; k++) indices[k] = rng.int(n);
  lastPlan = { n, resamples, seed, indices };
  return indices;
}
let lastPlan: { n: number; resamples: number; seed: number; indices: Int32Array } | undefined;

/** Runs the statistic on every resample; one index array, one Float64Array per component. */
function drawReplicates(n: number, statistic: IndexedStatistic, resamples: number, seed: number, components: number) {
  const plan = resampleIndices(n, resamples, seed);
  const values = Array.from({ length: components }, () => new Float64Array(resamples));
  let count = 0;
  for (let b = 0; b < resamples; b++) {
    // a fresh view per resample, so that a statistic keeping it could not see the next one change under it
    const replicate = tryStatistic(statistic, plan.subarray(b * n, (b + 1) * n), components);
    if (replicate === null) continue;
    for (let k = 0; k < components; k++) values[k][count] = replicate[k];
    count++;
  }
  return { values, count };
}

/** Leave-one-out values per component; a failed leave-one-out statistic is left out. */
function jackknifeValues(n: number, statistic: IndexedStatistic, components: number): number[][] {
  const values: number[][] = Array.from({ length: components }, () => []);
  const indices = new Int32Array(n - 1);
  for (let left = 0; left < n; left++) {
    for (let i = 0, j = 0; i < n; i++) if (i !== left) indices[j++] = i;
    const replicate = tryStatistic(statistic, indices, components);
    if (replicate === null) continue;
    for (let k = 0; k < components; k++) values[k].push(replicate[k]);
  }
  return values;
}

function tryStatistic(statistic: IndexedStatistic, indices: Int32Array, components: number): number[] | null {
  let replicate: number[];
  try {
    replicate = statistic(indices);
  } catch (error) {
    if (error instanceof StatsInputError) return null;
    throw error;
  }
  if (replicate.length !== components) {
    throw new StatsInputError(
      `the bootstrap statistic returned ${replicate.length} values on a resample but ${components} on the full data`,
      { field: 'statistic' },
    );
  }
  for (const v of replicate) if (!Number.isFinite(v)) return null;
  return replicate;
}

function biasCorrectionZ0(sorted: Float64Array, estimate: number): number {
  const count = sorted.length;
  let below = 0;
  let ties = 0;
  for (let i = 0; i < count; i++) {
    if (sorted[i] < estimate) below++;
    else if (sorted[i] === estimate) ties++;
  }
  const share = (below + ties / 2) / count;
  const bound = 1 / (2 * count);
  return normalQuantile(Math.min(1 - bound, Math.max(bound, share)));
}

function jackknifeAcceleration(values: number[]): number {
  if (values.length < 2) return 0;
  const mean = values.reduce((s, v) => s + v, 0) / values.length;
  let cubes = 0;
  let squares = 0;
  for (const v of values) {
    const d = mean - v;
    squares += d * d;
    cubes += d * d * d;
  }
  return squares > 0 ? cubes / (6 * Math.pow(squares, 1.5)) : 0;
}

function bcaLevel(z0: number, acceleration: number, zLevel: number): number {
  const shifted = z0 + zLevel;
  const denominator = 1 - acceleration * shifted;
  if (denominator <= 0) return shifted > 0 ? 1 : 0;
  return normalCdf(z0 + shifted / denominator);
}
