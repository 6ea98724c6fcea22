import { bootstrapIntervals, type BootstrapMethod } from './bootstrap';
import { StatsInputError } from './errors';
import { madScale } from './linear';
import { normByKey, tukeyBisquareNorm, type MNormKey, type RobustNorm } from './norms';
import { meanResponseInterval } from './ols';
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
  const bias = fit.intercept + (fit.slope - 1) * level;
  const result: BiasAtLevel = { level, bias, percentBias: (100 * bias) / level };
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

/** Refits a line to resampled data, writing nothing the caller keeps; returns [intercept, slope]. */
export type LineRefit = (x: Float64Array, y: Float64Array) => [number, number];

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

/** Relative coefficient change at which a bootstrap refit stops: far below the bootstrap's own spread. */
const REFIT_TOLERANCE = 1e-7;
const REFIT_MAX_ITERATIONS = 200;

/**
 * Warm-started refit for the bootstrap of a robust fit, by the same IRLS as the full fit (u = r/s, weights w(u),
 * weighted least squares, relative change ‖Δβ‖/‖β‖) but returning only the coefficients, with every buffer
 * allocated once per bootstrap rather than once per resample.
 * - Huber, Tukey, Hampel: MAD scale re-estimated every iteration, started from the full-data estimate instead of
 *   from OLS or a fresh S-estimate per resample.
 * - MM: the full-data S-scale is kept fixed and the bisquare M-step starts from the full-data MM coefficients.
 *   Not re-running the S-step in every resample is an approximation in the spirit of the fast and robust
 *   bootstrap (Salibian-Barrera & Zamar, Ann Stat 2002): each resample's estimate is reached from the full-data
 *   solution instead of being recomputed from scratch, which is far cheaper and stays close while a resample does
 *   not carry many more outliers than the data.
 */
function robustRefit(fit: LineFit, data: readonly number[], tuning: BiasBootstrapOptions['tuning']): LineRefit {
  const n = data.length;
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
    throw new StatsInputError(`the ${fit.method} fit has no robust bootstrap refit`, { field: 'fit.method' });
  }
  const residuals = new Float64Array(n);
  const scratch = new Float64Array(n);
  const centre = data.reduce((sum, v) => sum + v, 0) / n;
  return (x, y) => {
    const size = x.length;
    const r = size === n ? residuals : residuals.subarray(0, size);
    const s = size === n ? scratch : scratch.subarray(0, size);
    // x is centred at the full-data mean so that one-pass weighted sums stay accurate
    let a = fit.intercept + fit.slope * centre;
    let b = fit.slope;
    for (let iteration = 0; iteration < REFIT_MAX_ITERATIONS; iteration++) {
      for (let i = 0; i < size; i++) r[i] = y[i] - a - b * (x[i] - centre);
      const scale = fixedScale ?? madScale(r, s);
      let sumW = 0;
      let sumWX = 0;
      let sumWY = 0;
      let sumWXX = 0;
      let sumWXY = 0;
      for (let i = 0; i < size; i++) {
        const wi = norm.weight(r[i] / scale);
        const xi = x[i] - centre;
        const wx = wi * xi;
        sumW += wi;
        sumWX += wx;
        sumWY += wi * y[i];
        sumWXX += wx * xi;
        sumWXY += wx * y[i];
      }
      const sxx = sumWXX - (sumWX * sumWX) / sumW;
      if (!(sumW > 0) || !(sxx > 1e-12 * sumWXX)) {
        throw new StatsInputError('the weighted line fit is singular: the weighted samples all have the same x value', { field: 'x' });
      }
      const nextB = (sumWXY - (sumWX * sumWY) / sumW) / sxx;
      const nextA = (sumWY - nextB * sumWX) / sumW;
      // the relative change of (intercept, slope) on the original x scale, as in the full fit
      const change = Math.hypot(nextA - nextB * centre - (a - b * centre), nextB - b) / Math.max(1e-20, Math.hypot(a - b * centre, b));
      a = nextA;
      b = nextB;
      if (change <= REFIT_TOLERANCE) break;
    }
    return [a - b * centre, b];
  };
}

/** The refit a bootstrap fit uses. */
function refitFor(fit: LineFit, x: readonly number[], tuning: BiasBootstrapOptions['tuning']): LineRefit {
  return robustRefit(fit, x, tuning);
}

/**
 * Seeded case-resampling bootstrap CIs of the bias B(X_c) = a + (b − 1)·X_c of a Passing–Bablok or robust fit at
 * each level (Efron, JASA 1987; percentile or BCa, default 2,000 resamples, see bootstrapIntervals). One pair of
 * resample buffers is reused; a resample on which the refit fails (e.g. all x equal) is skipped and counted.
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
  const refit = refitFor(fit, x, options.tuning);
  const n = x.length;
  const xs = new Float64Array(n);
  const ys = new Float64Array(n);
  const statistic = (indices: Int32Array) => {
    const size = indices.length;
    const xb = size === n ? xs : xs.subarray(0, size);
    const yb = size === n ? ys : ys.subarray(0, size);
    for (let i = 0; i < size; i++) {
      xb[i] = x[indices[i]];
      yb[i] = y[indices[i]];
    }
    const [a, b] = refit(xb, yb);
    return levels.map((level) => a + (b - 1) * level);
  };
  const result = bootstrapIntervals(n, statistic, {
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
