import { StatsInputError } from './errors';
import { MAD_CONSTANT, medianAbs } from './linear';
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

/**
 * The best line through data point k: with the line forced through (x_k, y_k),
 * Σ|rᵢ| = Σ |xᵢ − x_k|·|sᵢ − b| with sᵢ the slope from k to i, so b is the weighted median of the sᵢ
 * with weights |xᵢ − x_k|, and the line then also passes through the point whose slope is that median.
 */
function bestLineThrough(x: ArrayLike<number>, y: ArrayLike<number>, k: number): PivotLine | null {
  const others: number[] = [];
  const slopes = new Float64Array(x.length);
  let totalWeight = 0;
  for (let i = 0; i < x.length; i++) {
    const dx = x[i] - x[k];
    if (dx === 0) continue;
    slopes[i] = (y[i] - y[k]) / dx;
    totalWeight += Math.abs(dx);
    others.push(i);
  }
  if (others.length === 0) return null;
  others.sort((i, j) => slopes[i] - slopes[j]);
  let cumulative = 0;
  let median = others[others.length - 1];
  for (const i of others) {
    cumulative += Math.abs(x[i] - x[k]);
    if (cumulative >= totalWeight / 2) {
      median = i;
      break;
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
function ladCoefficients(x: ArrayLike<number>, y: ArrayLike<number>): { intercept: number; slope: number; iterations: number } {
  const n = x.length;
  // start from the point of median x so that the first rotation already has data on both sides
  const order = Array.from({ length: n }, (_, i) => i).sort((i, j) => x[i] - x[j]);
  let line = bestLineThrough(x, y, order[n >> 1]) as PivotLine;
  let pivot = line.other;
  let iterations = 1;
  const maxIterations = 10 * n + 100;
  while (iterations < maxIterations) {
    const rotated = bestLineThrough(x, y, pivot) as PivotLine;
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
      const candidate = bestLineThrough(x, y, i);
      iterations++;
      if (candidate && candidate.sumAbs < line.sumAbs - tolerance) improved = candidate;
    }
    if (!improved) break;
    pivot = improved.other;
    line = improved;
  }
  return { intercept: line.intercept, slope: line.slope, iterations };
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
  const fit = ladCoefficients(x, y);

  const rng = seededRandom(seed);
  const bx = new Float64Array(n);
  const by = new Float64Array(n);
  const intercepts = new Float64Array(resamples);
  const slopes = new Float64Array(resamples);
  for (let r = 0; r < resamples; ) {
    let varies = false;
    for (let i = 0; i < n; i++) {
      const j = rng.int(n);
      bx[i] = x[j];
      by[i] = y[j];
      if (bx[i] !== bx[0]) varies = true;
    }
    if (!varies) continue;
    const boot = ladCoefficients(bx, by);
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
