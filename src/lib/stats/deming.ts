import { StatsInputError } from './errors';
import { tQuantile } from './distributions';
import { validateConfidence, validateFinite, validatePairs, validatePositive } from './validate';
import type { LineFit } from './types';

export interface DemingOptions {
  /** Error-variance ratio λ = σ²(y-error) / σ²(x-error); 1 gives orthogonal regression. */
  lambda?: number;
  /** Confidence level of the intervals, in (0, 1). */
  confidence?: number;
}

export interface WeightedDemingOptions extends DemingOptions {
  /** Iteration cap for the weight updates. */
  maxIterations?: number;
  /** Convergence: relative change of both coefficients below this. */
  tolerance?: number;
}

export type DemingFit = LineFit & { lambda: number };

export type WeightedDemingFit = DemingFit & {
  /** Final weight 1/((x̂ + ŷ)/2)² per sample, in input order (precision weights, not robustness weights). */
  precisionWeights: number[];
};

/**
 * Deming regression of y on x with error-variance ratio λ, with jackknife standard errors.
 *
 * Slope from the centred sums u = Σ(x−x̄)², q = Σ(y−ȳ)², p = Σ(x−x̄)(y−ȳ):
 * b = (q − λu + √((q − λu)² + 4λp²)) / (2p), a = ȳ − b·x̄ (Cornbleet & Gochman, Clin Chem 1979).
 * Standard errors and the covariance of (a, b) are the jackknife ones over leave-one-out fits,
 * var = (n−1)/n · Σ(θ₋ᵢ − θ̄₋)² (Linnet, Clin Chem 1993); intervals use t with n − 2 df.
 * The leave-one-out fits come from downdated sums, so the whole fit is O(n).
 *
 * @example
 * const fit = fitDeming([1, 2, 3, 4, 5], [1.1, 2.3, 2.8, 4.2, 5.1], { lambda: 1 });
 * fit.slope; // ≈ 0.997
 */
export function fitDeming(x: readonly number[], y: readonly number[], options: DemingOptions = {}): DemingFit {
  const { lambda = 1, confidence = 0.95 } = options;
  validatePairs(x, y);
  validatePositive(lambda, 'lambda');
  validateConfidence(confidence);
  const n = x.length;
  const weights = new Float64Array(n).fill(1);
  const sums = weightedSums(x, y, weights);
  const slope = demingSlope(sums.u, sums.q, sums.p, lambda);
  const intercept = sums.my - slope * sums.mx;

  // Removing sample i: means move by d/(n−1), centred sums lose n/(n−1)·dᵢ·eᵢ (exact downdate).
  const leaveOutIntercepts = new Float64Array(n);
  const leaveOutSlopes = new Float64Array(n);
  const shrink = n / (n - 1);
  for (let i = 0; i < n; i++) {
    const dx = x[i] - sums.mx;
    const dy = y[i] - sums.my;
    const b = demingSlope(sums.u - shrink * dx * dx, sums.q - shrink * dy * dy, sums.p - shrink * dx * dy, lambda, i);
    leaveOutSlopes[i] = b;
    leaveOutIntercepts[i] = sums.my - dy / (n - 1) - b * (sums.mx - dx / (n - 1));
  }
  return {
    method: 'deming',
    lambda,
    ...jackknifeSummary(n, intercept, slope, leaveOutIntercepts, leaveOutSlopes, confidence),
  };
}

/**
 * Error-variance ratio from duplicate measurements: λ = Σ(y₁ − y₂)² / Σ(x₁ − x₂)²
 * (the ratio of the two duplicate variances, each Σd²/(2n); Cornbleet & Gochman, Clin Chem 1979).
 *
 * @example
 * lambdaFromDuplicates([10, 20, 30], [10.2, 19.9, 30.1], [11, 21, 29], [10.6, 21.3, 29.5]); // ≈ 8.33
 */
export function lambdaFromDuplicates(
  x1: readonly number[],
  x2: readonly number[],
  y1: readonly number[],
  y2: readonly number[],
): number {
  const n = x1.length;
  const lengths: Array<[string, readonly number[]]> = [['x2', x2], ['y1', y1], ['y2', y2]];
  for (const [field, values] of lengths) {
    if (values.length !== n) {
      throw new StatsInputError(`${field} must have the same length as x1 (x1 has ${n}, ${field} has ${values.length})`, { field });
    }
  }
  if (n < 2) throw new StatsInputError(`at least 2 duplicate pairs are needed to estimate lambda (got ${n})`, { field: 'x1' });
  validateFinite(x1, 'x1');
  validateFinite(x2, 'x2');
  validateFinite(y1, 'y1');
  validateFinite(y2, 'y2');
  let sumX = 0;
  let sumY = 0;
  for (let i = 0; i < n; i++) {
    sumX += (x1[i] - x2[i]) ** 2;
    sumY += (y1[i] - y2[i]) ** 2;
  }
  if (sumX === 0) {
    throw new StatsInputError('all comparative duplicates are identical (x1 = x2 everywhere), so lambda cannot be estimated', { field: 'x1' });
  }
  if (sumY === 0) {
    throw new StatsInputError('all candidate duplicates are identical (y1 = y2 everywhere), so lambda would be 0', { field: 'y1' });
  }
  return sumY / sumX;
}

/**
 * Weighted Deming regression for errors with constant CV: weights wᵢ = 1/((x̂ᵢ + ŷᵢ)/2)² from the
 * estimated true values on the current line, x̂ = x + b·r/(λ + b²), ŷ = a + b·x̂, r = y − a − b·x,
 * refitted with weighted sums until the coefficients settle (Linnet, Stat Med 1990).
 * Standard errors, covariance and t intervals (n − 2 df) by the jackknife (Linnet, Clin Chem 1993);
 * each leave-one-out fit is iterated to convergence from the full-data line.
 *
 * @example
 * const fit = fitWeightedDeming([1, 2, 4, 8, 16], [1.1, 1.9, 4.3, 7.6, 16.9]);
 * fit.converged; // true
 */
export function fitWeightedDeming(
  x: readonly number[],
  y: readonly number[],
  options: WeightedDemingOptions = {},
): WeightedDemingFit {
  const { lambda = 1, confidence = 0.95, maxIterations = 100, tolerance = 1e-10 } = options;
  validatePairs(x, y);
  validatePositive(lambda, 'lambda');
  validateConfidence(confidence);
  validatePositive(tolerance, 'tolerance');
  if (!Number.isInteger(maxIterations) || maxIterations < 1) {
    throw new StatsInputError(`maxIterations must be a whole number of at least 1 (got ${maxIterations})`, { field: 'maxIterations' });
  }
  for (const [field, values] of [['x', x], ['y', y]] as const) {
    const bad = values.findIndex((v) => v <= 0);
    if (bad >= 0) {
      throw new StatsInputError(
        `${field}[${bad}] is ${values[bad]}; weighted Deming weights by 1/concentration², so every value must be above 0`,
        { field, index: bad },
      );
    }
  }
  const n = x.length;
  const all = new Uint8Array(n).fill(1);
  const start = fitDeming(x, y, { lambda, confidence });
  const full = iterateWeights(x, y, all, lambda, start.intercept, start.slope, maxIterations, tolerance);

  const leaveOutIntercepts = new Float64Array(n);
  const leaveOutSlopes = new Float64Array(n);
  let allConverged = full.converged;
  for (let i = 0; i < n; i++) {
    all[i] = 0;
    const fit = iterateWeights(x, y, all, lambda, full.intercept, full.slope, maxIterations, tolerance, i);
    all[i] = 1;
    leaveOutIntercepts[i] = fit.intercept;
    leaveOutSlopes[i] = fit.slope;
    allConverged &&= fit.converged;
  }
  return {
    method: 'weightedDeming',
    lambda,
    ...jackknifeSummary(n, full.intercept, full.slope, leaveOutIntercepts, leaveOutSlopes, confidence),
    iterations: full.iterations,
    converged: allConverged,
    precisionWeights: Array.from(full.weights),
  };
}

interface CentredSums {
  mx: number;
  my: number;
  u: number;
  q: number;
  p: number;
}

/** Weighted means and centred sums of squares and products (two passes for accuracy). */
function weightedSums(x: readonly number[], y: readonly number[], w: Float64Array): CentredSums {
  let sw = 0;
  let sx = 0;
  let sy = 0;
  for (let i = 0; i < w.length; i++) {
    sw += w[i];
    sx += w[i] * x[i];
    sy += w[i] * y[i];
  }
  const mx = sx / sw;
  const my = sy / sw;
  let u = 0;
  let q = 0;
  let p = 0;
  for (let i = 0; i < w.length; i++) {
    const dx = x[i] - mx;
    const dy = y[i] - my;
    u += w[i] * dx * dx;
    q += w[i] * dy * dy;
    p += w[i] * dx * dy;
  }
  return { mx, my, u, q, p };
}

/**
 * Deming slope from centred sums; the two algebraically equal forms avoid cancellation
 * when q − λu is negative. `leftOut` names the sample left out, for the error message.
 */
function demingSlope(u: number, q: number, p: number, lambda: number, leftOut?: number): number {
  const d = q - lambda * u;
  const root = Math.sqrt(d * d + 4 * lambda * p * p);
  if (p === 0 && d >= 0) {
    const where = leftOut === undefined ? '' : ` when sample ${leftOut} is left out (jackknife)`;
    throw new StatsInputError(`x and y are uncorrelated${where}, so the Deming slope is undefined`, { field: 'y', index: leftOut });
  }
  return d >= 0 ? (d + root) / (2 * p) : (2 * lambda * p) / (root - d);
}

interface WeightedFit {
  intercept: number;
  slope: number;
  weights: Float64Array;
  iterations: number;
  converged: boolean;
}

/** Linnet's iteration over the samples with `include[i] = 1`, started from the line (a, b). */
function iterateWeights(
  x: readonly number[],
  y: readonly number[],
  include: Uint8Array,
  lambda: number,
  startIntercept: number,
  startSlope: number,
  maxIterations: number,
  tolerance: number,
  leftOut?: number,
): WeightedFit {
  const n = x.length;
  const weights = new Float64Array(n);
  let intercept = startIntercept;
  let slope = startSlope;
  for (let iteration = 1; iteration <= maxIterations; iteration++) {
    const shrinkToLine = slope / (lambda + slope * slope);
    for (let i = 0; i < n; i++) {
      if (!include[i]) {
        weights[i] = 0;
        continue;
      }
      const xHat = x[i] + shrinkToLine * (y[i] - intercept - slope * x[i]);
      const level = (xHat + intercept + slope * xHat) / 2;
      if (!(level > 0)) {
        throw new StatsInputError(
          `the estimated true concentration of sample ${i} is ${level} (not above 0), so its weight 1/level² is undefined`,
          { field: 'x', index: i },
        );
      }
      weights[i] = 1 / (level * level);
    }
    const sums = weightedSums(x, y, weights);
    const newSlope = demingSlope(sums.u, sums.q, sums.p, lambda, leftOut);
    const newIntercept = sums.my - newSlope * sums.mx;
    const settled =
      Math.abs(newSlope - slope) <= tolerance * Math.abs(newSlope) &&
      Math.abs(newIntercept - intercept) <= tolerance * Math.max(Math.abs(newIntercept), Math.abs(sums.my));
    slope = newSlope;
    intercept = newIntercept;
    if (settled) return { intercept, slope, weights, iterations: iteration, converged: true };
  }
  return { intercept, slope, weights, iterations: maxIterations, converged: false };
}

/** Jackknife covariance of (a, b) from leave-one-out estimates, and t intervals with n − 2 df. */
function jackknifeSummary(
  n: number,
  intercept: number,
  slope: number,
  leaveOutIntercepts: Float64Array,
  leaveOutSlopes: Float64Array,
  confidence: number,
): Omit<LineFit, 'method'> {
  let meanA = 0;
  let meanB = 0;
  for (let i = 0; i < n; i++) {
    meanA += leaveOutIntercepts[i];
    meanB += leaveOutSlopes[i];
  }
  meanA /= n;
  meanB /= n;
  let saa = 0;
  let sbb = 0;
  let sab = 0;
  for (let i = 0; i < n; i++) {
    const da = leaveOutIntercepts[i] - meanA;
    const db = leaveOutSlopes[i] - meanB;
    saa += da * da;
    sbb += db * db;
    sab += da * db;
  }
  const factor = (n - 1) / n;
  const covariance: [[number, number], [number, number]] = [
    [factor * saa, factor * sab],
    [factor * sab, factor * sbb],
  ];
  const df = n - 2;
  const t = tQuantile((1 + confidence) / 2, df);
  const seA = Math.sqrt(covariance[0][0]);
  const seB = Math.sqrt(covariance[1][1]);
  return {
    n,
    intercept,
    slope,
    interceptCI: [intercept - t * seA, intercept + t * seA],
    slopeCI: [slope - t * seB, slope + t * seB],
    confidence,
    covariance,
    df,
  };
}

