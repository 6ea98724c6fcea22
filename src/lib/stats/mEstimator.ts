import { iterateToFixedPoint, relativeChange } from './acceleration';
import { tQuantile } from './distributions';
import { StatsInputError } from './errors';
import { createDesign, createLineDesign, toArray, type LinearDesign } from './linear';
import { normByKey, type MNormKey, type RobustNorm } from './norms';
import { validateResponse } from './ols';
import { checkedSEstimate, sEstimateOnDesign, type SEstimate } from './sEstimator';
import type { LineFit, StartKind } from './types';
import { validateConfidence, validatePairs, validatePositive } from './validate';

/** Options of an M-estimation by IRLS. */
export interface MEstimatorOptions {
  /** 'ols', 's-estimate' or given coefficients; default 'ols' for convex ρ, 's-estimate' otherwise. */
  start?: 'ols' | 's-estimate' | number[];
  maxIterations?: number;
  /** Stop when the relative change in the coefficients, ‖Δβ‖/‖β‖, falls to this value. */
  tolerance?: number;
  confidence?: number;
  /** Seed of the S-estimate's random subsamples (only used with start 's-estimate'). */
  seed?: number;
  /**
   * An S-estimate of these same data already at hand (several fits of one analysis share one): with start
   * 's-estimate' its coefficients are the start and the search is not run again.
   */
  sEstimate?: SEstimate;
  /** Keep the scale fixed at this value instead of re-estimating the MAD at every iteration (MM). */
  fixedScale?: number;
  /**
   * Anderson acceleration once the steps are small (default true; see acceleration.ts): the same fixed point in
   * fewer iterations. false reproduces plain IRLS iterate by iterate.
   */
  accelerate?: boolean;
}

/** An M-estimate with its sandwich covariance and per-sample IRLS output, in input order. */
export interface MEstimate {
  coefficients: number[];
  standardErrors: number[];
  covariance: number[][];
  ci: [number, number][];
  confidence: number;
  /** n − p. */
  df: number;
  /** The scale used in the final iteration. */
  scale: number;
  iterations: number;
  converged: boolean;
  start: StartKind;
  weights: number[];
  /** Diagonal of the hat matrix of W^½X at the final weights. */
  hat: number[];
  residuals: number[];
}

/**
 * Huber's sandwich covariance of an M-estimate, the "H1" form of statsmodels RLM
 * (Huber, Robust Statistics 1981, §7.6): with u = r/s, m = mean ψ′(u) and K = 1 + (p/n)·Var ψ′(u)/m²,
 * Cov(β̂) = K² · [Σψ(u)²/(n − p)] · s² / m² · (X'X)⁻¹.
 *
 * @example
 * sandwichCovariance(createLineDesign([1, 2, 3, 4]), Float64Array.from([0.1, -0.2, 0.2, -0.1]), 0.2, huberNorm());
 */
export function sandwichCovariance(
  design: LinearDesign,
  residuals: Float64Array,
  scale: number,
  norm: RobustNorm,
): number[][] {
  const { n, p } = design;
  let sumPsi2 = 0;
  let sumDeriv = 0;
  let sumDeriv2 = 0;
  const inverseScale = 1 / scale;
  for (let i = 0; i < n; i++) {
    const u = residuals[i] * inverseScale;
    const psi = norm.psi(u);
    const deriv = norm.psiDeriv(u);
    sumPsi2 += psi * psi;
    sumDeriv += deriv;
    sumDeriv2 += deriv * deriv;
  }
  const meanDeriv = sumDeriv / n;
  if (!(meanDeriv > 0)) {
    throw new StatsInputError(
      `the sandwich covariance is undefined: the mean of ψ′ over the standardized residuals is ${meanDeriv} (too few samples inside the ${norm.name} tuning range)`,
      { field: 'y' },
    );
  }
  const varDeriv = sumDeriv2 / n - meanDeriv * meanDeriv;
  const k = 1 + (p / n) * (varDeriv / (meanDeriv * meanDeriv));
  const factor = (k * k * (sumPsi2 / (n - p)) * scale * scale) / (meanDeriv * meanDeriv);
  return design.crossProductInverse(null).map((row) => row.map((v) => v * factor));
}

/** Start coefficients and how they were obtained. */
function startingPoint(
  design: LinearDesign,
  y: Float64Array,
  norm: RobustNorm,
  start: MEstimatorOptions['start'],
  seed: number,
  sEstimate: SEstimate | undefined,
): { beta: Float64Array; kind: StartKind } {
  const choice = start ?? (norm.convex ? 'ols' : 's-estimate');
  if (Array.isArray(choice)) {
    if (choice.length !== design.p) {
      throw new StatsInputError(`start has ${choice.length} coefficients, expected ${design.p}`, { field: 'start' });
    }
    choice.forEach((v, j) => {
      if (!Number.isFinite(v)) {
        throw new StatsInputError(`start[${j}] is not a finite number (got ${String(v)})`, { field: 'start', index: j });
      }
    });
    return { beta: new Float64Array(choice), kind: 'given' };
  }
  if (choice === 'ols') return { beta: design.solveWeighted(y, null), kind: 'ols' };
  if (choice === 's-estimate') {
    const coefficients = (checkedSEstimate(sEstimate, design.p) ?? sEstimateOnDesign(design, y, { seed })).coefficients;
    return { beta: new Float64Array(coefficients), kind: 's-estimate' };
  }
  throw new StatsInputError(`start must be 'ols', 's-estimate' or an array of coefficients (got ${String(choice)})`, {
    field: 'start',
  });
}

/** Where IRLS stopped, with the final fit's residuals and their weights at the final scale. */
export interface IrlsResult {
  beta: Float64Array;
  /** The scale of the last step (the MAD of the residuals it started from, or the fixed scale). */
  scale: number;
  iterations: number;
  converged: boolean;
  residuals: Float64Array;
  weights: Float64Array;
}

/** Options of irlsOnDesign; work buffers may be lent so that repeated fits (bootstrap resamples) allocate nothing. */
export interface IrlsOptions {
  fixedScale?: number;
  /** A scale near the first MAD, which only speeds its median up (the result is the same). */
  scaleHint?: number;
  tolerance: number;
  maxIterations: number;
  accelerate?: boolean;
  buffers?: { residuals: Float64Array; weights: Float64Array; scratch: Float64Array };
  /** Replaces the first step's result (a better start, e.g. a one-step correction); later steps are plain IRLS. */
  adjustFirstStep?: (from: Float64Array, to: Float64Array) => Float64Array;
}

/**
 * The IRLS iteration itself (Holland & Welsch, Commun Stat 1977): from β, residuals r = y − Xβ, the scale
 * s = median(|r|)/0.6745 unless fixed, weights w(r/s), weighted least squares; until ‖Δβ‖/‖β‖ ≤ tolerance or
 * maxIterations, accelerated near the end (acceleration.ts). Shared by every M-estimate and by the bootstrap refits.
 *
 * @example
 * irlsOnDesign(createLineDesign(x), new Float64Array(y), huberNorm(), Float64Array.of(0, 1), { tolerance: 1e-10, maxIterations: 200 }).beta;
 */
export function irlsOnDesign(design: LinearDesign, y: Float64Array, norm: RobustNorm, start: Float64Array, options: IrlsOptions): IrlsResult {
  const { fixedScale, tolerance, maxIterations, accelerate = true, adjustFirstStep } = options;
  const { n } = design;
  const residuals = options.buffers?.residuals ?? new Float64Array(n);
  const weights = options.buffers?.weights ?? new Float64Array(n);
  const scratch = options.buffers?.scratch ?? new Float64Array(n);
  let scale = fixedScale ?? options.scaleHint ?? 0;
  let first = adjustFirstStep !== undefined;
  /** One IRLS step from β: residuals, the MAD scale (unless fixed), weights, weighted least squares. */
  const irlsStep = (beta: Float64Array): Float64Array => {
    if (fixedScale === undefined) scale = design.residualsAndMadScale(y, beta, residuals, scratch, scale);
    else design.residuals(y, beta, residuals);
    norm.weights(residuals, scale, weights);
    const next = design.solveWeighted(y, weights);
    if (!first) return next;
    first = false;
    return adjustFirstStep!(beta, next);
  };
  const { beta, iterations, converged } = iterateToFixedPoint(irlsStep, relativeChange, start, tolerance, maxIterations, accelerate);
  // the weights of the final fit's own residuals
  design.residuals(y, beta, residuals);
  norm.weights(residuals, scale, weights);
  return { beta, scale, iterations, converged, residuals, weights };
}

/**
 * IRLS on a prepared design; the shared core of fitMEstimator, fitRobustLine and the MM step
 * (MM passes `fixedScale` and its S-estimate as `start`, reported through `startKind`). Formulas as fitMEstimator.
 *
 * @example
 * mEstimateOnDesign(createLineDesign(x), new Float64Array(y), huberNorm()).coefficients;
 */
export function mEstimateOnDesign(
  design: LinearDesign,
  y: Float64Array,
  norm: RobustNorm,
  opts: MEstimatorOptions & { startKind?: StartKind } = {},
): MEstimate {
  const { maxIterations = 200, tolerance = 1e-10, confidence = 0.95, seed = 1, fixedScale, accelerate = true } = opts;
  validateConfidence(confidence);
  if (!Number.isInteger(maxIterations) || maxIterations < 1) {
    throw new StatsInputError(`maxIterations must be a whole number of at least 1 (got ${maxIterations})`, {
      field: 'maxIterations',
    });
  }
  validatePositive(tolerance, 'tolerance');
  if (fixedScale !== undefined) validatePositive(fixedScale, 'fixedScale');

  const { n, p } = design;
  const start = startingPoint(design, y, norm, opts.start, seed, opts.sEstimate);
  const { beta, scale, iterations, converged, residuals, weights } = irlsOnDesign(design, y, norm, start.beta, {
    fixedScale,
    tolerance,
    maxIterations,
    accelerate,
  });

  const covariance = sandwichCovariance(design, residuals, scale, norm);
  const standardErrors = covariance.map((row, j) => Math.sqrt(row[j]));
  const df = n - p;
  const t = tQuantile(1 - (1 - confidence) / 2, df);
  const coefficients = toArray(beta);
  return {
    coefficients,
    standardErrors,
    covariance,
    ci: coefficients.map((c, j): [number, number] => [c - t * standardErrors[j], c + t * standardErrors[j]]),
    confidence,
    df,
    scale,
    iterations,
    converged,
    start: opts.startKind ?? start.kind,
    weights: toArray(weights),
    hat: toArray(design.hatDiagonal(weights)),
    residuals: toArray(residuals),
  };
}

/**
 * M-estimate of y on the columns of X by iteratively reweighted least squares (Huber 1964; Holland & Welsch,
 * Commun Stat 1977): u = r/s with s = median(|r|)/0.6745 re-estimated every iteration (MASS::rlm
 * scale.est = "MAD"), weighted least squares with w(u) until ‖Δβ‖/‖β‖ ≤ tolerance or maxIterations,
 * sandwich covariance (statsmodels "H1") and t intervals with n − p df.
 * Convex ρ (Huber) starts from OLS; redescending ρ (Tukey, Hampel) from the S-estimate unless `start` says otherwise.
 *
 * @example
 * fitMEstimator(X, y, huberNorm()).coefficients; // intercept first when X has a column of 1s first
 */
export function fitMEstimator(
  X: readonly (readonly number[])[],
  y: readonly number[],
  norm: RobustNorm,
  opts: MEstimatorOptions = {},
): MEstimate {
  const design = createDesign(X);
  return mEstimateOnDesign(design, validateResponse(design, y), norm, opts);
}

/** Options of a robust line fit. */
export interface RobustLineOptions extends Omit<MEstimatorOptions, 'fixedScale'> {
  /** huber: [t]; tukey: [c]; hampel: [a, b, c]. */
  tuning?: number[];
}

/**
 * Copies an MEstimate of a line (coefficients intercept, slope) into a LineFit.
 *
 * @example
 * lineFitFromMEstimate('huber', x.length, mEstimateOnDesign(createLineDesign(x), new Float64Array(y), huberNorm()));
 */
export function lineFitFromMEstimate(method: LineFit['method'], n: number, m: MEstimate): LineFit {
  const [[caa, cab], [, cbb]] = m.covariance;
  return {
    method,
    n,
    intercept: m.coefficients[0],
    slope: m.coefficients[1],
    interceptCI: m.ci[0],
    slopeCI: m.ci[1],
    confidence: m.confidence,
    covariance: [
      [caa, cab],
      [cab, cbb],
    ],
    df: m.df,
    scale: m.scale,
    iterations: m.iterations,
    converged: m.converged,
    start: m.start,
    weights: m.weights,
    hat: m.hat,
  };
}

/**
 * Robust line y = a + b·x by an M-estimator (Huber t = 1.345, Tukey bisquare c = 4.685, Hampel 2, 4, 8 by default),
 * with the conventions of fitMEstimator.
 *
 * @example
 * fitRobustLine([1, 2, 3, 4, 5], [1.0, 2.1, 2.9, 4.2, 12], 'huber').slope; // far below the OLS slope of 2.44
 */
export function fitRobustLine(
  x: readonly number[],
  y: readonly number[],
  method: MNormKey,
  opts: RobustLineOptions = {},
): LineFit {
  validatePairs(x, y);
  const norm = normByKey(method, opts.tuning);
  const estimate = mEstimateOnDesign(createLineDesign(x), new Float64Array(y), norm, opts);
  return lineFitFromMEstimate(method, x.length, estimate);
}
