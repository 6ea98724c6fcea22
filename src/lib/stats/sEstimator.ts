import { iterateToFixedPoint, relativeChange } from './acceleration';
import { StatsInputError } from './errors';
import { createDesign, MAD_CONSTANT, madScale, medianAbs, toArray, type LinearDesign } from './linear';
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

/**
 * Σρ(rᵢ/s) over the residuals for the bisquare ρ normalised to sup ρ = 1, ρ(u) = 1 − (1 − (u/c)²)³ for |u| ≤ c and
 * 1 beyond, given the cutoff c·s (Rousseeuw & Yohai 1984). A cutoff of Infinity gives 0.
 */
function sumRho(residuals: Float64Array, cutoff: number): number {
  const k = 1 / cutoff;
  let sum = 0;
  for (let i = 0; i < residuals.length; i++) {
    const u = residuals[i] * k;
    const t = 1 - u * u;
    const v = 0.5 * (t + Math.abs(t)); // max(1 − u², 0) without a branch: these comparisons are unpredictable
    sum += v * v * v;
  }
  return residuals.length - sum;
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
      const t = 1 - z;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − u², 0), as in sumRho
      const vv = v * v;
      sum += vv * v;
      slope += 6 * z * vv;
    }
    const excess = (n - sum) / df - b;
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

/**
 * The passes over the data that fast-S repeats for every subsample, for one design and response. Cutoffs are c·s:
 * residuals beyond them get bisquare weight 0 and ρ = 1.
 */
interface SearchKernel {
  readonly n: number;
  readonly p: number;
  /** Writes into `beta` the fit passing exactly through the p rows `rows`; false when those rows are singular. */
  exactFit(rows: readonly number[], beta: Float64Array): boolean;
  /** Writes yᵢ − xᵢ'β into `residuals` (β: the first p entries of `beta`). */
  residuals(beta: Float64Array, residuals: Float64Array): void;
  /** Writes the residuals at β into `residuals` and returns their Σρ(rᵢ/s) (see sumRho), in one pass. */
  residualsAndRho(beta: Float64Array, cutoff: number, residuals: Float64Array): number;
  /**
   * One weighted least squares fit with the bisquare weights (1 − (rᵢ/cutoff)²)² (0 beyond the cutoff) of `residuals`,
   * the residuals at β, written into the first p entries of `out` (which may be `beta`); false when the rows with
   * weight are singular.
   */
  bisquareFit(beta: Float64Array, residuals: Float64Array, cutoff: number, out: Float64Array): boolean;
  /**
   * bisquareFit of the residuals at β, computed on the way, and their Σρ(rᵢ/s) (see sumRho): one pass over the data
   * with no residuals stored; NaN when the rows with weight are singular.
   */
  bisquareFitAndRho(beta: Float64Array, cutoff: number, out: Float64Array): number;
  /** The kernel of the given rows only, in that order. */
  select(rows: ArrayLike<number>): SearchKernel;
  /** Every MAD_GUESS_STRIDE-th row in an order that spreads them over the design (see guessedMadScale). */
  guessRows(): Int32Array;
}

/**
 * The kernel of the line y = a + b·x in closed form, each operation one pass over the data: the weighted fit regresses
 * the residuals on x (Δb = Σw(x − x̄)(r − r̄)/Σw(x − x̄)², Δa = r̄ − Δb·x̄ with weighted means; any regression text), with
 * sums about the mean of x, and adds (Δa, Δb) to β, so the sums hold residuals, not the far larger y.
 */
class LineKernel implements SearchKernel {
  readonly n: number;
  readonly p = 2;
  private readonly shiftX: number;

  constructor(
    private readonly x: Float64Array,
    private readonly y: Float64Array,
  ) {
    this.n = x.length;
    let sum = 0;
    for (let i = 0; i < this.n; i++) sum += x[i];
    this.shiftX = sum / this.n;
  }

  exactFit(rows: readonly number[], beta: Float64Array): boolean {
    const { x, y } = this;
    const i = rows[0];
    const j = rows[1];
    const dx = x[j] - x[i];
    if (dx === 0) return false;
    const slope = (y[j] - y[i]) / dx;
    beta[0] = y[i] - slope * x[i];
    beta[1] = slope;
    return true;
  }

  residuals(beta: Float64Array, residuals: Float64Array): void {
    const { x, y, n } = this;
    const a = beta[0];
    const b = beta[1];
    for (let i = 0; i < n; i++) residuals[i] = y[i] - a - b * x[i];
  }

  residualsAndRho(beta: Float64Array, cutoff: number, residuals: Float64Array): number {
    const { x, y, n } = this;
    const a = beta[0];
    const b = beta[1];
    const k = 1 / cutoff;
    let sum = 0;
    for (let i = 0; i < n; i++) {
      const r = y[i] - a - b * x[i];
      residuals[i] = r;
      const u = r * k;
      const t = 1 - u * u;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − u², 0) without a branch: these comparisons are unpredictable
      sum += v * v * v;
    }
    return n - sum;
  }

  bisquareFit(beta: Float64Array, residuals: Float64Array, cutoff: number, out: Float64Array): boolean {
    const { x, n, shiftX } = this;
    const k = 1 / cutoff;
    let sumW = 0;
    let sumX = 0;
    let sumR = 0;
    let sumXX = 0;
    let sumXR = 0;
    for (let i = 0; i < n; i++) {
      const r = residuals[i];
      const u = r * k;
      const t = 1 - u * u;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − u², 0) without a branch: these comparisons are unpredictable
      const w = v * v;
      const dx = x[i] - shiftX;
      const wdx = w * dx;
      sumW += w;
      sumX += wdx;
      sumR += w * r;
      sumXX += wdx * dx;
      sumXR += wdx * r;
    }
    return this.addWeightedFit(beta, sumW, sumX, sumR, sumXX, sumXR, out);
  }

  bisquareFitAndRho(beta: Float64Array, cutoff: number, out: Float64Array): number {
    const { x, y, n, shiftX } = this;
    const a = beta[0];
    const b = beta[1];
    const k = 1 / cutoff;
    let sumW = 0;
    let sumX = 0;
    let sumR = 0;
    let sumXX = 0;
    let sumXR = 0;
    let sumCube = 0; // Σ max(1 − u², 0)³ = Σ(1 − ρ)
    for (let i = 0; i < n; i++) {
      const r = y[i] - a - b * x[i];
      const u = r * k;
      const t = 1 - u * u;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − u², 0) without a branch: these comparisons are unpredictable
      const w = v * v;
      sumCube += w * v;
      const dx = x[i] - shiftX;
      const wdx = w * dx;
      sumW += w;
      sumX += wdx;
      sumR += w * r;
      sumXX += wdx * dx;
      sumXR += wdx * r;
    }
    return this.addWeightedFit(beta, sumW, sumX, sumR, sumXX, sumXR, out) ? n - sumCube : Number.NaN;
  }

  /** β + the weighted fit of the residuals on x from its sums (x about shiftX) into `out`; false when singular. */
  private addWeightedFit(
    beta: Float64Array,
    sumW: number,
    sumX: number,
    sumR: number,
    sumXX: number,
    sumXR: number,
    out: Float64Array,
  ): boolean {
    const sxx = sumXX - (sumX * sumX) / sumW;
    if (!(sumW > 0) || !(sxx > 1e-14 * sumXX)) return false;
    const slopeChange = (sumXR - (sumX * sumR) / sumW) / sxx;
    const intercept = beta[0] + sumR / sumW - slopeChange * (this.shiftX + sumX / sumW);
    out[1] = beta[1] + slopeChange;
    out[0] = intercept;
    return true;
  }

  select(rows: ArrayLike<number>): SearchKernel {
    const x = new Float64Array(rows.length);
    const y = new Float64Array(rows.length);
    for (let k = 0; k < rows.length; k++) {
      x[k] = this.x[rows[k]];
      y[k] = this.y[rows[k]];
    }
    return new LineKernel(x, y);
  }

  guessRows(): Int32Array {
    const { x, n } = this;
    const byX = new Int32Array(n);
    for (let i = 0; i < n; i++) byX[i] = i;
    byX.sort((i, j) => x[i] - x[j]);
    const rows = new Int32Array(Math.ceil(n / MAD_GUESS_STRIDE));
    for (let k = 0; k < rows.length; k++) rows[k] = byX[k * MAD_GUESS_STRIDE];
    return rows;
  }
}

/** The kernel of any other design, through the design's own residuals and weighted least squares (QR). */
class DesignKernel implements SearchKernel {
  readonly n: number;
  readonly p: number;
  private readonly weights: Float64Array;
  private readonly work: Float64Array;

  constructor(
    private readonly design: LinearDesign,
    private readonly y: Float64Array,
  ) {
    this.n = design.n;
    this.p = design.p;
    this.weights = new Float64Array(this.n);
    this.work = new Float64Array(this.n);
  }

  exactFit(rows: readonly number[], beta: Float64Array): boolean {
    const fit = this.design.solveExact(rows, this.y);
    if (fit) beta.set(fit);
    return fit !== null;
  }

  residuals(beta: Float64Array, residuals: Float64Array): void {
    this.design.residuals(this.y, beta.subarray(0, this.p), residuals);
  }

  residualsAndRho(beta: Float64Array, cutoff: number, residuals: Float64Array): number {
    this.residuals(beta, residuals);
    return sumRho(residuals, cutoff);
  }

  bisquareFit(beta: Float64Array, residuals: Float64Array, cutoff: number, out: Float64Array): boolean {
    const { weights } = this;
    const k = 1 / cutoff;
    for (let i = 0; i < this.n; i++) {
      const u = residuals[i] * k;
      const t = 1 - u * u;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − u², 0), as in sumRho
      weights[i] = v * v;
    }
    try {
      // as the line does: regress the residuals, and add that fit to β
      const change = this.design.solveWeighted(residuals, weights);
      for (let j = 0; j < this.p; j++) out[j] = beta[j] + change[j];
      return true;
    } catch (error) {
      if (error instanceof StatsInputError) return false;
      throw error;
    }
  }

  bisquareFitAndRho(beta: Float64Array, cutoff: number, out: Float64Array): number {
    const { work } = this;
    this.residuals(beta, work);
    return this.bisquareFit(beta, work, cutoff, out) ? sumRho(work, cutoff) : Number.NaN;
  }

  select(rows: ArrayLike<number>): SearchKernel {
    return new DesignKernel(this.design.select(rows), Float64Array.from(rows, (i) => this.y[i]));
  }

  guessRows(): Int32Array {
    const rows = new Int32Array(Math.ceil(this.n / MAD_GUESS_STRIDE));
    for (let k = 0; k < rows.length; k++) rows[k] = k * MAD_GUESS_STRIDE;
    return rows;
  }
}

/** The closed-form line kernel when X is [1, x], whatever design holds it; the design's own operations otherwise. */
function searchKernel(design: LinearDesign, y: Float64Array): SearchKernel {
  if (design.p === 2) {
    const first = design.column(0);
    let intercept = true;
    for (let i = 0; i < first.length; i++) if (first[i] !== 1) intercept = false;
    if (intercept) return new LineKernel(design.column(1), y);
  }
  return new DesignKernel(design, y);
}

/** Every how many rows one enters the sample whose residuals guess the MAD of all (see guessedMadScale). */
const MAD_GUESS_STRIDE = 4;

/**
 * The MAD scale of the residuals, found through a guess: the median of |r| over the rows `guessRows` lets madScale
 * select among the values within ±10 % of it only, and where the median lies outside that band madScale selects among
 * all values, so the result is the MAD either way. A line's residuals vary with x, so rows spread over x guess well:
 * on the bench data the guess lands in the band for 75–90 % of the subsamples.
 */
function guessedMadScale(residuals: Float64Array, guessRows: Int32Array, sample: Float64Array, scratch: Float64Array): number {
  for (let k = 0; k < guessRows.length; k++) sample[k] = residuals[guessRows[k]];
  return madScale(residuals, scratch, medianAbs(sample, scratch) / MAD_CONSTANT);
}

interface Candidate {
  beta: Float64Array;
  scale: number;
}

interface Refined extends Candidate {
  iterations: number;
  converged: boolean;
  residuals: Float64Array;
}

/** Fills `rows` with distinct row indices below n, drawn in turn (a repeat is drawn again). */
function drawRows(n: number, rows: number[], rng: SeededRandom): void {
  for (let k = 0; k < rows.length; ) {
    const i = rng.int(n);
    let repeat = false;
    for (let j = 0; j < k; j++) if (rows[j] === i) repeat = true;
    if (!repeat) rows[k++] = i;
  }
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
 * smallest M-scales kept, in increasing order of scale. An I-step is a weighted least squares fit with bisquare
 * weights at the current scale s, then the scale step s ← s·√(Σρ(r/s)/((n − p)b)).
 */
function searchCandidates(kernel: SearchKernel, settings: Settings, rng: SeededRandom): Candidate[] {
  const { subsamples, refinementSteps, bestCandidates, c, b } = settings;
  const { n, p } = kernel;
  const bound = (n - p) * b; // Σρ(r/s) at the M-scale s
  const residuals = new Float64Array(n);
  const scratch = new Float64Array(n);
  const guessRows = kernel.guessRows();
  const sample = new Float64Array(guessRows.length);
  const rows = new Array<number>(p).fill(0);
  const beta = new Float64Array(p);
  const keptScales = new Float64Array(bestCandidates); // increasing
  const keptBetas = new Float64Array(bestCandidates * p);
  let kept = 0;
  let accepted = 0;
  const maxDraws = subsamples * 50;
  subsample: for (let draws = 0; accepted < subsamples && draws < maxDraws; draws++) {
    drawRows(n, rows, rng);
    if (!kernel.exactFit(rows, beta)) continue; // singular subsample (e.g. two equal x): draw again
    accepted++;
    kernel.residuals(beta, residuals);
    let scale = guessedMadScale(residuals, guessRows, sample, scratch);
    // Σρ(r/s) decreases in s: if it is ≥ (n − p)b at the worst kept scale, this candidate's M-scale is not smaller
    const worst = kept === bestCandidates ? keptScales[kept - 1] : Infinity;
    let rhoAtWorst = refinementSteps === 0 ? sumRho(residuals, c * worst) : 0;
    for (let step = 1; step <= refinementSteps; step++) {
      // the rows with weight are singular (e.g. all at one x): this candidate cannot be refined
      if (!kernel.bisquareFit(beta, residuals, c * scale, beta)) continue subsample;
      // the last step's scale would only start the M-scale below, so its pass checks the worst kept scale instead
      if (step === refinementSteps) rhoAtWorst = kernel.residualsAndRho(beta, c * worst, residuals);
      else scale *= Math.sqrt(kernel.residualsAndRho(beta, c * scale, residuals) / bound);
    }
    if (rhoAtWorst >= bound) continue;
    const candidateScale = mScale(residuals, p, c, b, scale);
    if (kept === bestCandidates && !(candidateScale < worst)) continue;
    if (kept < bestCandidates) kept++;
    let at = kept - 1;
    for (; at > 0 && keptScales[at - 1] > candidateScale; at--) {
      keptScales[at] = keptScales[at - 1];
      keptBetas.copyWithin(at * p, (at - 1) * p, at * p);
    }
    keptScales[at] = candidateScale;
    keptBetas.set(beta, at * p);
  }
  if (kept === 0) {
    throw new StatsInputError('no non-singular subsample of the data was found: the columns of X look collinear', {
      field: 'X',
    });
  }
  return Array.from({ length: kept }, (_, k) => ({ beta: keptBetas.slice(k * p, (k + 1) * p), scale: keptScales[k] }));
}

/**
 * I-steps from `start` until the relative change in the coefficients is ≤ tolerance; then the exact M-scale.
 * The state iterated is (β, s), accelerated near convergence like IRLS (acceleration.ts), to the same fixed point.
 * Here an I-step takes the weighted fit and the scale step from the same residuals r(β), one pass over the data
 * instead of two: its fixed points are the I-step's (β the bisquare fit at its own residuals and scale, and
 * Σρ(r/s) = (n − p)b), so the S-estimate reached is the same, in no more steps, as the coefficients, not the scale,
 * are what converges slowly. The search keeps the I-step as published, whose two steps pick the candidates.
 */
function refineFully(kernel: SearchKernel, start: Candidate, settings: Settings): Refined {
  const { c, b, maxIterations, tolerance } = settings;
  const { n, p } = kernel;
  const bound = (n - p) * b;
  const step = (state: Float64Array): Float64Array => {
    const scale = state[p];
    const next = new Float64Array(p + 1);
    const rho = kernel.bisquareFitAndRho(state, c * scale, next);
    if (Number.isNaN(rho)) {
      throw new StatsInputError('the S-estimate cannot be refined: the samples with non-zero weight do not determine a fit', {
        field: 'X',
      });
    }
    next[p] = scale * Math.sqrt(rho / bound);
    return next;
  };
  // the rule looks at the coefficients only, not at the scale carried as the state's last entry
  const coefficientChange = (from: Float64Array, to: Float64Array) => relativeChange(from, to, p);
  const initial = new Float64Array(p + 1);
  initial.set(start.beta);
  initial[p] = start.scale;
  const result = iterateToFixedPoint(step, coefficientChange, initial, tolerance, maxIterations);
  const residuals = new Float64Array(n);
  kernel.residuals(result.beta, residuals);
  return {
    beta: result.beta.slice(0, p),
    scale: mScale(residuals, p, c, b, result.beta[p]),
    iterations: result.iterations,
    converged: result.converged,
    residuals,
  };
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
  const kernel = searchKernel(design, y);
  const searchAndRefine = (on: SearchKernel) =>
    smallestScale(searchCandidates(on, settings, rng).map((candidate) => refineFully(on, candidate, settings)));
  let result: Refined;
  if (n > searchSubsetSize) {
    // large n: search and refine on a random subset, then refine the winner on all the data
    const onSubset = searchAndRefine(kernel.select(sampleWithoutReplacement(n, searchSubsetSize, rng)));
    const residuals = new Float64Array(n);
    kernel.residuals(onSubset.beta, residuals);
    // the M-scale equation has one root, so the subset's scale, close to it, is as good a start as any and cheaper
    const scale = mScale(residuals, p, c, b, onSubset.scale);
    result = refineFully(kernel, { beta: onSubset.beta, scale }, settings);
  } else {
    result = searchAndRefine(kernel);
  }
  return {
    coefficients: toArray(result.beta),
    scale: result.scale,
    iterations: result.iterations,
    converged: result.converged,
    residuals: toArray(result.residuals),
  };
}

/** k distinct indices from 0..n−1 in increasing order (partial Fisher–Yates shuffle). */
function sampleWithoutReplacement(n: number, k: number, rng: SeededRandom): Int32Array {
  const pool = new Int32Array(n);
  for (let i = 0; i < n; i++) pool[i] = i;
  for (let i = 0; i < k; i++) {
    const j = i + rng.int(n - i);
    const t = pool[i];
    pool[i] = pool[j];
    pool[j] = t;
  }
  return pool.slice(0, k).sort();
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
