import { StatsInputError } from './errors';
import { MAD_CONSTANT, medianAbs, selectKth } from './linear';
import { validateConfidence } from './ols';
import { seededRandom } from './random';
import type { LineFit } from './types';
import { validatePairs } from './validate';

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

/** Buffers reused by every rotation of one data set's fit. */
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
function ladCoefficients(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  work: Workspace,
  start = -1,
): { intercept: number; slope: number; iterations: number; pivot: number } {
  const n = x.length;
  if (start < 0) {
    // start from a point of median x so that the first rotation already has data on both sides
    const medianX = selectKth(Float64Array.from(x), n >> 1);
    start = 0;
    while (x[start] !== medianX) start++;
  }
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
  return { intercept: line.intercept, slope: line.slope, iterations, pivot };
}

/** Type-7 quantile (R's default) of sorted values. */
function sortedQuantile(sorted: Float64Array, p: number): number {
  const h = (sorted.length - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, sorted.length - 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

/**
 * Least-absolute-deviations (L1) line, computed exactly (see above), with percentile confidence intervals
 * from a seeded bootstrap of the pairs (Efron & Tibshirani, An Introduction to the Bootstrap 1993, ch. 13):
 * LAD has no simple closed-form covariance, and its asymptotic one needs the error density at 0, so the
 * bootstrap is the honest interval. Resamples in which all x are equal are redrawn.
 * `scale` is the MAD of the residuals about zero.
 *
 * @example
 * fitLadLine([1, 2, 3, 4, 5], [1, 2, 3, 4, 50]).slope; // 1: the line through the four points on y = x
 */
export function fitLadLine(
  x: readonly number[],
  y: readonly number[],
  { confidence = 0.95, seed = 1, resamples = 1000 }: { confidence?: number; seed?: number; resamples?: number } = {},
): LineFit {
  validatePairs(x, y);
  validateConfidence(confidence);
  if (!Number.isInteger(resamples) || resamples < 100) {
    throw new StatsInputError(`resamples must be a whole number of at least 100 (got ${resamples})`, {
      field: 'resamples',
    });
  }
  const n = x.length;
  const work = workspace(n);
  const fit = ladCoefficients(x, y, work);

  const rng = seededRandom(seed);
  const bx = new Float64Array(n);
  const by = new Float64Array(n);
  const intercepts = new Float64Array(resamples);
  const slopes = new Float64Array(resamples);
  for (let r = 0; r < resamples; ) {
    let varies = false;
    let start = -1; // warm start: rotate first about the full-data fit's pivot sample when it was drawn
    for (let i = 0; i < n; i++) {
      const j = rng.int(n);
      bx[i] = x[j];
      by[i] = y[j];
      if (bx[i] !== bx[0]) varies = true;
      if (j === fit.pivot) start = i;
    }
    if (!varies) continue;
    const boot = ladCoefficients(bx, by, work, start);
    intercepts[r] = boot.intercept;
    slopes[r] = boot.slope;
    r++;
  }
  intercepts.sort();
  slopes.sort();
  const alpha = 1 - confidence;
  const interval = (sorted: Float64Array): [number, number] => [
    sortedQuantile(sorted, alpha / 2),
    sortedQuantile(sorted, 1 - alpha / 2),
  ];

  const residuals = Float64Array.from(x, (xi, i) => y[i] - fit.intercept - fit.slope * xi);
  return {
    method: 'lad',
    n,
    intercept: fit.intercept,
    slope: fit.slope,
    interceptCI: interval(intercepts),
    slopeCI: interval(slopes),
    confidence,
    scale: medianAbs(residuals, new Float64Array(n)) / MAD_CONSTANT,
    iterations: fit.iterations,
  };
}
