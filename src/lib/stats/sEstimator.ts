import { iterateToFixedPoint, relativeChange } from './acceleration';
import { StatsInputError } from './errors';
import { createDesign, madScale, toArray, type LinearDesign } from './linear';
import { validateResponse } from './ols';
import { seededRandom, type SeededRandom } from './random';
import { validatePositive } from './validate';

/** Options of the fast-S algorithm. */
export interface SEstimatorOptions {
  seed?: number;
  /** Random elemental subsamples of p rows drawn. */
  subsamples?: number;
  /** Refinement (I-)steps applied to each subsample's fit before it is ranked. */
  refinementSteps?: number;
  /** Candidates kept after ranking and then refined to convergence. */
  bestCandidates?: number;
  /** Tuning constant c of the bisquare ρ; 1.548 with b = 0.5 gives a 50 % breakdown point. */
  c?: number;
  /** Right-hand side b of the M-scale equation Σρ(r/s)/(n − p) = b. */
  b?: number;
  maxIterations?: number;
  /**
   * Relative change in the coefficients at which the full refinement stops (1e-7, robustbase's refine.tol):
   * the scale is stationary at the optimum, so its error is of the order of the square of this.
   */
  tolerance?: number;
  /**
   * Above this many samples the subsampling stage runs on a seeded random subset of this size, and only the
   * winner there is refined on all the data.
   */
  searchSubsetSize?: number;
}

/** An S-estimate: the coefficients minimising the M-scale of the residuals, and that scale. */
export interface SEstimate {
  coefficients: number[];
  scale: number;
  /** I-steps of the full refinement of the chosen candidate. */
  iterations: number;
  converged: boolean;
  residuals: number[];
}

/** Σρ(rᵢ/s)/(n − p) for the bisquare ρ normalised to sup ρ = 1, ρ(u) = 1 − (1 − (u/c)²)³ for |u| ≤ c, 1 beyond. */
function meanRho(residuals: Float64Array, scale: number, c: number, df: number): number {
  const k = 1 / (scale * c);
  let sum = 0;
  for (let i = 0; i < residuals.length; i++) {
    const u = residuals[i] * k;
    const z = u * u;
    if (z >= 1) sum += 1;
    else {
      const v = 1 - z;
      sum += 1 - v * v * v;
    }
  }
  return sum / df;
}

/**
 * M-scale of the residuals of a fit with p coefficients: the s solving Σρ(rᵢ/s)/(n − p) = b for the bisquare ρ
 * normalised to sup ρ = 1 (Rousseeuw & Yohai 1984; the n − p denominator is the small-sample form used by
 * R robustbase lmrob.S). Newton's method in t = 1/s, where the left side increases with t, kept inside the
 * bracket found so far and replaced by the fixed-point step s ← s·√(Σρ(r/s)/((n − p)b)) when it would leave it.
 *
 * @example
 * mScale(Float64Array.from([-1, 0.5, 2, -0.3, 1.2]), 2, 1.548, 0.5, 1);
 */
export function mScale(
  residuals: Float64Array,
  p: number,
  c: number,
  b: number,
  initial: number,
  tolerance = 1e-12,
  maxIterations = 200,
): number {
  const n = residuals.length;
  const df = n - p;
  let scale = initial;
  let tooSmall = 0; // largest scale known to give a left side above b
  let tooLarge = Infinity; // smallest scale known to give a left side below b
  for (let it = 0; it < maxIterations; it++) {
    const k = 1 / (scale * c);
    let sum = 0;
    let slope = 0; // d/dt of Σρ(r·t) at t = 1/s, times s
    for (let i = 0; i < n; i++) {
      const u = residuals[i] * k;
      const z = u * u;
      if (z >= 1) sum += 1;
      else {
        const v = 1 - z;
        sum += 1 - v * v * v;
        slope += 6 * z * v * v;
      }
    }
    const excess = sum / df - b;
    if (excess === 0) return scale;
    if (excess > 0) tooSmall = Math.max(tooSmall, scale);
    else tooLarge = Math.min(tooLarge, scale);
    // Newton in t = 1/s: t_new = t − excess/(slope/(df·t)), i.e. s_new = s / (1 − excess·df/slope)
    const shrink = 1 - (excess * df) / slope;
    let next = slope > 0 && shrink > 0 ? scale / shrink : Number.NaN;
    if (!(next > tooSmall && next < tooLarge)) next = scale * Math.sqrt((excess + b) / b);
    const change = Math.abs(next - scale) / scale;
    scale = next;
    if (change <= tolerance) break;
  }
  return scale;
}

/** One I-step of fast-S: weighted least squares with bisquare weights at the current scale, then one scale step. */
function refinementStep(
  design: LinearDesign,
  y: Float64Array,
  residuals: Float64Array,
  weights: Float64Array,
  scale: number,
  c: number,
  b: number,
): { beta: Float64Array; scale: number } {
  const k = 1 / (scale * c);
  for (let i = 0; i < residuals.length; i++) {
    const u = residuals[i] * k;
    const z = u * u;
    weights[i] = z >= 1 ? 0 : (1 - z) * (1 - z);
  }
  const beta = design.solveWeighted(y, weights);
  design.residuals(y, beta, residuals);
  return { beta, scale: scale * Math.sqrt(meanRho(residuals, scale, c, residuals.length - design.p) / b) };
}

interface Candidate {
  beta: Float64Array;
  scale: number;
}

interface Refined extends Candidate {
  iterations: number;
  converged: boolean;
}

/** Draws p distinct row indices. */
function drawRows(n: number, p: number, next: (n: number) => number): number[] {
  const rows: number[] = [];
  while (rows.length < p) {
    const i = next(n);
    if (!rows.includes(i)) rows.push(i);
  }
  return rows;
}

/** Constants of one S-estimation, after validation. */
interface Settings {
  subsamples: number;
  refinementSteps: number;
  bestCandidates: number;
  c: number;
  b: number;
  maxIterations: number;
  tolerance: number;
}

/**
 * The subsampling stage of fast-S: elemental fits, `refinementSteps` I-steps each, and the `bestCandidates`
 * smallest M-scales kept, in increasing order of scale.
 */
function searchCandidates(design: LinearDesign, y: Float64Array, settings: Settings, rng: SeededRandom): Candidate[] {
  const { subsamples, refinementSteps, bestCandidates, c, b } = settings;
  const { n, p } = design;
  const residuals = new Float64Array(n);
  const weights = new Float64Array(n);
  const scratch = new Float64Array(n);
  const best: Candidate[] = [];
  const maxDraws = subsamples * 50;
  let accepted = 0;
  for (let draws = 0; accepted < subsamples && draws < maxDraws; draws++) {
    const elemental = design.solveExact(drawRows(n, p, rng.int), y);
    if (!elemental) continue; // singular subsample (e.g. two equal x): draw again
    accepted++;
    let beta = elemental;
    design.residuals(y, beta, residuals);
    let scale = madScale(residuals, scratch);
    try {
      for (let k = 0; k < refinementSteps; k++) ({ beta, scale } = refinementStep(design, y, residuals, weights, scale, c, b));
    } catch (error) {
      if (error instanceof StatsInputError) continue; // all weight on one x value: this candidate cannot be refined
      throw error;
    }
    // Σρ(r/s) decreases in s: if the equation's left side is ≥ b at the worst kept scale, this scale is not smaller
    const worst = best.length === bestCandidates ? best[best.length - 1].scale : Infinity;
    if (worst < Infinity && meanRho(residuals, worst, c, n - p) >= b) continue;
    const candidate = { beta, scale: mScale(residuals, p, c, b, scale) };
    const at = best.findIndex((kept) => kept.scale > candidate.scale);
    best.splice(at === -1 ? best.length : at, 0, candidate);
    if (best.length > bestCandidates) best.pop();
  }
  if (best.length === 0) {
    throw new StatsInputError('no non-singular subsample of the data was found: the columns of X look collinear', {
      field: 'X',
    });
  }
  return best;
}

/**
 * I-steps from `start` until the relative change in the coefficients is ≤ tolerance; then the exact M-scale.
 * The state iterated is (β, s), accelerated near convergence like IRLS (acceleration.ts), to the same fixed point.
 */
function refineFully(design: LinearDesign, y: Float64Array, start: Candidate, settings: Settings): Refined {
  const { c, b, maxIterations, tolerance } = settings;
  const { n, p } = design;
  const residuals = new Float64Array(n);
  const weights = new Float64Array(n);
  let residualsOf: Float64Array | null = null; // the state whose residuals `residuals` holds
  const step = (state: Float64Array): Float64Array => {
    if (state !== residualsOf) design.residuals(y, state.subarray(0, p), residuals);
    const next = refinementStep(design, y, residuals, weights, state[p], c, b);
    const out = new Float64Array(p + 1);
    out.set(next.beta);
    out[p] = next.scale;
    residualsOf = out;
    return out;
  };
  // the rule looks at the coefficients only, not at the scale carried as the state's last entry
  const coefficientChange = (from: Float64Array, to: Float64Array) => relativeChange(from, to, p);
  const initial = new Float64Array(p + 1);
  initial.set(start.beta);
  initial[p] = start.scale;
  design.residuals(y, start.beta, residuals);
  residualsOf = initial;
  const result = iterateToFixedPoint(step, coefficientChange, initial, tolerance, maxIterations);
  const beta = result.beta.slice(0, p);
  if (result.beta !== residualsOf) design.residuals(y, beta, residuals);
  return { beta, scale: mScale(residuals, p, c, b, result.beta[p]), iterations: result.iterations, converged: result.converged };
}

function smallestScale(fits: Refined[]): Refined {
  return fits.reduce((best, fit) => (fit.scale < best.scale ? fit : best));
}

/**
 * An S-estimate handed in by a caller (one analysis shares one), checked to have the design's p coefficients.
 *
 * @example
 * const s = checkedSEstimate(opts.sEstimate, design.p) ?? sEstimateOnDesign(design, y, { seed });
 */
export function checkedSEstimate(given: SEstimate | undefined, p: number): SEstimate | undefined {
  if (given && given.coefficients.length !== p) {
    throw new StatsInputError(`the S-estimate given has ${given.coefficients.length} coefficients, expected ${p}`, { field: 'sEstimate' });
  }
  return given;
}

/**
 * Fast-S on a prepared design; shared by fitSEstimator, the M-estimator start and MM. Algorithm as fitSEstimator.
 *
 * @example
 * sEstimateOnDesign(createLineDesign(x), new Float64Array(y), { seed: 7 }).scale;
 */
export function sEstimateOnDesign(design: LinearDesign, y: Float64Array, opts: SEstimatorOptions = {}): SEstimate {
  const {
    seed = 1,
    subsamples = 500,
    refinementSteps = 2,
    bestCandidates = 5,
    c = 1.548,
    b = 0.5,
    maxIterations = 200,
    tolerance = 1e-7,
    searchSubsetSize = 500,
  } = opts;
  for (const [field, value] of [
    ['subsamples', subsamples],
    ['bestCandidates', bestCandidates],
    ['maxIterations', maxIterations],
  ] as const) {
    if (!Number.isInteger(value) || value < 1) {
      throw new StatsInputError(`${field} must be a whole number of at least 1 (got ${value})`, { field });
    }
  }
  if (!Number.isInteger(refinementSteps) || refinementSteps < 0) {
    throw new StatsInputError(`refinementSteps must be a whole number of at least 0 (got ${refinementSteps})`, {
      field: 'refinementSteps',
    });
  }
  if (!Number.isInteger(searchSubsetSize) || searchSubsetSize < 10 * design.p) {
    throw new StatsInputError(`searchSubsetSize must be a whole number of at least ${10 * design.p} (got ${searchSubsetSize})`, {
      field: 'searchSubsetSize',
    });
  }
  validatePositive(c, 'c');
  if (!(b > 0 && b < 1)) throw new StatsInputError(`b must be between 0 and 1 (got ${b})`, { field: 'b' });
  const settings: Settings = { subsamples, refinementSteps, bestCandidates, c, b, maxIterations, tolerance };

  const { n, p } = design;
  if (n < 2 * p) {
    throw new StatsInputError(
      `the S-estimate needs at least ${2 * p} samples for ${p} coefficients (got ${n}): with fewer, every fit through ${p} samples leaves half the residuals at 0, so no robust scale exists`,
      { field: 'y' },
    );
  }
  const rng = seededRandom(seed);
  let result: Refined;
  if (n > searchSubsetSize) {
    // large n: search and refine on a random subset, then refine the winner on all the data
    const rows = sampleWithoutReplacement(n, searchSubsetSize, rng);
    const subset = design.select(rows);
    const subsetY = Float64Array.from(rows, (i) => y[i]);
    const onSubset = smallestScale(
      searchCandidates(subset, subsetY, settings, rng).map((candidate) => refineFully(subset, subsetY, candidate, settings)),
    );
    const residuals = new Float64Array(n);
    design.residuals(y, onSubset.beta, residuals);
    const scale = mScale(residuals, p, c, b, madScale(residuals, new Float64Array(n)));
    result = refineFully(design, y, { beta: onSubset.beta, scale }, settings);
  } else {
    result = smallestScale(
      searchCandidates(design, y, settings, rng).map((candidate) => refineFully(design, y, candidate, settings)),
    );
  }
  const residuals = new Float64Array(n);
  design.residuals(y, result.beta, residuals);
  return {
    coefficients: toArray(result.beta),
    scale: result.scale,
    iterations: result.iterations,
    converged: result.converged,
    residuals: toArray(residuals),
  };
}

/** k distinct indices from 0..n−1 in increasing order (partial Fisher–Yates shuffle). */
function sampleWithoutReplacement(n: number, k: number, rng: SeededRandom): number[] {
  const pool = Array.from({ length: n }, (_, i) => i);
  for (let i = 0; i < k; i++) {
    const j = i + rng.int(n - i);
    const t = pool[i];
    pool[i] = pool[j];
    pool[j] = t;
  }
  return pool.slice(0, k).sort((i, j) => i - j);
}

/**
 * S-estimate of regression (Rousseeuw & Yohai 1984) by fast-S (Salibian-Barrera & Yohai, JCGS 2006):
 * seeded random elemental subsamples of p rows, a few I-steps each, the best few kept (ranked by M-scale,
 * skipping a candidate when Σρ(r/s_worst)/(n − p) ≥ b shows it cannot enter), each kept one refined to convergence,
 * and the one with the smallest M-scale returned. Bisquare ρ with c = 1.548, b = 0.5: 50 % breakdown.
 * Above `searchSubsetSize` (500) samples, the subsampling and ranking run on a seeded random subset of that size,
 * as the large-n variant of fast-S does with subgroups, and the best fit there is refined to convergence on all the data.
 * The same seed always gives the same result.
 *
 * @example
 * fitSEstimator([[1, 1], [1, 2], [1, 3], [1, 4], [1, 5]], [1, 2, 3, 4, 40]).coefficients; // ≈ [0, 1]
 */
export function fitSEstimator(
  X: readonly (readonly number[])[],
  y: readonly number[],
  opts: SEstimatorOptions = {},
): SEstimate {
  const design = createDesign(X);
  return sEstimateOnDesign(design, validateResponse(design, y), opts);
}
