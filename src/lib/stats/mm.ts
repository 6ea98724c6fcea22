import { createDesign, createLineDesign, type LinearDesign } from './linear';
import { lineFitFromMEstimate, mEstimateOnDesign, type MEstimate } from './mEstimator';
import { tukeyBisquareNorm } from './norms';
import { validateResponse } from './ols';
import { checkedSEstimate, sEstimateOnDesign, type SEstimate, type SEstimatorOptions } from './sEstimator';
import type { LineFit } from './types';
import { validatePairs } from './validate';

/** Options of an MM fit. */
export interface MMOptions {
  seed?: number;
  /** Bisquare constant of the M-step; 4.685 gives 95 % efficiency at the normal. */
  c?: number;
  confidence?: number;
  maxIterations?: number;
  tolerance?: number;
  /** Options passed to the S-estimator (subsamples, its c and b, ...). */
  sEstimator?: Omit<SEstimatorOptions, 'seed'>;
  /** The S-estimate of these same data, when already at hand (several fits of one analysis share one). */
  sEstimate?: SEstimate;
}

/** An MM-estimate: the M-step result plus the S-estimate it started from. */
export interface MMEstimate extends MEstimate {
  sCoefficients: number[];
}

function mmOnDesign(design: LinearDesign, y: Float64Array, opts: MMOptions): MMEstimate {
  const { seed = 1, c = 4.685, confidence = 0.95, maxIterations, tolerance } = opts;
  const norm = tukeyBisquareNorm(c);
  const s = checkedSEstimate(opts.sEstimate, design.p) ?? sEstimateOnDesign(design, y, { ...opts.sEstimator, seed });
  const m = mEstimateOnDesign(design, y, norm, {
    start: s.coefficients,
    startKind: 's-estimate',
    fixedScale: s.scale,
    confidence,
    maxIterations,
    tolerance,
  });
  return { ...m, sCoefficients: s.coefficients };
}

/**
 * MM-estimate (Yohai, Ann Stat 1987): the S-estimate (bisquare ρ, c = 1.548, 50 % breakdown; fast-S, seeded)
 * gives the start and the scale, then IRLS for the bisquare M-estimate with c = 4.685 at that fixed scale.
 * High breakdown from the S-step, 95 % normal efficiency from the M-step; sandwich covariance (statsmodels "H1")
 * at the fixed scale, t intervals with n − p df.
 *
 * @example
 * fitMM([[1, 1], [1, 2], [1, 3], [1, 4], [1, 5], [1, 6]], [1.1, 2, 2.9, 4.1, 5, 30]).coefficients; // slope ≈ 1
 */
export function fitMM(X: readonly (readonly number[])[], y: readonly number[], opts: MMOptions = {}): MMEstimate {
  const design = createDesign(X);
  return mmOnDesign(design, validateResponse(design, y), opts);
}

/**
 * MM line y = a + b·x (method 'mm', start 's-estimate'); see fitMM. Unlike M-estimators it also resists
 * samples that are outlying in x (bad leverage points).
 *
 * @example
 * fitMMLine([1, 2, 3, 4, 5, 6, 30], [1, 2, 3, 4, 5, 6, 2]).slope; // ≈ 1, not pulled towards the point at x = 30
 */
export function fitMMLine(x: readonly number[], y: readonly number[], opts: MMOptions = {}): LineFit {
  validatePairs(x, y);
  return lineFitFromMEstimate('mm', x.length, mmOnDesign(createLineDesign(x), new Float64Array(y), opts));
}
