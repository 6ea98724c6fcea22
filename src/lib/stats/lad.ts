import { StatsInputError } from './errors';
import { tQuantile, normalQuantile } from './distributions';
import { createLineDesign, MAD_CONSTANT, medianAbs, selectKth } from './linear';
import type { LineFit } from './types';
import { validateConfidence, validatePairs } from './validate';

/** A line through data point `pivot` and data point `other`, with its sum of absolute residuals. */
interface PivotLine {
  intercept: number;
  slope: number;
  other: number;
  sumAbs: number;
}

function sumAbsResiduals(x: ArrayLike<number>, y: ArrayLike<number>, a: number, b: number): number {
  let sum = 0;
  for (let i = 0; i < x.length; i++) sum += Math.abs(y[i] - a - b * x[i]);
  return sum;
}

/** Buffers reused by every rotation of one fit. */
interface Workspace {
  slopes: Float64Array;
  weights: Float64Array;
  order: Int32Array;
}

function workspace(n: number): Workspace {
  return { slopes: new Float64Array(n), weights: new Float64Array(n), order: new Int32Array(n) };
}

/**
 * The best line through data point k: with the line forced through (x_k, y_k),
 * Σ|rᵢ| = Σ |xᵢ − x_k|·|sᵢ − b| with sᵢ the slope from k to i, so b is the weighted median of the sᵢ
 * with weights |xᵢ − x_k| (the first slope, in increasing order, at which the cumulative weight reaches half),
 * and the line then also passes through the point whose slope that is. The weighted median is found by
 * three-way partitioning (weighted quickselect), in expected O(n).
 */
function bestLineThrough(x: ArrayLike<number>, y: ArrayLike<number>, k: number, work: Workspace): PivotLine | null {
  const n = x.length;
  const { slopes, weights, order } = work;
  let m = 0;
  let totalWeight = 0;
  for (let i = 0; i < n; i++) {
    const dx = x[i] - x[k];
    if (dx === 0) continue;
    slopes[i] = (y[i] - y[k]) / dx;
    weights[i] = Math.abs(dx);
    totalWeight += weights[i];
    order[m++] = i;
  }
  if (m === 0) return null;
  const half = totalWeight / 2;
  let lo = 0;
  let hi = m; // candidates are order[lo..hi)
  let weightBelow = 0; // weight of the slopes known to be below the range
  let median = -1;
  while (median < 0) {
    const pivot = slopes[order[lo + ((hi - lo) >> 1)]];
    // three-way partition of order[lo..hi) into < pivot | = pivot | > pivot
    let lt = lo;
    let gt = hi;
    let i = lo;
    let weightLess = 0;
    let weightEqual = 0;
    while (i < gt) {
      const index = order[i];
      const slope = slopes[index];
      if (slope < pivot) {
        weightLess += weights[index];
        order[i] = order[lt];
        order[lt++] = index;
        i++;
      } else if (slope > pivot) {
        order[i] = order[--gt];
        order[gt] = index;
      } else {
        weightEqual += weights[index];
        i++;
      }
    }
    if (weightBelow + weightLess >= half) hi = lt;
    else if (weightBelow + weightLess + weightEqual >= half) median = order[lt];
    else {
      weightBelow += weightLess + weightEqual;
      lo = gt;
    }
  }
  const slope = slopes[median];
  const intercept = y[k] - slope * x[k];
  return { intercept, slope, other: median, sumAbs: sumAbsResiduals(x, y, intercept, slope) };
}

/**
 * Exact least-absolute-deviations line: minimises Σ|yᵢ − a − b·xᵢ|. An optimum passes through two data points;
 * it is found by descent over such lines (Wesolowsky, Commun Stat Simul Comput 1981): rotate about one point
 * of the current line to the weighted-median slope, move to the new point, repeat while Σ|r| falls;
 * at the end every point on the line is tried as the pivot, which proves optimality (Σ|r| is convex and
 * piecewise linear, so a vertex that no rotation improves is a global minimum). When the minimum is not unique,
 * one optimal line through two data points is returned.
 */
function ladCoefficients(x: readonly number[], y: readonly number[]): { intercept: number; slope: number; iterations: number } {
  const n = x.length;
  const work = workspace(n);
  // start from a point of median x so that the first rotation already has data on both sides
  const medianX = selectKth(Float64Array.from(x), n >> 1);
  let start = 0;
  while (x[start] !== medianX) start++;
  let line = bestLineThrough(x, y, start, work) as PivotLine;
  let pivot = line.other;
  let iterations = 1;
  const maxIterations = 10 * n + 100;
  while (iterations < maxIterations) {
    const rotated = bestLineThrough(x, y, pivot, work) as PivotLine;
    iterations++;
    if (rotated.sumAbs < line.sumAbs) {
      pivot = rotated.other;
      line = rotated;
      continue;
    }
    // no descent about this pivot: try every other point lying on the line (degenerate vertices)
    const tolerance = 1e-12 * (1 + Math.abs(line.sumAbs));
    let improved: PivotLine | null = null;
    for (let i = 0; i < n && !improved; i++) {
      if (i === pivot || Math.abs(y[i] - line.intercept - line.slope * x[i]) > tolerance) continue;
      const candidate = bestLineThrough(x, y, i, work);
      iterations++;
      if (candidate && candidate.sumAbs < line.sumAbs - tolerance) improved = candidate;
    }
    if (!improved) break;
    pivot = improved.other;
    line = improved;
  }
  return { intercept: line.intercept, slope: line.slope, iterations };
}

/**
 * The exact least-absolute-deviations line alone, without intervals (any n ≥ 3), by the descent above.
 *
 * @example
 * ladLine([1, 2, 3, 4, 5], [1, 2, 3, 4, 50]); // { intercept: 0, slope: 1, iterations: … }
 */
export function ladLine(x: readonly number[], y: readonly number[]): { intercept: number; slope: number; iterations: number } {
  validatePairs(x, y);
  return ladCoefficients(x, y);
}

/** Type-7 quantile (R's default) of sorted values. */
function sortedQuantile(sorted: Float64Array, p: number): number {
  const h = (sorted.length - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, sorted.length - 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

/** Fewest samples for which the Hall–Sheather bandwidth at the median, ≈ 0.97·n^(−1/3), stays below 1/2. */
const LAD_MIN_SAMPLES = 8;

/**
 * Sparsity 1/f(0) of the errors at their median, estimated from the residuals: an Epanechnikov kernel density at 0,
 * f̂(0) = (1/(n·h)) Σ K(eᵢ/h) with K(u) = ¾(1 − u²) on |u| ≤ 1, and bandwidth
 * h = min(SD(y), IQR(e)/1.34)·(Φ⁻¹(½ + h₀) − Φ⁻¹(½ − h₀)), h₀ = n^(−1/3)·z₀.₉₇₅^(2/3)·(1.5·φ(0)²)^(1/3)
 * (bandwidth: Hall & Sheather, JRSS B 1988; kernel estimate of the sparsity: Koenker, Quantile Regression 2005, §3.4).
 */
function sparsityAtMedian(y: readonly number[], residuals: Float64Array): number {
  const n = residuals.length;
  const sorted = Float64Array.from(residuals).sort();
  const iqr = sortedQuantile(sorted, 0.75) - sortedQuantile(sorted, 0.25);
  let meanY = 0;
  for (const v of y) meanY += v / n;
  let ss = 0;
  for (const v of y) ss += (v - meanY) ** 2;
  const h0 = n ** (-1 / 3) * normalQuantile(0.975) ** (2 / 3) * ((1.5 * (1 / (2 * Math.PI))) ** (1 / 3));
  const h = Math.min(Math.sqrt(ss / n), iqr / 1.34) * (normalQuantile(0.5 + h0) - normalQuantile(0.5 - h0));
  if (!(h > 0)) {
    throw new StatsInputError(
      'the LAD confidence intervals are undefined: the interquartile range of the residuals is 0 (at least half of the samples lie on the line)',
      { field: 'y' },
    );
  }
  let density = 0;
  for (let i = 0; i < n; i++) {
    const u = residuals[i] / h;
    if (Math.abs(u) <= 1) density += 0.75 * (1 - u * u);
  }
  // the LAD line passes through two samples, whose residuals 0 give K(0) > 0, so the density is positive
  return (n * h) / density;
}

/**
 * Least-absolute-deviations (L1) line, computed exactly (see above). Its covariance is the asymptotic one of
 * Koenker & Bassett (Econometrica 1978) at the median, Cov(a, b) = ¼·(1/f(0))²·(X'X)⁻¹, with the sparsity
 * 1/f(0) estimated as in sparsityAtMedian, and t intervals with n − 2 df (the convention of statsmodels QuantReg,
 * vcov = "iid", against which it is checked). Needs at least 8 samples for the bandwidth to exist.
 * `scale` is the MAD of the residuals about zero. `seed` is accepted for a uniform call with the other fits;
 * nothing here is random.
 *
 * @example
 * fitLadLine([1, 2, 3, 4, 5, 6, 7, 8, 9], [1, 2, 3, 4, 5, 6, 7, 8.5, 30]).slope; // 1: the line through the first seven
 */
export function fitLadLine(
  x: readonly number[],
  y: readonly number[],
  { confidence = 0.95 }: { confidence?: number; seed?: number } = {},
): LineFit {
  validatePairs(x, y);
  validateConfidence(confidence);
  const n = x.length;
  if (n < LAD_MIN_SAMPLES) {
    throw new StatsInputError(
      `LAD confidence intervals need at least ${LAD_MIN_SAMPLES} samples (got ${n}): the density bandwidth is undefined below that`,
      { field: 'x' },
    );
  }
  const fit = ladCoefficients(x, y);
  const design = createLineDesign(x);
  const residuals = new Float64Array(n);
  design.residuals(new Float64Array(y), Float64Array.of(fit.intercept, fit.slope), residuals);
  const sparsity = sparsityAtMedian(y, residuals);
  const factor = 0.25 * sparsity * sparsity;
  const [[caa, cab], [, cbb]] = design.crossProductInverse(null).map((row) => row.map((v) => v * factor));
  const df = n - 2;
  const t = tQuantile(1 - (1 - confidence) / 2, df);
  const interval = (estimate: number, variance: number): [number, number] => [
    estimate - t * Math.sqrt(variance),
    estimate + t * Math.sqrt(variance),
  ];
  return {
    method: 'lad',
    n,
    intercept: fit.intercept,
    slope: fit.slope,
    interceptCI: interval(fit.intercept, caa),
    slopeCI: interval(fit.slope, cbb),
    confidence,
    covariance: [
      [caa, cab],
      [cab, cbb],
    ],
    df,
    scale: medianAbs(residuals, new Float64Array(n)) / MAD_CONSTANT,
    iterations: fit.iterations,
  };
}
