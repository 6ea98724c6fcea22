import { bootstrapIntervals, type BootstrapMethod } from './bootstrap';
import { StatsInputError } from './errors';
import { ladLine } from './lad';
import { lineBias } from './lineBias';
import { createLineDesign, MStepWork } from './linear';
import { irlsOnDesign } from './mEstimator';
import { normByKey, tukeyBisquareNorm, type MNormKey, type RobustNorm } from './norms';
import { meanResponseInterval } from './ols';
import { fitPassingBablok, stableOrder } from './passingBablok';
import type { LineFit, MethodKey } from './types';
import { validateFinite } from './validate';

/** Where a fit's bias interval comes from: its covariance matrix, or a bootstrap of the data. */
export type BiasIntervalKind = 'closed-form' | 'bootstrap';

/** Verdict at a decision level: CI inside ±limit, CI entirely outside it, or CI crossing a limit. */
export type BiasVerdict = 'within' | 'beyond' | 'inconclusive';

/** Bias of one fit at one decision level. */
export interface BiasAtLevel {
  level: number;
  /** B(X_c) = a + (b − 1)·X_c, in measurement units. */
  bias: number;
  /** 100·B/X_c. */
  percentBias: number;
  /** CI of the bias at the fit's confidence; absent when it needs a bootstrap that was not run. */
  ci?: [number, number];
  /** CI of the percent bias: the bias CI times 100/X_c. */
  percentCI?: [number, number];
}

/**
 * Closed form for OLS (mean-response variance) and Deming / weighted Deming (jackknife covariance,
 * Linnet, Clin Chem 1993); bootstrap for Passing–Bablok and the robust fits, whose covariance is either absent
 * or asymptotic.
 *
 * @example
 * biasIntervalKind('deming'); // 'closed-form'
 * biasIntervalKind('mm'); // 'bootstrap'
 */
export function biasIntervalKind(method: MethodKey): BiasIntervalKind {
  return method === 'ols' || method === 'deming' || method === 'weightedDeming' ? 'closed-form' : 'bootstrap';
}

function validateLevel(level: number): void {
  validateFinite([level], 'level');
  if (level === 0) throw new StatsInputError('a decision level of 0 has no percent bias', { field: 'level' });
}

/**
 * Bias at a medical decision level X_c: B = a + (b − 1)·X_c and 100·B/X_c. For closed-form fits (OLS, Deming,
 * weighted Deming) the CI is the mean-response interval at X_c minus X_c,
 * B ± t(1 − α/2, df)·√(Var a + 2X_c·Cov(a, b) + X_c²·Var b) from `fit.covariance` and `fit.df`
 * (any regression text; Deming with the jackknife covariance, Linnet 1993). Bootstrap fits get no CI here:
 * use {@link bootstrapBiasIntervals}.
 *
 * @example
 * biasAtLevel(fitOlsLine([50, 100, 150, 200], [52, 103, 149, 206]), 126).bias; // a + (b − 1)·126
 */
export function biasAtLevel(fit: LineFit, level: number): BiasAtLevel {
  validateLevel(level);
  const result: BiasAtLevel = { level, ...lineBias(fit.intercept, fit.slope, level) };
  if (biasIntervalKind(fit.method) === 'closed-form') {
    const [lo, hi] = meanResponseInterval(fit, level).ci;
    result.ci = [lo - level, hi - level];
    result.percentCI = percentBiasInterval(result.ci, level);
  }
  return result;
}

/**
 * Verdict of a bias CI against an allowable limit ±L: 'within' when −L ≤ lo and hi ≤ L, 'beyond' when the
 * whole CI lies outside (hi < −L or lo > L), otherwise 'inconclusive'.
 *
 * @example
 * biasVerdict([-2, 3], 5); // 'within'
 * biasVerdict([6, 9], 5); // 'beyond'
 * biasVerdict([3, 7], 5); // 'inconclusive'
 */
export function biasVerdict(ci: [number, number], limit: number): BiasVerdict {
  if (!(limit >= 0)) throw new StatsInputError(`the allowable limit must be a number of at least 0 (got ${limit})`, { field: 'limit' });
  if (ci[0] >= -limit && ci[1] <= limit) return 'within';
  if (ci[1] < -limit || ci[0] > limit) return 'beyond';
  return 'inconclusive';
}

/** Refits a line to the samples at `indices` (repeats allowed); returns [intercept, slope]. */
export type IndexedRefit = (indices: Int32Array) => [number, number];

/** Options of the bootstrap refits. */
export interface BiasBootstrapOptions {
  resamples?: number;
  seed?: number;
  method?: BootstrapMethod;
  confidence?: number;
  /** Tuning constants of the M-estimators, as given to fitRobustLine. */
  tuning?: Partial<Record<MNormKey, number[]>>;
}

/** Bootstrap bias intervals of one fit at every level. */
export interface BootstrapBiasResult {
  method: BootstrapMethod;
  confidence: number;
  resamples: number;
  failedResamples: number;
  /** One CI per level, in the order given. */
  intervals: [number, number][];
}

/**
 * Relative coefficient change at which a bootstrap refit stops: far below the bootstrap's own spread, and small
 * enough that the slope's error times a high decision level stays well under the intervals' last reported digit.
 */
const REFIT_TOLERANCE = 1e-7;
const REFIT_MAX_ITERATIONS = 200;

/**
 * Warm-started refit for the bootstrap of a robust fit, by the full fit's own IRLS loop (irlsOnDesign: u = r/s,
 * weights w(u), weighted least squares, Newton updates once the steps are small) stopped at a relative change
 * ‖Δβ‖/‖β‖ of 1e-7, returning only the coefficients, with the work buffers allocated once per bootstrap rather than
 * once per resample.
 * - Huber, Tukey, Hampel: MAD scale re-estimated every iteration, started from the full-data estimate instead of
 *   from OLS or a fresh S-estimate per resample.
 * - MM: the full-data S-scale is kept fixed and the bisquare M-step starts from the full-data MM coefficients.
 *   Not re-running the S-step in every resample is an approximation in the spirit of the fast and robust
 *   bootstrap (Salibian-Barrera & Zamar, Ann Stat 2002): each resample's estimate is reached from the full-data
 *   solution instead of being recomputed from scratch, which is far cheaper and stays close while a resample does
 *   not carry many more outliers than the data.
 */
function robustRefit(fit: LineFit, x: readonly number[], y: readonly number[], tuning: BiasBootstrapOptions['tuning']): IndexedRefit {
  let norm: RobustNorm;
  let fixedScale: number | undefined;
  if (fit.method === 'mm') {
    if (!(fit.scale !== undefined && fit.scale > 0)) {
      throw new StatsInputError('the MM fit carries no S-scale, so it cannot be bootstrapped', { field: 'fit.scale' });
    }
    norm = tukeyBisquareNorm();
    fixedScale = fit.scale;
  } else if (fit.method === 'huber' || fit.method === 'tukey' || fit.method === 'hampel') {
    norm = normByKey(fit.method, tuning?.[fit.method]);
  } else {
    throw new StatsInputError(`the ${fit.method} fit takes its bias CI in closed form, not from the bootstrap`, { field: 'fit.method' });
  }
  const n = x.length;
  const full = createLineDesign(x);
  const ys = new Float64Array(n);
  const work = new MStepWork(n);
  return (indices) => {
    const size = indices.length;
    const ry = size === n ? ys : ys.subarray(0, size);
    for (let i = 0; i < size; i++) ry[i] = y[indices[i]];
    const { beta } = irlsOnDesign(full.select(indices), ry, norm, Float64Array.of(fit.intercept, fit.slope), {
      fixedScale,
      scaleHint: fit.scale,
      tolerance: REFIT_TOLERANCE,
      maxIterations: REFIT_MAX_ITERATIONS,
      buffers: work,
    });
    return [beta[0], beta[1]];
  };
}

/**
 * Exact Passing–Bablok point estimate on a resample, from the full data's pairwise slopes sorted once.
 * A resample holding sample i c_i times has, among its pairs of different samples, the slope S_ij exactly c_i·c_j
 * times, and pairs of the same sample are identical points, which the method skips. So the resample's N, its K
 * (slopes below −1) and its shifted median (rank (N + 1)/2 + K, or the mean of ranks N/2 + K and N/2 + 1 + K;
 * Passing & Bablok 1983) are weighted counts over the one sorted list, and a = median(y − b·x) over the resample.
 * Slopes are (y_j − y_i)/(x_j − x_i), identical points skipped, slopes of exactly −1 dropped, equal x with different
 * y counted as +∞ — as in fitPassingBablok, which the tests compare it with. O(n²) once, then per resample the
 * weight below the full data's median slope (slopeScanStart), a scan from there to the resample's median and the
 * median offset from a nearly sorted order (weightedMedianOffset), with no allocation, instead of a full fit with its
 * intervals and linearity test.
 */
function passingBablokRefit(x: readonly number[], y: readonly number[]): IndexedRefit {
  const n = x.length;
  const pairCount = (n * (n - 1)) / 2;
  const slopes = new Float64Array(pairCount);
  // sample numbers fit 16 bits below SORTED_SLOPES_LIMIT; half the memory traffic of the scan
  const first = new Uint16Array(pairCount);
  const second = new Uint16Array(pairCount);
  const excludedFirst: number[] = [];
  const excludedSecond: number[] = [];
  let kept = 0;
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) {
      const dx = x[j] - x[i];
      const dy = y[j] - y[i];
      const slope = dx === 0 ? (dy === 0 ? Number.NaN : Number.POSITIVE_INFINITY) : dy / dx;
      if (Number.isNaN(slope) || slope === -1) {
        excludedFirst.push(i);
        excludedSecond.push(j);
        continue;
      }
      slopes[kept] = slope;
      first[kept] = i;
      second[kept] = j;
      kept++;
    }
  }
  // ties (equal slopes) in pair order
  const order = stableOrder(slopes.subarray(0, kept));
  const sortedSlopes = new Float64Array(kept);
  const sortedFirst = new Uint16Array(kept);
  const sortedSecond = new Uint16Array(kept);
  for (let k = 0; k < kept; k++) {
    sortedSlopes[k] = slopes[order[k]];
    sortedFirst[k] = first[order[k]];
    sortedSecond[k] = second[order[k]];
  }
  let belowMinusOneEnd = 0;
  while (belowMinusOneEnd < kept && sortedSlopes[belowMinusOneEnd] < -1) belowMinusOneEnd++;

  const counts = new Int32Array(n);
  // the points in the order of y − b·x at the full data's median slope, near every resample's b
  const middle = sortedSlopes[belowMinusOneEnd + ((kept - 1) >> 1)];
  const referenceSlope = Number.isFinite(middle) ? middle : 0;
  const byOffset = stableOrder(Float64Array.from(x, (xi, i) => y[i] - referenceSlope * xi));
  const offsetValues = new Float64Array(n);
  const offsetCounts = new Int32Array(n);
  const droppedFirst = Uint16Array.from(excludedFirst);
  const droppedSecond = Uint16Array.from(excludedSecond);
  const scanStart = slopeScanStart(x, y, sortedSlopes, sortedFirst, sortedSecond, belowMinusOneEnd, excludedFirst, excludedSecond);
  /** Mean of the slopes at 1-based weighted ranks `low` ≤ `high`, the slopes below −1 weighing `shift`. */
  const meanAtRanks = (low: number, high: number, shift: number) =>
    scanStart
      ? weightedMeanAtRanks(sortedSlopes, sortedFirst, sortedSecond, counts, scanStart.position, scanStart.weightBelow(counts), low, high)
      : weightedMeanAtRanks(sortedSlopes, sortedFirst, sortedSecond, counts, belowMinusOneEnd, shift, low, high);
  return (indices) => {
    const size = indices.length;
    counts.fill(0);
    for (let i = 0; i < size; i++) counts[indices[i]]++;
    let sumSquares = 0;
    for (let i = 0; i < n; i++) sumSquares += counts[i] * counts[i];
    const total = (size * size - sumSquares) / 2 - pairWeight(droppedFirst, droppedSecond, counts, droppedFirst.length);
    const shift = pairWeight(sortedFirst, sortedSecond, counts, belowMinusOneEnd);
    const half = Math.floor(total / 2);
    if (total <= 0 || half + 1 + shift > total) {
      throw new StatsInputError('the resample has no usable shifted median slope (no slopes, or too many below −1)', { field: 'x' });
    }
    const slope = total % 2 === 1 ? meanAtRanks(half + 1 + shift, half + 1 + shift, shift) : meanAtRanks(half + shift, half + 1 + shift, shift);
    if (!Number.isFinite(slope)) {
      throw new StatsInputError('the resample\'s median slope is a vertical pair: too many samples share one x value', { field: 'x' });
    }
    return [weightedMedianOffset(x, y, slope, byOffset, counts, size, offsetValues, offsetCounts), slope];
  };
}

/** Σ counts[first[k]]·counts[second[k]] over the first `end` pairs: the resample weight of those pairs. */
function pairWeight(first: Uint16Array, second: Uint16Array, counts: Int32Array, end: number): number {
  let weight = 0;
  for (let k = 0; k < end; k++) weight += counts[first[k]] * counts[second[k]];
  return weight;
}

/**
 * The mean of the sorted slopes at 1-based weighted ranks `low` ≤ `high`, each slope weighted c_i·c_j (NaN when the
 * ranks lie beyond the last slope), scanning from position `start`, before which the slopes weigh `weightBefore`:
 * down while that weight reaches `low` (the weight before position 0 is 0 < low), then up to the ranks.
 * A function of its own so that the arrays are arguments, not captured variables.
 */
function weightedMeanAtRanks(
  sortedSlopes: Float64Array,
  sortedFirst: Uint16Array,
  sortedSecond: Uint16Array,
  counts: Int32Array,
  start: number,
  weightBefore: number,
  low: number,
  high: number,
): number {
  const kept = sortedSlopes.length;
  let k = start;
  let weight = weightBefore;
  while (weight >= low) {
    k--;
    weight -= counts[sortedFirst[k]] * counts[sortedSecond[k]];
  }
  while (k < kept) {
    weight += counts[sortedFirst[k]] * counts[sortedSecond[k]];
    if (weight >= low) break;
    k++;
  }
  const lowValue = sortedSlopes[k];
  while (weight < high && k < kept - 1) {
    k++;
    weight += counts[sortedFirst[k]] * counts[sortedSecond[k]];
  }
  return weight >= high ? (lowValue + sortedSlopes[k]) / 2 : Number.NaN;
}

/**
 * Where the weighted slope scan starts: a sorted position p0 near the full data's shifted median slope (rank
 * (N + 1)/2 + K), around which resample medians fall, at the widest gap between neighbouring slopes within n/2
 * positions of it, and t halfway across that gap, so that the kept pairs before p0 are exactly those with slope < t
 * and no pair's slope lies close to t. For a pair in x order (ties by key), slope < t ⇔ the keys y − t·x are
 * inverted, so the resample weight Σ c_i·c_j of the pairs before p0 is a weighted inversion count, O(n log n) with a
 * Fenwick tree, minus the dropped −1 slopes when −1 < t. Floating point could make the computed slopes and keys
 * disagree on some pair, so every pair is checked once here; on any disagreement there is no start and the scan
 * runs from the slopes below −1, so results never change.
 */
function slopeScanStart(
  x: readonly number[],
  y: readonly number[],
  sortedSlopes: Float64Array,
  sortedFirst: Uint16Array,
  sortedSecond: Uint16Array,
  belowMinusOneEnd: number,
  excludedFirst: readonly number[],
  excludedSecond: readonly number[],
): { position: number; weightBelow: (counts: Int32Array) => number } | null {
  const n = x.length;
  const kept = sortedSlopes.length;
  const median = belowMinusOneEnd + ((kept - 1) >> 1);
  const from = Math.max(belowMinusOneEnd + 1, median - (n >> 1));
  const to = Math.min(kept - 1, median + (n >> 1));
  if (from > to) return null;
  // the widest gap between neighbouring slopes near the median, so that no pair's slope is close to t
  let position = from;
  for (let k = from + 1; k <= to; k++) {
    if (sortedSlopes[k] - sortedSlopes[k - 1] > sortedSlopes[position] - sortedSlopes[position - 1]) position = k;
  }
  const t = (sortedSlopes[position - 1] + sortedSlopes[position]) / 2;
  if (!(Number.isFinite(t) && sortedSlopes[position - 1] < t && t < sortedSlopes[position])) return null;

  // x order with ties by key, and dense key ranks (equal keys share a rank, so they never count as inverted)
  const keys = Float64Array.from(x, (xi, i) => y[i] - t * xi);
  const order = Array.from({ length: n }, (_, i) => i).sort((p, q) => x[p] - x[q] || keys[p] - keys[q]);
  const byKey = Array.from({ length: n }, (_, i) => i).sort((p, q) => keys[p] - keys[q]);
  const rank = new Int32Array(n);
  let distinct = 0;
  byKey.forEach((point, k) => {
    if (k > 0 && keys[point] !== keys[byKey[k - 1]]) distinct++;
    rank[point] = distinct;
  });
  const ranks = distinct + 1;

  // the pairs the key inversions must reproduce: kept pairs before p0, and dropped −1 slopes below t
  const below = new Uint8Array(n * n);
  for (let k = 0; k < position; k++) below[sortedFirst[k] * n + sortedSecond[k]] = 1;
  const minusOneBelow: number[] = [];
  if (-1 < t) {
    for (let e = 0; e < excludedFirst.length; e++) {
      const i = excludedFirst[e];
      const j = excludedSecond[e];
      if (!(x[i] === x[j] && y[i] === y[j])) {
        below[i * n + j] = 1;
        minusOneBelow.push(i, j);
      }
    }
  }
  for (let p = 0; p < n; p++) {
    for (let q = p + 1; q < n; q++) {
      const i = order[p];
      const j = order[q];
      const inverted = rank[i] > rank[j];
      const listed = below[Math.min(i, j) * n + Math.max(i, j)] === 1;
      if (inverted !== listed) return null;
    }
  }

  const xOrder = Int32Array.from(order);
  // the 1-based key rank of each point in x order, for the Fenwick tree
  const treeIndex = Int32Array.from(order, (point) => rank[point] + 1);
  const tree = new Int32Array(ranks + 1);
  const dropped = Int32Array.from(minusOneBelow);
  return { position, weightBelow: (counts) => weightedInversions(xOrder, treeIndex, tree, dropped, counts) };
}

/**
 * Σ c_i·c_j over the pairs whose keys are inverted in x order (a Fenwick tree over the key ranks, O(n log n)), minus
 * the weights of the `dropped` pairs (flat list of index pairs). A function of its own, with the arrays as arguments.
 */
function weightedInversions(xOrder: Int32Array, treeIndex: Int32Array, tree: Int32Array, dropped: Int32Array, counts: Int32Array): number {
  const ranks = tree.length - 1;
  tree.fill(0);
  let seen = 0;
  let weight = 0;
  for (let p = 0; p < xOrder.length; p++) {
    const c = counts[xOrder[p]];
    if (c === 0) continue;
    // previous points with a larger key: all seen so far minus those with rank ≤ this rank
    let atMost = 0;
    for (let r = treeIndex[p]; r > 0; r -= r & -r) atMost += tree[r];
    weight += c * (seen - atMost);
    for (let r = treeIndex[p]; r <= ranks; r += r & -r) tree[r] += c;
    seen += c;
  }
  for (let e = 0; e < dropped.length; e += 2) weight -= counts[dropped[e]] * counts[dropped[e + 1]];
  return weight;
}

/**
 * median(y − b·x) over a resample of `size` samples holding point i counts[i] times (even size: mean of the two
 * middle values). The present points' offsets are insertion-sorted, with their counts, into `values` and `weights`
 * taking the points in `byOffset`, their order at a slope near b, so that only the few pairs whose order differs
 * between the two slopes move; the middle ranks are then read off the cumulative counts. A function of its own so
 * that the arrays are arguments, not captured variables.
 */
function weightedMedianOffset(
  x: readonly number[],
  y: readonly number[],
  slope: number,
  byOffset: Int32Array,
  counts: Int32Array,
  size: number,
  values: Float64Array,
  weights: Int32Array,
): number {
  let m = 0;
  for (let r = 0; r < byOffset.length; r++) {
    const point = byOffset[r];
    const c = counts[point];
    if (c === 0) continue;
    const value = y[point] - slope * x[point];
    let j = m - 1;
    while (j >= 0 && values[j] > value) {
      values[j + 1] = values[j];
      weights[j + 1] = weights[j];
      j--;
    }
    values[j + 1] = value;
    weights[j + 1] = c;
    m++;
  }
  // values[k] holds the 0-based ranks up to `upTo` − 1
  let k = 0;
  let upTo = weights[0];
  while (upTo <= (size - 1) >> 1) upTo += weights[++k];
  const lower = values[k];
  while (upTo <= size >> 1) upTo += weights[++k];
  return size % 2 === 1 ? lower : (lower + values[k]) / 2;
}

/** Above this many samples the sorted slope list (12 bytes a pair) would be too large; refit in full instead. */
const SORTED_SLOPES_LIMIT = 2000;

/** Full Passing–Bablok fit of each resample: O(n log n) memory, for large n. */
function passingBablokFullRefit(x: readonly number[], y: readonly number[]): IndexedRefit {
  return (indices) => {
    const fit = fitPassingBablok(Array.from(indices, (i) => x[i]), Array.from(indices, (i) => y[i]));
    return [fit.intercept, fit.slope];
  };
}

/** Exact LAD line of each resample; the two value buffers per resample size are made once. */
function ladRefit(x: readonly number[], y: readonly number[]): IndexedRefit {
  const buffers = new Map<number, { xs: number[]; ys: number[] }>();
  return (indices) => {
    const size = indices.length;
    let buffer = buffers.get(size);
    if (!buffer) {
      buffer = { xs: new Array<number>(size), ys: new Array<number>(size) };
      buffers.set(size, buffer);
    }
    for (let i = 0; i < size; i++) {
      buffer.xs[i] = x[indices[i]];
      buffer.ys[i] = y[indices[i]];
    }
    const line = ladLine(buffer.xs, buffer.ys);
    return [line.intercept, line.slope];
  };
}

/**
 * The refit that bootstrapBiasIntervals applies to each resample of a Passing–Bablok, LAD or robust fit: the exact
 * Passing–Bablok or LAD line of the resample, or the robust fit's IRLS warm-started from the full-data estimate
 * (see robustRefit). Returns [intercept, slope] of the samples at the given indices.
 *
 * @example
 * bootstrapRefit(fitRobustLine(x, y, 'huber'), x, y)(Int32Array.of(0, 0, 2, 3, 4)); // [a, b] of that resample
 */
export function bootstrapRefit(fit: LineFit, x: readonly number[], y: readonly number[], tuning?: BiasBootstrapOptions['tuning']): IndexedRefit {
  if (fit.method === 'passingBablok') return x.length <= SORTED_SLOPES_LIMIT ? passingBablokRefit(x, y) : passingBablokFullRefit(x, y);
  if (fit.method === 'lad') return ladRefit(x, y);
  return robustRefit(fit, x, y, tuning);
}

/**
 * Seeded case-resampling bootstrap CIs of the bias B(X_c) = a + (b − 1)·X_c of a Passing–Bablok or robust fit at
 * each level (Efron, JASA 1987; percentile or BCa, default 2,000 resamples, see bootstrapIntervals). Each refit
 * reuses buffers made once; a resample on which the refit fails (e.g. all x equal) is skipped and counted.
 *
 * @example
 * const fit = fitRobustLine(x, y, 'huber');
 * bootstrapBiasIntervals(x, y, fit, [70, 126], { seed: 1 }).intervals; // [[lo, hi], [lo, hi]]
 */
export function bootstrapBiasIntervals(
  x: readonly number[],
  y: readonly number[],
  fit: LineFit,
  levels: readonly number[],
  options: BiasBootstrapOptions = {},
): BootstrapBiasResult {
  if (x.length !== y.length || x.length !== fit.n) {
    throw new StatsInputError(`the fit was made on ${fit.n} samples but ${x.length} x and ${y.length} y values were given`, { field: 'x' });
  }
  levels.forEach(validateLevel);
  const refit = bootstrapRefit(fit, x, y, options.tuning);
  const statistic = (indices: Int32Array) => {
    const [a, b] = refit(indices);
    return levels.map((level) => lineBias(a, b, level).bias);
  };
  const result = bootstrapIntervals(x.length, statistic, {
    resamples: options.resamples,
    seed: options.seed,
    method: options.method,
    confidence: options.confidence ?? fit.confidence,
  });
  return {
    method: result.method,
    confidence: result.confidence,
    resamples: result.resamples,
    failedResamples: result.failedResamples,
    intervals: result.intervals,
  };
}

/**
 * The percent-bias CI that belongs to a bias CI at a level: 100·CI/X_c (ends swapped for negative levels).
 *
 * @example
 * percentBiasInterval([-2, 4], 200); // [-1, 2]
 */
export function percentBiasInterval(ci: [number, number], level: number): [number, number] {
  validateLevel(level);
  const lo = (100 * ci[0]) / level;
  const hi = (100 * ci[1]) / level;
  return lo <= hi ? [lo, hi] : [hi, lo];
}
