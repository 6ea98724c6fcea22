import { StatsInputError } from './errors';
import { normalQuantile } from './distributions';
import { seededRandom, type SeededRandom } from './random';
import { selectKth } from './linear';
import { validateConfidence, validatePairs } from './validate';
import type { LineFit } from './types';

export interface PassingBablokOptions {
  /** Confidence level of the intervals, in (0, 1). */
  confidence?: number;
  /** Significance level of the CUSUM linearity test. */
  linearityAlpha?: number;
  /**
   * 'direct' lists every pairwise slope (O(n²) memory), 'selection' finds the needed order
   * statistics without listing them (O(n) memory); 'auto' uses 'direct' up to 200 samples.
   * Both give identical results.
   */
  algorithm?: 'auto' | 'direct' | 'selection';
}

export interface CusumTest {
  /** max |cumulative sum| of the residual scores, ordered along the line. */
  statistic: number;
  /** h_α·√(L + 1), L the number of points below the line. */
  critical: number;
  /** True when the statistic does not exceed the critical value. */
  linear: boolean;
}

export type PassingBablokFit = LineFit & {
  /** K: the number of slopes below −1, by which the median is shifted. */
  shift: number;
  /** N: the number of slopes used (identical points and slopes of exactly −1 left out). */
  slopeCount: number;
  cusum: CusumTest;
  /** Pearson correlation of x and y (the method assumes positively related procedures). */
  pearsonR?: number;
};

/** Largest n for which 'auto' lists every slope. */
const DIRECT_LIMIT = 200;

/**
 * Passing–Bablok regression (Passing & Bablok, J Clin Chem Clin Biochem 1983).
 * Slopes S_ij = (y_j − y_i)/(x_j − x_i) over all pairs; pairs of identical points are skipped,
 * slopes of exactly −1 dropped, pairs with equal x and different y count as +∞. K = #(S < −1);
 * b is the median of the N slopes shifted by K, a = median(y − b·x). CI of b: the slopes of rank
 * M1 + K and M2 + K, M1 = round((N − C)/2), M2 = N − M1 + 1, C = z_{1−α/2}·√(n(n−1)(2n+5)/18);
 * CI of a: [median(y − b_hi·x), median(y − b_lo·x)].
 * Shifting by K amounts to ranking the slopes below −1 after all the others; ranks that land
 * among them (or on +∞) mean the method does not apply, and raise StatsInputError.
 * A vertical pair's sign cannot depend on the order of the data, so it is taken from the pair
 * ordered by (x, y), which makes it +∞; as shifted ranks never reach slopes below −1, −∞ would give the same result.
 *
 * The needed order statistics are found without listing the O(n²) slopes (randomized slope
 * selection: Matoušek, Inf Process Lett 1991; Dillencourt, Mount & Netanyahu, Int J Comput Geom
 * Appl 1992): the number of slopes below t is the number of inversions of y − t·x in x order,
 * counted by merge sort; random slopes between two bounds are drawn as random inversions; the bounds
 * close in on the wanted ranks until the few slopes between them can be listed and the ranks
 * selected. The wanted ranks (median, M1, M2) lie close together, so one bracket around all of them
 * and one sample inside it start every rank's search, and a bound counted once is not sorted again.
 * Tied or nearly tied slopes (rounded data), which no bound can separate, are settled by comparing
 * slope values in one pass over their cluster, so that case takes time in proportion to its size.
 * Floating-point care: bounds are widened by a margin far above rounding error and the selected
 * slope must lie well inside them, so the result equals sorting every slope computed as above.
 *
 * Linearity: CUSUM test of the paper (scores and bound from memory of Passing & Bablok 1983).
 * Points above the line score √(L/l), below −√(l/L), on it 0 (l above, L below); ordered along the
 * line; the statistic is max |cumulative sum|, rejected above h_α·√(L + 1) with h_α the Kolmogorov
 * quantile, here its asymptotic form √(−ln(α/2)/2) (1.36 at α = 0.05). For a known line the sum is
 * √(lL) times a two-sample Kolmogorov–Smirnov distance, whose bound would be h_α·√(l + L); fitting
 * the line balances the signs along it, and the smaller bound √(L + 1) keeps the level near α.
 *
 * @example
 * const fit = fitPassingBablok([1, 2, 3, 4, 5, 6], [3.1, 4.9, 7.2, 9.0, 10.8, 13.1]);
 * fit.slope; // ≈ 1.97
 */
export function fitPassingBablok(
  x: readonly number[],
  y: readonly number[],
  options: PassingBablokOptions = {},
): PassingBablokFit {
  const { confidence = 0.95, linearityAlpha = 0.05, algorithm = 'auto' } = options;
  validatePairs(x, y);
  validateConfidence(confidence);
  if (!Number.isFinite(linearityAlpha) || linearityAlpha <= 0 || linearityAlpha >= 1) {
    throw new StatsInputError(`linearityAlpha must be between 0 and 1 (got ${String(linearityAlpha)})`, { field: 'linearityAlpha' });
  }
  if (algorithm !== 'auto' && algorithm !== 'direct' && algorithm !== 'selection') {
    throw new StatsInputError(`algorithm must be 'auto', 'direct' or 'selection' (got ${String(algorithm)})`, { field: 'algorithm' });
  }
  const n = x.length;
  const points = sortPoints(x, y);
  const slopes: SlopeSet =
    algorithm === 'direct' || (algorithm === 'auto' && n <= DIRECT_LIMIT) ? new ListedSlopes(points) : new SelectedSlopes(points);

  const shift = slopes.belowMinusOne;
  const slopeCount = slopes.finiteCount - slopes.equalMinusOne + slopes.verticalCount;
  if (slopeCount === 0) throw new StatsInputError('every pairwise slope is exactly −1, so Passing–Bablok has no slopes to use', { field: 'y' });

  const z = normalQuantile((1 + confidence) / 2);
  const spread = z * Math.sqrt((n * (n - 1) * (2 * n + 5)) / 18);
  const m1 = Math.round((slopeCount - spread) / 2);
  if (m1 < 1) {
    throw new StatsInputError(
      `too few slopes for a ${confidence} confidence interval: with n = ${n} and N = ${slopeCount} slopes, ` +
        `M1 = round((N − C)/2) = ${m1} with C = ${spread.toFixed(3)}`,
      { field: 'x' },
    );
  }
  const m2 = slopeCount - m1 + 1;
  const medianRanks = slopeCount % 2 === 1 ? [(slopeCount + 1) / 2] : [slopeCount / 2, slopeCount / 2 + 1];
  const values = shiftedRankValues(slopes, [...medianRanks, m1, m2]);
  const slope = medianRanks.length === 1 ? values.get(medianRanks[0])! : (values.get(medianRanks[0])! + values.get(medianRanks[1])!) / 2;
  const slopeLow = values.get(m1)!;
  const slopeHigh = values.get(m2)!;
  if (!Number.isFinite(slope)) {
    throw new StatsInputError('the median slope is a vertical pair: too many samples share the same x value', { field: 'x' });
  }
  if (!Number.isFinite(slopeHigh)) {
    throw new StatsInputError('the upper confidence bound of the slope is a vertical pair: too many samples share the same x value', {
      field: 'x',
    });
  }
  const intercept = medianOffset(points, slope);
  const interceptCI: [number, number] = [medianOffset(points, slopeHigh), medianOffset(points, slopeLow)];
  return {
    method: 'passingBablok',
    n,
    intercept,
    slope,
    interceptCI,
    slopeCI: [slopeLow, slopeHigh],
    confidence,
    shift,
    slopeCount,
    cusum: cusumTest(points, intercept, slope, linearityAlpha),
    pearsonR: pearson(points),
  };
}

interface Points {
  /** Sorted by x, ties by y. */
  x: Float64Array;
  y: Float64Array;
}

/**
 * The indices of `keys` in stable ascending order (equal keys, −0 and +0 among them, keep their index order), by
 * the merge sort the slope search uses: O(n log n) without a comparison callback.
 *
 * @example
 * stableOrder(Float64Array.of(3, 1, 3, 2)); // Int32Array [1, 3, 0, 2]
 */
export function stableOrder(keys: Float64Array): Int32Array {
  const order = identityOrder(keys.length);
  mergeSort(order, keys, mergeScratch(keys.length), null, null);
  return order;
}

function sortPoints(x: readonly number[], y: readonly number[]): Points {
  const n = x.length;
  const keyX = Float64Array.from(x);
  const scratch = mergeScratch(n);
  let order = identityOrder(n);
  mergeSort(order, keyX, scratch, null, null);
  let tiedX = false;
  for (let k = 1; k < n && !tiedX; k++) tiedX = x[order[k]] === x[order[k - 1]];
  if (tiedX) {
    // Two stable passes: by y, then by x, give the (x, y) order.
    order = identityOrder(n);
    mergeSort(order, Float64Array.from(y), scratch, null, null);
    mergeSort(order, keyX, scratch, null, null);
  }
  const sortedX = new Float64Array(n);
  const sortedY = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    sortedX[k] = x[order[k]];
    sortedY[k] = y[order[k]];
  }
  return { x: sortedX, y: sortedY };
}

/** 0, 1, …, n − 1. */
function identityOrder(n: number): Int32Array {
  const order = new Int32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  return order;
}

/** The slope between the points of sorted indices i < j with x_i < x_j, computed the one way used everywhere. */
function pairSlope(points: Points, i: number, j: number): number {
  return (points.y[j] - points.y[i]) / (points.x[j] - points.x[i]);
}

/** The finite pairwise slopes (pairs with different x), with counts, and their order statistics. */
interface SlopeSet {
  finiteCount: number;
  verticalCount: number;
  belowMinusOne: number;
  equalMinusOne: number;
  /** Values of the finite slopes of the given ranks (1-based, ascending order). */
  select(ranks: number[]): Map<number, number>;
}

/** Pairs with equal x and different y (vertical) and pairs with different x (finite), from the (x, y) order. */
function countPairKinds(points: Points): { finite: number; vertical: number } {
  const n = points.x.length;
  let sameX = 0;
  let identical = 0;
  for (let start = 0; start < n; ) {
    let end = start + 1;
    while (end < n && points.x[end] === points.x[start]) end++;
    sameX += ((end - start) * (end - start - 1)) / 2;
    for (let s = start; s < end; ) {
      let e = s + 1;
      while (e < end && points.y[e] === points.y[s]) e++;
      identical += ((e - s) * (e - s - 1)) / 2;
      s = e;
    }
    start = end;
  }
  return { finite: (n * (n - 1)) / 2 - sameX, vertical: sameX - identical };
}

/** Direct path: every finite slope listed and sorted. */
class ListedSlopes implements SlopeSet {
  readonly finiteCount: number;
  readonly verticalCount: number;
  readonly belowMinusOne: number;
  readonly equalMinusOne: number;
  private readonly sorted: Float64Array;

  constructor(points: Points) {
    const kinds = countPairKinds(points);
    this.finiteCount = kinds.finite;
    this.verticalCount = kinds.vertical;
    const n = points.x.length;
    const all = new Float64Array(kinds.finite);
    let k = 0;
    for (let i = 0; i < n; i++) {
      for (let j = i + 1; j < n; j++) {
        if (points.x[j] !== points.x[i]) all[k++] = pairSlope(points, i, j);
      }
    }
    all.sort();
    this.sorted = all;
    let below = 0;
    let equal = 0;
    for (let i = 0; i < all.length && all[i] <= -1; i++) {
      if (all[i] < -1) below++;
      else equal++;
    }
    this.belowMinusOne = below;
    this.equalMinusOne = equal;
  }

  select(ranks: number[]): Map<number, number> {
    return new Map(ranks.map((k) => [k, this.sorted[k - 1]]));
  }
}

/**
 * Values of the shifted ranks: ranking the N kept slopes with those below −1 moved after the
 * others (equivalent to the paper's rank + K on the ascending list).
 */
function shiftedRankValues(slopes: SlopeSet, ranks: number[]): Map<number, number> {
  const aboveMinusOne = slopes.finiteCount - slopes.belowMinusOne - slopes.equalMinusOne;
  const finiteRanks: number[] = [];
  for (const m of ranks) {
    if (m > aboveMinusOne + slopes.verticalCount) {
      throw new StatsInputError(
        `${slopes.belowMinusOne} of the ${aboveMinusOne + slopes.verticalCount + slopes.belowMinusOne} slopes are below −1, ` +
          `so the shifted rank ${m} + K falls outside the slopes: Passing–Bablok needs positively related procedures`,
        { field: 'y' },
      );
    }
    if (m <= aboveMinusOne) finiteRanks.push(slopes.belowMinusOne + slopes.equalMinusOne + m);
  }
  const finite = slopes.select([...new Set(finiteRanks)].sort((a, b) => a - b));
  return new Map(ranks.map((m) => [m, m <= aboveMinusOne ? finite.get(slopes.belowMinusOne + slopes.equalMinusOne + m)! : Infinity]));
}

/** median(y − b·x). */
function medianOffset(points: Points, slope: number): number {
  const n = points.x.length;
  const offsets = new Float64Array(n);
  for (let i = 0; i < n; i++) offsets[i] = points.y[i] - slope * points.x[i];
  const upper = sortedValueAt(offsets, n >> 1);
  return n % 2 === 1 ? upper : (sortedValueAt(offsets, n / 2 - 1) + upper) / 2;
}

/**
 * The value that sorting `values` ascending (Float64Array sort: numeric, −0 before +0) puts at the 0-based
 * `index`, found by selection in expected linear time (selectKth); reorders `values`.
 */
function sortedValueAt(values: Float64Array, index: number): number {
  const value = selectKth(values, index);
  if (value !== 0) return value;
  // comparisons cannot tell −0 from +0, which the sorted order puts first
  let negative = 0;
  let negativeZeros = 0;
  for (let i = 0; i < values.length; i++) {
    if (values[i] < 0) negative++;
    else if (Object.is(values[i], -0)) negativeZeros++;
  }
  return index < negative + negativeZeros ? -0 : 0;
}

function cusumTest(points: Points, intercept: number, slope: number, alpha: number): CusumTest {
  const n = points.x.length;
  const sign = new Int8Array(n);
  let above = 0;
  let below = 0;
  for (let i = 0; i < n; i++) {
    const residual = points.y[i] - intercept - slope * points.x[i];
    sign[i] = residual > 0 ? 1 : residual < 0 ? -1 : 0;
    if (residual > 0) above++;
    else if (residual < 0) below++;
  }
  const h = Math.sqrt(-Math.log(alpha / 2) / 2);
  const critical = h * Math.sqrt(below + 1);
  if (above === 0 || below === 0) return { statistic: 0, critical, linear: true };
  // Position along the line: projection on the direction (1, b); ties keep the (x, y) order.
  const position = new Float64Array(n);
  for (let i = 0; i < n; i++) position[i] = points.x[i] + slope * points.y[i];
  const order = identityOrder(n);
  mergeSort(order, position, mergeScratch(n), null, null);
  const up = Math.sqrt(below / above);
  const down = Math.sqrt(above / below);
  let sum = 0;
  let statistic = 0;
  for (const i of order) {
    sum += sign[i] > 0 ? up : sign[i] < 0 ? -down : 0;
    statistic = Math.max(statistic, Math.abs(sum));
  }
  return { statistic, critical, linear: statistic <= critical };
}

function pearson(points: Points): number | undefined {
  const n = points.x.length;
  let mx = 0;
  let my = 0;
  for (let i = 0; i < n; i++) {
    mx += points.x[i];
    my += points.y[i];
  }
  mx /= n;
  my /= n;
  let sxx = 0;
  let syy = 0;
  let sxy = 0;
  for (let i = 0; i < n; i++) {
    const dx = points.x[i] - mx;
    const dy = points.y[i] - my;
    sxx += dx * dx;
    syy += dy * dy;
    sxy += dx * dy;
  }
  return syy === 0 ? undefined : sxy / Math.sqrt(sxx * syy);
}

// ---------------------------------------------------------------------------------------------
// Selection path.

/**
 * What a PairSink does with each slope: 'count' the slopes below and equal to `value`; 'list' those
 * strictly between `from` and `to`; 'bin' them by the sorted distinct `edges` (bin 2i+1 holds
 * edges[i] itself, bin 2i the slopes strictly between edges[i−1] and edges[i]).
 */
type SinkMode = 'count' | 'list' | 'bin';

/**
 * Receives the pairs found by the merge sort, a run of earlier points at a time, and counts,
 * lists or bins their slopes. One class, so that the hot call stays monomorphic.
 */
class PairSink {
  below = 0;
  equal = 0;
  total = 0;
  listed = new Float64Array(1024);
  listedLength = 0;
  overflow = false;
  readonly bins: Float64Array;
  constructor(
    private readonly points: Points,
    private readonly mode: SinkMode,
    private readonly value = 0,
    private readonly from = -Infinity,
    private readonly to = Infinity,
    private readonly edges: Float64Array = new Float64Array(0),
    /** 'list' stops storing (and sets `overflow`) beyond this many slopes. */
    private readonly cap = Infinity,
  ) {
    this.bins = new Float64Array(mode === 'bin' ? 2 * edges.length + 1 : 0);
  }

  take(items: Int32Array, start: number, end: number, q: number): void {
    const { x, y } = this.points;
    this.total += end - start;
    // The pair in x order, so that the slope is computed exactly as in pairSlope.
    if (this.mode === 'count') {
      for (let k = start; k < end; k++) {
        const p = items[k];
        const s = p < q ? (y[q] - y[p]) / (x[q] - x[p]) : (y[p] - y[q]) / (x[p] - x[q]);
        if (s < this.value) this.below++;
        else if (s === this.value) this.equal++;
      }
    } else if (this.mode === 'list') {
      for (let k = start; k < end; k++) {
        const p = items[k];
        const s = p < q ? (y[q] - y[p]) / (x[q] - x[p]) : (y[p] - y[q]) / (x[p] - x[q]);
        if (s > this.from && s < this.to) this.push(s);
      }
    } else {
      // Tied slopes come in long runs: reuse the last bin while the value repeats.
      let lastSlope = NaN;
      let lastBin = 0;
      for (let k = start; k < end; k++) {
        const p = items[k];
        const s = p < q ? (y[q] - y[p]) / (x[q] - x[p]) : (y[p] - y[q]) / (x[p] - x[q]);
        if (s !== lastSlope) {
          lastSlope = s;
          lastBin = this.binOf(s);
        }
        this.bins[lastBin]++;
      }
    }
  }

  binOf(s: number): number {
    const edges = this.edges;
    let low = 0;
    let high = edges.length;
    while (low < high) {
      const mid = (low + high) >> 1;
      if (edges[mid] < s) low = mid + 1;
      else high = mid;
    }
    return low < edges.length && edges[low] === s ? 2 * low + 1 : 2 * low;
  }

  private push(s: number): void {
    if (this.listedLength >= this.cap) {
      this.overflow = true;
      return;
    }
    if (this.listedLength === this.listed.length) {
      const grown = new Float64Array(2 * this.listed.length);
      grown.set(this.listed);
      this.listed = grown;
    }
    this.listed[this.listedLength++] = s;
  }
}

/** A slope bound t with the points in the stable order of their keys y − t·x, and the number of slopes below t. */
interface SortedBound {
  t: number;
  order: Int32Array;
  count: number;
}

/** A bracket lo < hi of slopes, the numbers of slopes below its ends, and a uniform sample of the pairs inside it (null: none drawn). */
interface SearchStart {
  lo: number;
  hi: number;
  countLo: number;
  countHi: number;
  sample: Float64Array | null;
}

/** How many sorted bounds SelectedSlopes keeps (each n integers). */
const SORTED_BOUNDS_KEPT = 4;

/**
 * Order statistics of the finite slopes without listing them. A slope bound t is represented by
 * the key y − t·x of every point (t = ±∞ by the limiting orders); the pairs between bounds lo < hi
 * are the strict inversions of the hi keys in the (stable) order of the lo keys.
 */
class SelectedSlopes implements SlopeSet {
  readonly finiteCount: number;
  readonly verticalCount: number;
  readonly belowMinusOne: number;
  readonly equalMinusOne: number;
  private readonly points: Points;
  private readonly n: number;
  private readonly rng: SeededRandom;
  /** Rounding margin in slope units: marginScale + marginPerSlope·|t|. */
  private readonly marginScale: number;
  private readonly marginPerSlope: number;
  private readonly listBudget: number;
  private readonly sampleSize: number;
  private firstSample: Float64Array | null = null;
  // Scratch buffers, reused by every pass.
  private readonly key: Float64Array;
  private readonly identity: Int32Array;
  private readonly work: Int32Array;
  /** The last SORTED_BOUNDS_KEPT bounds sorted, most recent first: a bound is counted, then often sorted by again. */
  private readonly sortedBounds: SortedBound[] = [];
  private readonly scratch: MergeScratch;

  constructor(points: Points) {
    this.points = points;
    const n = points.x.length;
    this.n = n;
    const kinds = countPairKinds(points);
    this.finiteCount = kinds.finite;
    this.verticalCount = kinds.vertical;
    this.rng = seededRandom(0x5eed + n);
    let maxAbsX = 0;
    let maxAbsY = 0;
    for (let i = 0; i < n; i++) {
      maxAbsX = Math.max(maxAbsX, Math.abs(points.x[i]));
      maxAbsY = Math.max(maxAbsY, Math.abs(points.y[i]));
    }
    const rangeX = points.x[n - 1] - points.x[0];
    // Rounding moves y − t·x by about 1e-16·(|y| + |t||x|); 1e-6 of that scale over the x range
    // is far above it for any pair whose x values differ by more than ~1e-9 of the range.
    this.marginScale = (1e-6 * maxAbsY) / rangeX;
    this.marginPerSlope = (1e-6 * maxAbsX) / rangeX;
    this.listBudget = Math.max(4 * n, 20_000);
    this.sampleSize = Math.max(2 * n, 10_000);
    this.key = new Float64Array(n);
    this.identity = identityOrder(n);
    this.work = new Int32Array(n);
    this.scratch = mergeScratch(n);

    const minusOne = this.countAgainst(-1);
    this.belowMinusOne = minusOne.below;
    this.equalMinusOne = minusOne.equal;
  }

  select(ranks: number[]): Map<number, number> {
    const result = new Map<number, number>();
    // Heavily tied data: when all the ranks sit in one cluster of (nearly) equal slopes,
    // one pass over that cluster settles them together.
    if (ranks.length > 1 && this.finiteCount > this.listBudget) {
      const sample = this.sampleAll();
      const window = sampleWindow(sample, ranks[0] / this.finiteCount, ranks[ranks.length - 1] / this.finiteCount);
      if (window.high - window.low <= 4 * this.margin(window.low)) {
        if (this.pickInBand(window.edges, ranks, result).outcome === 'done') return result;
        result.clear();
      }
    }
    const start = this.sharedStart(ranks[0], ranks[ranks.length - 1]);
    for (let g = 0; g < ranks.length; ) {
      let end = g + 1;
      while (end < ranks.length && ranks[end] - ranks[end - 1] <= 1) end++;
      this.selectRange(ranks[g], ranks[end - 1], result, start);
      g = end;
    }
    return result;
  }

  /**
   * Where the search for every rank group starts: the ranks of a fit lie close together, so one bracket around all
   * of them, narrowed from the first sample, and one sample of the pairs inside it serve every group. The whole
   * range (sample drawn on demand) when the slopes are few, tied there, or the bracket misses a rank.
   */
  private sharedStart(kFirst: number, kLast: number): SearchStart {
    const whole: SearchStart = { lo: -Infinity, hi: Infinity, countLo: 0, countHi: this.finiteCount, sample: null };
    if (this.finiteCount <= this.listBudget) return whole;
    const sample = this.sampleAll();
    const window = sampleWindow(sample, kFirst / this.finiteCount, kLast / this.finiteCount);
    if (window.high - window.low <= 4 * this.margin(window.low)) return whole;
    const lo = window.iLow >= 1 ? (sample[window.iLow - 1] + sample[window.iLow]) / 2 : -Infinity;
    const hi = window.iHigh <= sample.length - 1 ? (sample[window.iHigh - 1] + sample[window.iHigh]) / 2 : Infinity;
    if (lo === -Infinity && hi === Infinity) return whole;
    const countLo = this.countBelow(lo);
    const countHi = this.countBelow(hi);
    if (!(countLo < kFirst && countHi >= kLast)) return whole;
    const between = countHi - countLo;
    return { lo, hi, countLo, countHi, sample: between > this.listBudget ? this.sampleBetween(lo, hi, Math.min(this.sampleSize, between)) : null };
  }

  private margin(t: number): number {
    return this.marginScale + this.marginPerSlope * Math.abs(t);
  }

  /** Finds the slopes of ranks kLow..kHigh (1-based, close together, inside `start`) into `out`. */
  private selectRange(kLow: number, kHigh: number, out: Map<number, number>, start: SearchStart): void {
    let { lo, hi, countLo, countHi } = start;
    let sampleSize = this.sampleSize;
    let stalled = false;
    for (let round = 0; round < 60; round++) {
      const between = countHi - countLo;
      if (between <= this.listBudget && this.listAndPick(lo, hi, countLo, kLow, kHigh, out)) return;
      const sample =
        round === 0 && start.sample
          ? start.sample
          : lo === -Infinity && hi === Infinity && sampleSize === this.sampleSize
            ? this.sampleAll()
            : this.sampleBetween(lo, hi, Math.min(sampleSize, between));
      const s = sample.length;
      const window = sampleWindow(sample, (kLow - countLo) / between, (kHigh - countLo) / between);
      const { iLow, iHigh, edges } = window;
      if (stalled || window.high - window.low <= 4 * this.margin(window.low)) {
        // Tied or nearly tied slopes (closer than rounding lets bounds separate): settle by value.
        const band = this.pickInBand(edges, rangeOf(kLow, kHigh), out);
        if (band.outcome === 'done') return;
        if (band.outcome === 'split') {
          for (let k = kLow; k <= kHigh; k++) this.selectRange(k, k, out, start);
          return;
        }
        if (band.outcome === 'below') {
          hi = band.bound;
          countHi = band.count;
        } else {
          lo = band.bound;
          countLo = band.count;
        }
        stalled = false;
        continue;
      }
      const newLo = iLow >= 1 ? (sample[iLow - 1] + sample[iLow]) / 2 : lo;
      const newHi = iHigh <= s - 1 ? (sample[iHigh - 1] + sample[iHigh]) / 2 : hi;
      let progressed = false;
      for (const bound of [newLo, newHi]) {
        if (!Number.isFinite(bound) || bound <= lo || bound >= hi) continue;
        const count = this.countBelow(bound);
        if (count < kLow && count > countLo) {
          lo = bound;
          countLo = count;
          progressed = true;
        } else if (count >= kHigh && count < countHi) {
          hi = bound;
          countHi = count;
          progressed = true;
        }
      }
      if (!progressed) {
        stalled = sampleSize >= 8 * this.sampleSize;
        sampleSize *= 2;
      }
    }
    throw new Error(`slope selection did not settle on ranks ${kLow}..${kHigh}`);
  }

  /**
   * Settles ranks by comparing slope values, not keys, over the band [first edge − margin,
   * last edge + margin] (edges: sorted distinct sample values): one pass counts the slopes per value
   * bin; a rank on an edge value is that value, a rank between two edges or outside them (but inside
   * the band) is found by listing that bin. A rank picked within half a margin of the band's end
   * might be misplaced by rounding, so its value becomes an extra edge and the band is redone.
   * 'below'/'above': the ranks lie outside the band, with `bound` the band's end and `count` the
   * slopes below it; 'split': the ranks need separate bands.
   */
  private pickInBand(
    edges: Float64Array,
    wanted: number[],
    out: Map<number, number>,
    depth = 0,
  ): { outcome: 'done' | 'below' | 'above' | 'split'; bound: number; count: number } {
    const first = edges[0];
    const last = edges[edges.length - 1];
    const marginLo = this.margin(first);
    const marginHi = this.margin(last);
    const bandLo = first - marginLo;
    const bandHi = last + marginHi;
    const countLo = this.countBelow(bandLo);
    const binned = this.pairsBetween(bandLo, bandHi, new PairSink(this.points, 'bin', 0, -Infinity, Infinity, edges));
    const bins = binned.bins;
    const countHi = countLo + binned.total;
    if (wanted.every((k) => k <= countLo)) return { outcome: 'below', bound: bandLo, count: countLo };
    if (wanted.every((k) => k > countHi)) return { outcome: 'above', bound: bandHi, count: countHi };
    if (wanted.some((k) => k <= countLo || k > countHi)) return { outcome: 'split', bound: 0, count: 0 };
    const picked = new Map<number, number>();
    for (const k of wanted) {
      let before = countLo;
      let bin = 0;
      while (before + bins[bin] < k) before += bins[bin++];
      if (bin % 2 === 1) {
        picked.set(k, edges[(bin - 1) / 2]);
        continue;
      }
      const from = bin === 0 ? -Infinity : edges[bin / 2 - 1];
      const to = bin === bins.length - 1 ? Infinity : edges[bin / 2];
      const gap = this.pairsBetween(bandLo, bandHi, new PairSink(this.points, 'list', 0, from, to));
      const value = sortedValueAt(gap.listed.subarray(0, gap.listedLength), k - before - 1);
      if (value < bandLo + marginLo / 2 || value > bandHi - marginHi / 2) {
        if (depth >= 3) throw new Error(`slope selection could not separate rank ${k} from rounding`);
        const wider = Float64Array.from(new Set([value, ...edges])).sort();
        return this.pickInBand(wider, wanted, out, depth + 1);
      }
      picked.set(k, value);
    }
    for (const [k, value] of picked) out.set(k, value);
    return { outcome: 'done', bound: 0, count: 0 };
  }

  /**
   * Lists the slopes between lo and hi (countLo of them below lo) and picks the ranks from them.
   * Each picked slope must lie clear of both bounds by half the rounding margin: then no slope can
   * have been put on the wrong side of a bound by rounding. Otherwise the bounds are widened by the
   * margin and tried once more. Refuses (false) when that fails too or too many slopes lie between.
   */
  private listAndPick(lo: number, hi: number, countLo: number, kLow: number, kHigh: number, out: Map<number, number>): boolean {
    for (const widen of [false, true]) {
      const marginLo = Number.isFinite(lo) ? this.margin(lo) : 0;
      const marginHi = Number.isFinite(hi) ? this.margin(hi) : 0;
      const from = widen ? lo - marginLo : lo;
      const to = widen ? hi + marginHi : hi;
      const below = widen ? this.countBelow(from) : countLo;
      // A bound on a tie cluster can put far more pairs inside the margins than between the bounds.
      const sink = this.pairsBetween(from, to, new PairSink(this.points, 'list', 0, -Infinity, Infinity, undefined, 4 * this.listBudget));
      if (sink.overflow) return false;
      const listed = sink.listed.subarray(0, sink.listedLength);
      const picked = rangeOf(kLow, kHigh).map((k) => {
        const index = k - below - 1;
        return index >= 0 && index < listed.length ? sortedValueAt(listed, index) : Number.NaN;
      });
      if (picked.every((value) => value >= from + marginLo / 2 && value <= to - marginHi / 2)) {
        picked.forEach((value, i) => out.set(kLow + i, value));
        return true;
      }
    }
    return false;
  }

  /** Exact numbers of slopes below v and equal to v: below v − margin by counting, the band v ± margin one by one. */
  private countAgainst(v: number): { below: number; equal: number } {
    const lo = v - this.margin(v);
    const band = this.pairsBetween(lo, v + this.margin(v), new PairSink(this.points, 'count', v));
    return { below: this.countBelow(lo) + band.below, equal: band.equal };
  }

  /** Key y − t·x of every point, in x order; ±∞ by their limiting orders. */
  private fillKey(t: number, key: Float64Array): void {
    const { x, y } = this.points;
    if (t === Infinity) for (let i = 0; i < this.n; i++) key[i] = -x[i];
    else for (let i = 0; i < this.n; i++) key[i] = y[i] - t * x[i];
  }

  /** The points in the stable order of the keys at lo (identity for lo = −∞). */
  private orderAt(lo: number): Int32Array {
    return lo === -Infinity ? this.identity : this.sortedAt(lo).order;
  }

  /** Approximate number of finite slopes below t (exact away from rounding distance of t). */
  private countBelow(t: number): number {
    if (t === -Infinity) return 0;
    if (t === Infinity) return this.finiteCount;
    return this.sortedAt(t).count;
  }

  /** The points sorted stably by their keys at a finite t from x order, and the inversions counted on the way. */
  private sortedAt(t: number): SortedBound {
    const kept = this.sortedBounds;
    const index = kept.findIndex((bound) => bound.t === t);
    const found = index >= 0 ? kept.splice(index, 1)[0] : null;
    const bound = found ?? (kept.length < SORTED_BOUNDS_KEPT ? { t, order: new Int32Array(this.n), count: 0 } : kept.pop()!);
    if (!found) {
      bound.t = t;
      bound.order.set(this.identity);
      this.fillKey(t, this.key);
      bound.count = mergeSort(bound.order, this.key, this.scratch, null, null);
    }
    kept.unshift(bound);
    return bound;
  }

  /** Hands every pair with slope between lo and hi to `sink`. */
  private pairsBetween(lo: number, hi: number, sink: PairSink): PairSink {
    this.work.set(this.orderAt(lo));
    this.fillKey(hi, this.key);
    mergeSort(this.work, this.key, this.scratch, null, sink);
    return sink;
  }

  /** Uniform random slopes over all finite pairs (drawn once, shared by every rank group), sorted. */
  private sampleAll(): Float64Array {
    if (this.firstSample) return this.firstSample;
    const { x } = this.points;
    const size = Math.min(this.sampleSize, this.finiteCount);
    const sample = new Float64Array(size);
    let drawn = 0;
    // Rejection of equal-x pairs; if they are most pairs, fall back to drawing inversions.
    for (let attempt = 0; attempt < 20 * size && drawn < size; attempt++) {
      const i = this.rng.int(this.n);
      const j = this.rng.int(this.n);
      if (x[i] < x[j]) sample[drawn++] = pairSlope(this.points, i, j);
      else if (x[j] < x[i]) sample[drawn++] = pairSlope(this.points, j, i);
    }
    this.firstSample = drawn === size ? sample.sort() : this.sampleBetween(-Infinity, Infinity, size);
    return this.firstSample;
  }

  /** `size` slopes drawn uniformly (with replacement) from the pairs between lo and hi, sorted. */
  private sampleBetween(lo: number, hi: number, size: number): Float64Array {
    const n = this.n;
    const { x, y } = this.points;
    const sequence = this.orderAt(lo);
    const work = this.work;
    work.set(sequence);
    this.fillKey(hi, this.key);
    const earlierLarger = new Float64Array(n);
    const total = mergeSort(work, this.key, this.scratch, earlierLarger, null);
    // work is now sorted by the hi key (stably): rank of each point, and back.
    const rankOf = new Int32Array(n);
    for (let r = 0; r < n; r++) rankOf[work[r]] = r;
    const targets = new Float64Array(size);
    for (let s = 0; s < size; s++) targets[s] = this.rng.next() * total;
    sortUniform(targets, total);
    const fenwick = new Int32Array(n + 1);
    let topStep = 1;
    while (topStep * 2 <= n) topStep *= 2;
    const sample = new Float64Array(size);
    let drawn = 0;
    let cumulative = 0;
    for (let position = 0; position < n && drawn < size; position++) {
      const q = sequence[position];
      const count = earlierLarger[q];
      // Inversions ending at q: the `count` earlier points with the largest hi ranks so far.
      while (drawn < size && targets[drawn] < cumulative + count) {
        const p = work[fenwickKth(fenwick, topStep, position - count + Math.floor(targets[drawn] - cumulative) + 1)];
        sample[drawn++] = p < q ? (y[q] - y[p]) / (x[q] - x[p]) : (y[p] - y[q]) / (x[p] - x[q]);
      }
      cumulative += count;
      for (let i = rankOf[q] + 1; i <= n; i += i & -i) fenwick[i]++;
    }
    return sample.subarray(0, drawn).sort();
  }
}

/** Runs of this many items are insertion-sorted before merging: four fewer passes over the arrays. */
const INSERTION_RUN = 16;

/**
 * Stable merge sort of `items` by key[item], counting strict inversions
 * (pairs p before q with key[p] > key[q]). Optionally adds per item q the number of such p
 * to earlierLarger[q], and hands each run of such p with its q to `sink`. Returns the inversion count.
 * Runs of INSERTION_RUN items are insertion-sorted first (the items an item moves past are exactly its
 * inversions within the run), then merged bottom-up. The keys travel with the items (sequential memory
 * access), in the scratch arrays of `scratch`.
 */
function mergeSort(
  items: Int32Array,
  key: Float64Array,
  scratch: MergeScratch,
  earlierLarger: Float64Array | null,
  sink: PairSink | null,
): number {
  const n = items.length;
  let src = items;
  let dst = scratch.items;
  let srcKey = scratch.keysA;
  let dstKey = scratch.keysB;
  for (let i = 0; i < n; i++) srcKey[i] = key[items[i]];
  let inversions = 0;
  for (let start = 0; start < n; start += INSERTION_RUN) {
    const end = Math.min(start + INSERTION_RUN, n);
    for (let i = start + 1; i < end; i++) {
      const value = srcKey[i];
      if (!(srcKey[i - 1] > value)) continue;
      const q = src[i];
      let j = i - 1;
      do {
        srcKey[j + 1] = srcKey[j];
        src[j + 1] = src[j];
        j--;
      } while (j >= start && srcKey[j] > value);
      srcKey[j + 1] = value;
      src[j + 1] = q;
      // the items moved past, now at j + 2 .. i
      inversions += i - j - 1;
      if (earlierLarger) earlierLarger[q] += i - j - 1;
      if (sink) sink.take(src, j + 2, i + 1, q);
    }
  }
  for (let width = INSERTION_RUN; width < n; width *= 2) {
    for (let start = 0; start < n; start += 2 * width) {
      const mid = Math.min(start + width, n);
      const end = Math.min(start + 2 * width, n);
      let i = start;
      let j = mid;
      let k = start;
      if (mid < end && srcKey[mid - 1] > srcKey[mid]) {
        let keyI = srcKey[i];
        let keyJ = srcKey[j];
        for (;;) {
          if (keyJ < keyI) {
            const q = src[j];
            inversions += mid - i;
            if (earlierLarger) earlierLarger[q] += mid - i;
            if (sink) sink.take(src, i, mid, q);
            dstKey[k] = keyJ;
            dst[k++] = q;
            if (++j === end) break;
            keyJ = srcKey[j];
          } else {
            dstKey[k] = keyI;
            dst[k++] = src[i];
            if (++i === mid) break;
            keyI = srcKey[i];
          }
        }
      }
      // Already ordered blocks (common near the end of the search) are copied as they are.
      for (; i < mid; i++, k++) {
        dstKey[k] = srcKey[i];
        dst[k] = src[i];
      }
      for (; j < end; j++, k++) {
        dstKey[k] = srcKey[j];
        dst[k] = src[j];
      }
    }
    const swap = src;
    src = dst;
    dst = swap;
    const swapKey = srcKey;
    srcKey = dstKey;
    dstKey = swapKey;
  }
  if (src !== items) items.set(src);
  return inversions;
}

/** Scratch arrays for mergeSort, sized for n items. */
interface MergeScratch {
  items: Int32Array;
  keysA: Float64Array;
  keysB: Float64Array;
}

function mergeScratch(n: number): MergeScratch {
  return { items: new Int32Array(n), keysA: new Float64Array(n), keysB: new Float64Array(n) };
}

/**
 * Rank (0-based) of the k-th smallest (1-based) stored value in a Fenwick tree of counts over
 * ranks; topStep is the largest power of two not above the number of ranks.
 */
function fenwickKth(tree: Int32Array, topStep: number, k: number): number {
  let position = 0;
  for (let step = topStep; step > 0; step >>= 1) {
    const next = position + step;
    if (next < tree.length && tree[next] < k) {
      position = next;
      k -= tree[next];
    }
  }
  return position;
}

/**
 * Sorts values drawn from [0, upper) ascending, in expected linear time when they are spread evenly: counted into
 * as many equal-width buckets as values (a bucket index never decreases as the value grows), then one insertion
 * sort over the buckets in order. Same result as sorting.
 */
function sortUniform(values: Float64Array, upper: number): void {
  const m = values.length;
  if (!(upper > 0)) return; // all values are 0
  const scale = m / upper;
  const bucketEnds = new Int32Array(m + 1);
  for (let i = 0; i < m; i++) bucketEnds[Math.min(m - 1, Math.floor(values[i] * scale)) + 1]++;
  for (let b = 0; b < m; b++) bucketEnds[b + 1] += bucketEnds[b];
  const bucketed = new Float64Array(m);
  for (let i = 0; i < m; i++) bucketed[bucketEnds[Math.min(m - 1, Math.floor(values[i] * scale))]++] = values[i];
  for (let i = 0; i < m; i++) {
    const value = bucketed[i];
    let j = i - 1;
    while (j >= 0 && values[j] > value) {
      values[j + 1] = values[j];
      j--;
    }
    values[j + 1] = value;
  }
}

/** kLow, kLow + 1, …, kHigh. */
function rangeOf(kLow: number, kHigh: number): number[] {
  return Array.from({ length: kHigh - kLow + 1 }, (_, i) => kLow + i);
}

/**
 * The stretch of a sorted sample that holds the fractions fracLow..fracHigh of the population
 * with high probability (3 binomial SDs and 3 more draws each side), its end values (clamped to
 * the sample) and its distinct values.
 */
function sampleWindow(sample: Float64Array, fracLow: number, fracHigh: number) {
  const s = sample.length;
  const iLow = Math.floor(fracLow * s - 3 * Math.sqrt(s * fracLow * (1 - fracLow)) - 3);
  const iHigh = Math.ceil(fracHigh * s + 3 * Math.sqrt(s * fracHigh * (1 - fracHigh)) + 3);
  const first = Math.max(iLow, 0);
  const last = Math.min(iHigh, s - 1);
  return { iLow, iHigh, low: sample[first], high: sample[last], edges: Float64Array.from(new Set(sample.subarray(first, last + 1))) };
}
