import { relativeChange } from './acceleration';
import { tQuantile } from './distributions';
import { StatsInputError } from './errors';
import { createDesign, createLineDesign, MStepWork, toArray, type LinearDesign, type MFinal } from './linear';
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
   * Newton updates once the steps are small (default true; see irlsOnDesign): the same fixed point in fewer
   * iterations. false reproduces plain IRLS iterate by iterate.
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
}

/**
 * Huber's sandwich covariance of an M-estimate, the "H1" form of statsmodels RLM
 * (Huber, Robust Statistics 1981, §7.6): with u = r/s, m = mean ψ′(u) and K = 1 + (p/n)·Var ψ′(u)/m²,
 * Cov(β̂) = K² · [Σψ(u)²/(n − p)] · s² / m² · (X'X)⁻¹, from the sums of LinearDesign.mFinal.
 *
 * @example
 * const design = createLineDesign(x);
 * sandwichCovariance(design, design.mFinal(y, beta, huberNorm(), scale), scale, huberNorm());
 */
export function sandwichCovariance(design: LinearDesign, final: MFinal, scale: number, norm: RobustNorm): number[][] {
  const { n, p } = design;
  const meanDeriv = final.sumPsiDeriv / n;
  if (!(meanDeriv > 0)) {
    throw new StatsInputError(
      `the sandwich covariance is undefined: the mean of ψ′ over the standardized residuals is ${meanDeriv} (too few samples inside the ${norm.name} tuning range)`,
      { field: 'y' },
    );
  }
  const varDeriv = final.sumPsiDerivSquared / n - meanDeriv * meanDeriv;
  const k = 1 + (p / n) * (varDeriv / (meanDeriv * meanDeriv));
  const factor = (k * k * (final.sumPsiSquared / (n - p)) * scale * scale) / (meanDeriv * meanDeriv);
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

/** Where IRLS stopped. */
export interface IrlsResult {
  /** The IRLS update of the last point evaluated: the fit of the last weighted least-squares step. */
  beta: Float64Array;
  /** The scale of the last step (the MAD of the residuals it started from, or the fixed scale). */
  scale: number;
  iterations: number;
  converged: boolean;
}

/** Options of irlsOnDesign; work space may be lent so that repeated fits (bootstrap resamples) allocate nothing. */
export interface IrlsOptions {
  fixedScale?: number;
  /** A scale near the first MAD, which only speeds its median up (the result is the same). */
  scaleHint?: number;
  tolerance: number;
  maxIterations: number;
  /** Newton updates once the steps are small (default true); false gives plain IRLS, iterate by iterate. */
  accelerate?: boolean;
  buffers?: MStepWork;
}

/**
 * Relative IRLS step ‖Δβ‖/‖β‖ at or below which irlsOnDesign tries Newton updates. Far from the solution only plain
 * steps are taken, so that a long Newton step cannot carry a fit from the basin its start lies in to another solution
 * (redescending ρ, or the MAD re-estimated every iteration, can have several); near it both lead to the same point.
 * With the other safeguards of irlsOnDesign, 3e-2 kept every fit of the tests on plain IRLS's solution; 1e-1 did not.
 */
export const NEWTON_BELOW = 3e-2;

/**
 * The IRLS iteration (Holland & Welsch, Commun Stat 1977): from β, residuals r = y − Xβ, the scale
 * s = median(|r|)/0.6745 unless fixed, weights w(r/s), weighted least squares; until ‖Δβ‖/‖β‖ ≤ tolerance or
 * maxIterations steps, reporting the last weighted least-squares fit and its scale (as MASS::rlm). Shared by every
 * M-estimate and by the bootstrap refits.
 * Once a step is at most NEWTON_BELOW, the next β is the Newton update of the same estimating equations
 * Σψ(rᵢ/s)xᵢ = 0, s = MAD(r(β)) (LinearDesign.mStep; Dennis & Schnabel, Numerical Methods for Unconstrained
 * Optimization, 1983, ch. 5), which converges quadratically instead of linearly; mStep offers it only where plain
 * IRLS contracts. A Newton step more than NEWTON_STRETCH times the plain one is not taken, and a Newton point whose own
 * IRLS step is not at most NEWTON_GAIN times the last one (or cannot be taken) is dropped for the plain update, after
 * which Newton waits until the plain steps are ten times shorter. The stopping rule is always measured on a plain IRLS
 * step, so the result is a fixed point of plain IRLS (in the tests, always the one plain IRLS reaches from the same start).
 *
 * @example
 * irlsOnDesign(createLineDesign(x), new Float64Array(y), huberNorm(), Float64Array.of(0, 1), { tolerance: 1e-10, maxIterations: 200 }).beta;
 */
export function irlsOnDesign(design: LinearDesign, y: Float64Array, norm: RobustNorm, start: Float64Array, options: IrlsOptions): IrlsResult {
  const { tolerance, maxIterations } = options;
  const { n, p } = design;
  const work = options.buffers ?? new MStepWork(n);
  work.forget(); // lent work space may hold another fit's band
  const scale = { fixed: options.fixedScale, previous: options.scaleHint ?? 0 };
  const irls = new Float64Array(p);
  const newton = new Float64Array(p);
  const accelerate = options.accelerate ?? true;
  let newtonBelow = accelerate ? NEWTON_BELOW : 0;
  /** The relative IRLS step from β; the updates are left in `irls` and `newton`, the scale in scale.previous. */
  const evaluate = (beta: Float64Array) => {
    scale.previous = design.mStep(y, beta, norm, scale, work, irls, accelerate ? newton : null);
    return relativeChange(beta, irls);
  };
  // three points in turn: where the last step was evaluated, its plain update, and the point evaluated next
  let beta = Float64Array.from(start);
  let plain = new Float64Array(p);
  let candidate = new Float64Array(p);
  let size = evaluate(beta);
  let iterations = 1;
  while (size > tolerance && iterations < maxIterations) {
    const tryNewton = size <= newtonBelow && newtonStepWithin(beta, newton, NEWTON_STRETCH * size);
    plain.set(irls);
    candidate.set(tryNewton ? newton : irls);
    const candidateSize = tryNewton ? sizeOrInfinity(evaluate, candidate) : evaluate(candidate);
    iterations++;
    if (tryNewton && candidateSize > NEWTON_GAIN * size && iterations < maxIterations) {
      // not in Newton's region yet: the plain update instead, and no Newton again until the steps are 10× shorter
      newtonBelow = size / 10;
      [beta, plain] = [plain, beta];
      size = evaluate(beta);
      iterations++;
    } else {
      [beta, candidate] = [candidate, beta];
      size = candidateSize;
    }
  }
  return { beta: irls.slice(), scale: scale.previous, iterations, converged: size <= tolerance };
}

/**
 * How much longer than the plain step a Newton step may be: near a solution the two differ by the plain iteration's
 * rate of convergence, so a far longer Newton step means the linearisation does not hold there.
 */
const NEWTON_STRETCH = 10;

/**
 * How much shorter than the last plain step the plain step from a Newton point must be for the point to be kept: in its
 * region Newton gains far more than that, so a smaller gain means it is heading elsewhere.
 */
const NEWTON_GAIN = 0.5;

/** Whether the Newton update is finite and its relative change from β is at most `limit`. */
function newtonStepWithin(beta: Float64Array, newton: Float64Array, limit: number): boolean {
  for (let j = 0; j < newton.length; j++) if (!Number.isFinite(newton[j])) return false;
  return relativeChange(beta, newton) <= limit;
}

/** The IRLS step from a Newton point, or Infinity when none can be taken there (e.g. every weight on one x). */
function sizeOrInfinity(evaluate: (at: Float64Array) => number, at: Float64Array): number {
  try {
    return evaluate(at);
  } catch (error) {
    if (error instanceof StatsInputError) return Infinity;
    throw error;
  }
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
  const { beta, scale, iterations, converged } = irlsOnDesign(design, y, norm, start.beta, { fixedScale, tolerance, maxIterations, accelerate });
  const final = design.mFinal(y, beta, norm, scale);
  const covariance = sandwichCovariance(design, final, scale, norm);
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
    weights: final.weights,
    hat: final.hat,
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
