import { tQuantile } from './distributions';
import { StatsInputError } from './errors';
import { createDesign, createLineDesign, toArray, type LinearDesign } from './linear';
import type { LineFit } from './types';
import { validateConfidence, validateFinite, validatePairs } from './validate';

/** Result of an ordinary least-squares fit of y on the columns of X. */
export interface OlsResult {
  coefficients: number[];
  standardErrors: number[];
  /** σ̂²(X'X)⁻¹. */
  covariance: number[][];
  /** t-based confidence intervals at `confidence`. */
  ci: [number, number][];
  confidence: number;
  /** Residual standard deviation σ̂ = √(Σr²/(n − p)). */
  residualSD: number;
  df: number;
  residuals: number[];
  fitted: number[];
  /** Diagonal of the hat matrix X(X'X)⁻¹X'. */
  hat: number[];
}


/**
 * Checks y against a design and returns it as a Float64Array; at least p + 1 rows so that a residual
 * scale exists.
 *
 * @example
 * validateResponse(createDesign([[1, 0], [1, 1], [1, 2]]), [1, 2, 4]); // Float64Array [1, 2, 4]
 */
export function validateResponse(design: LinearDesign, y: readonly number[]): Float64Array {
  if (y.length !== design.n) {
    throw new StatsInputError(`y has ${y.length} values but X has ${design.n} rows`, { field: 'y' });
  }
  validateFinite(y, 'y');
  if (design.n <= design.p) {
    throw new StatsInputError(`at least ${design.p + 1} samples are needed for ${design.p} coefficients (got ${design.n})`, {
      field: 'y',
    });
  }
  return new Float64Array(y);
}

/**
 * OLS on a prepared design (shared by the matrix and the line entry points); formulas as olsRegression.
 *
 * @example
 * olsOnDesign(createLineDesign([0, 1, 2]), Float64Array.of(1, 3, 5.5)).coefficients; // ≈ [0.917, 2.25]
 */
export function olsOnDesign(design: LinearDesign, y: Float64Array, confidence = 0.95): OlsResult {
  validateConfidence(confidence);
  const { n, p } = design;
  const beta = design.solveWeighted(y, null);
  const residuals = new Float64Array(n);
  design.residuals(y, beta, residuals);
  let rss = 0;
  for (let i = 0; i < n; i++) rss += residuals[i] * residuals[i];
  const df = n - p;
  const sigma2 = rss / df;
  const covariance = design.crossProductInverse(null).map((row) => row.map((v) => v * sigma2));
  const standardErrors = covariance.map((row, j) => Math.sqrt(row[j]));
  const t = tQuantile(1 - (1 - confidence) / 2, df);
  const coefficients = toArray(beta);
  return {
    coefficients,
    standardErrors,
    covariance,
    ci: coefficients.map((c, j): [number, number] => [c - t * standardErrors[j], c + t * standardErrors[j]]),
    confidence,
    residualSD: Math.sqrt(sigma2),
    df,
    residuals: toArray(residuals),
    fitted: toArray(y.map((yi, i) => yi - residuals[i])),
    hat: design.hatDiagonal(null),
  };
}

/**
 * Ordinary least squares for a design matrix X (n × p, include a column of 1s for an intercept):
 * β̂ = (X'X)⁻¹X'y by QR, Cov(β̂) = σ̂²(X'X)⁻¹ with σ̂² = Σr²/(n − p), t intervals with n − p df
 * (any regression text, e.g. Draper & Smith, Applied Regression Analysis, 3rd ed., ch. 5).
 *
 * @example
 * olsRegression([[1, 0], [1, 1], [1, 2], [1, 3]], [1, 3, 5, 7.5]).coefficients; // ≈ [0.9, 2.15]
 */
export function olsRegression(
  X: readonly (readonly number[])[],
  y: readonly number[],
  opts: { confidence?: number } = {},
): OlsResult {
  const design = createDesign(X);
  return olsOnDesign(design, validateResponse(design, y), opts.confidence);
}

/**
 * OLS line y = a + b·x with t-based CIs (n − 2 df), classical covariance, residual SD as `scale`
 * and the hat values (any regression text).
 *
 * @example
 * fitOlsLine([1, 2, 3, 4], [1.1, 1.9, 3.2, 3.9]).slope; // 0.97
 */
export function fitOlsLine(
  x: readonly number[],
  y: readonly number[],
  { confidence = 0.95 }: { confidence?: number } = {},
): LineFit {
  validatePairs(x, y);
  const result = olsOnDesign(createLineDesign(x), new Float64Array(y), confidence);
  const [[caa, cab], [, cbb]] = result.covariance;
  return {
    method: 'ols',
    n: x.length,
    intercept: result.coefficients[0],
    slope: result.coefficients[1],
    interceptCI: result.ci[0],
    slopeCI: result.ci[1],
    confidence,
    covariance: [
      [caa, cab],
      [cab, cbb],
    ],
    df: result.df,
    scale: result.residualSD,
    hat: result.hat,
  };
}

/**
 * Confidence interval of the mean response a + b·x0 of any fit that carries a covariance and df:
 * ŷ0 ± t(1 − α/2, df)·√(Var a + 2x0·Cov(a, b) + x0²·Var b) (any regression text; for OLS this is
 * σ̂√(1/n + (x0 − x̄)²/Sxx)).
 *
 * @example
 * meanResponseInterval(fitOlsLine([1, 2, 3, 4], [1.1, 1.9, 3.2, 3.9]), 2.5).estimate; // 2.525
 */
export function meanResponseInterval(
  fit: LineFit,
  x0: number,
  confidence = fit.confidence,
): { estimate: number; standardError: number; ci: [number, number] } {
  validateFinite([x0], 'x0');
  validateConfidence(confidence);
  if (!fit.covariance || fit.df === undefined) {
    throw new StatsInputError(`the ${fit.method} fit has no covariance matrix, so no t interval can be formed`, {
      field: 'fit',
    });
  }
  const [[caa, cab], [, cbb]] = fit.covariance;
  const estimate = fit.intercept + fit.slope * x0;
  const standardError = Math.sqrt(caa + 2 * x0 * cab + x0 * x0 * cbb);
  const t = tQuantile(1 - (1 - confidence) / 2, fit.df);
  return { estimate, standardError, ci: [estimate - t * standardError, estimate + t * standardError] };
}
