import { EigenvalueDecomposition, Matrix, QrDecomposition, LuDecomposition, inverse, solve } from 'ml-matrix';
import { StatsInputError } from './errors';
import { LineFinal, LineStep, type LineStepWork, type RobustNorm } from './norms';
import { validateFinite } from './validate';

/**
 * A design matrix X (n rows, p columns) with the few operations the regression estimators need.
 * Two implementations, one algorithm: a closed-form path for the straight line [1, x] (fast, allocation-free
 * inside IRLS loops) and a QR path through ml-matrix for any p.
 */
export interface LinearDesign {
  readonly n: number;
  readonly p: number;
  /** Weighted least squares coefficients minimising Σ wᵢ(yᵢ − xᵢ'β)²; `weights` null means all 1. */
  solveWeighted(y: Float64Array, weights: Float64Array | null): Float64Array;
  /** The coefficients of the fit passing exactly through the p rows `rows`, or null when those rows are singular. */
  solveExact(rows: readonly number[], y: Float64Array): Float64Array | null;
  /** Writes yᵢ − xᵢ'β into `out`. */
  residuals(y: Float64Array, beta: Float64Array, out: Float64Array): void;
  /**
   * One M-step at β, the work of one IRLS iteration (irlsOnDesign): residuals r = y − Xβ, the scale s (their MAD,
   * madScale, looked for near `scale.previous`; or `scale.fixed`), and from one set of weighted sums two updates of β,
   * with W = diag w(rᵢ/s), Ψ′ = diag ψ′(rᵢ/s) and v = Σψ′(rᵢ/s)(rᵢ/s)xᵢ:
   * - into `irls`, the weighted least-squares fit β + (X'WX)⁻¹X'Wr;
   * - into `newton` unless it is null, the Newton update for the estimating equations Σψ(rᵢ/s)xᵢ = 0 with s = MAD(r(β))
   *   taken as a function of β (through the one or two residuals at the median of |r|, ∇s): β + (X'Ψ′X + v∇sᵀ)⁻¹X'Wr,
   *   with ∇s = 0 for a fixed scale; NaN there when that matrix is singular, or when plain IRLS does not contract here
   *   (the spectral radius of its Jacobian I − (X'WX)⁻¹(X'Ψ′X + v∇sᵀ) is 1 or more): a solution that plain IRLS moves
   *   away from is not the one it will reach, so Newton must not go there.
   * Both leave a solution of the equations where it is. Returns s. For the line: two passes over the data.
   */
  mStep(
    y: Float64Array,
    beta: Float64Array,
    norm: RobustNorm,
    scale: { fixed?: number; previous: number },
    work: MStepWork,
    irls: Float64Array,
    newton: Float64Array | null,
  ): number;
  /**
   * What an M-estimate reports per sample at its final β and scale s, with u = r/s: the weights w(u), the hat values of
   * W^½X, and the sums Σψ(u)², Σψ′(u), Σψ′(u)² of its sandwich covariance. For the line: two passes over the data.
   */
  mFinal(y: Float64Array, beta: Float64Array, norm: RobustNorm, scale: number): MFinal;
  /** (X'WX)⁻¹ as a p × p array; `weights` null means all 1. */
  crossProductInverse(weights: Float64Array | null): number[][];
  /** Diagonal of the hat matrix of W^½X: hᵢ = wᵢ xᵢ'(X'WX)⁻¹xᵢ; `weights` null means all 1. A plain array, as results carry it. */
  hatDiagonal(weights: Float64Array | null): number[];
  /** The design made of the given rows only, in that order (repeats allowed, as in a bootstrap resample). */
  select(rows: ArrayLike<number>): LinearDesign;
  /** Column j of X, as a new array. */
  column(j: number): Float64Array;
}

/** LinearDesign.mFinal's result. */
export interface MFinal {
  weights: number[];
  hat: number[];
  sumPsiSquared: number;
  sumPsiDeriv: number;
  sumPsiDerivSquared: number;
}

/**
 * Work space of LinearDesign.mStep, of at least n entries each; lent so that repeated fits allocate nothing. It also
 * keeps the band of residuals the last MAD was found in, so that the next one, a small step away, looks only there:
 * call `forget` before it serves other data.
 *
 * @example
 * const work = new MStepWork(x.length);
 * design.mStep(y, beta, huberNorm(), { previous: 0 }, work, irls, null);
 */
export class MStepWork {
  readonly band: Float64Array;
  /** Positions of the last band's residuals, in order. */
  readonly bandIndex: Int32Array;
  /** Positions of the lower and upper middle |r| of the last MAD (when mStep was asked for a Newton update). */
  readonly middles = new Int32Array(2);
  /** The fit (a, b) the last band was gathered at, its bounds, how many |r| were in it and how many below; count < 0: none. */
  readonly last = { a: 0, b: 0, low: 0, high: 0, count: -1, below: 0 };

  constructor(n: number) {
    this.band = new Float64Array(n);
    this.bandIndex = new Int32Array(n);
  }

  /** Drops the last band (the next data are others). */
  forget(): void {
    this.last.count = -1;
  }

  /** Records the band just gathered at the fit (a, b): its bounds, how many |r| are in it and how many below. */
  keepBand(a: number, b: number, low: number, high: number, count: number, below: number): void {
    const { last } = this;
    last.a = a;
    last.b = b;
    last.low = low;
    last.high = high;
    last.count = count;
    last.below = below;
  }
}

/**
 * The design matrix [1, x] of a straight line, as rows.
 *
 * @example
 * lineDesignMatrix([2, 5]); // [[1, 2], [1, 5]]
 */
export function lineDesignMatrix(x: readonly number[]): number[][] {
  return x.map((xi) => [1, xi]);
}

/**
 * Design for the line y = a + b·x. Weighted simple regression in closed form
 * (b = Σw(x − x̄)(y − ȳ) / Σw(x − x̄)², a = ȳ − b·x̄ with weighted means; any regression text),
 * from one pass of sums about the mean of x.
 *
 * @example
 * const design = createLineDesign([1, 2, 3]);
 * design.solveWeighted(Float64Array.from([2, 4, 6]), null); // Float64Array [0, 2]
 */
export function createLineDesign(x: readonly number[] | Float64Array): LinearDesign {
  return new LineDesign(new Float64Array(x));
}

/** Total weight, weighted mean of x and Σw(x − x̄)². */
interface LineMoments {
  sumW: number;
  meanX: number;
  sxx: number;
}

// A class rather than closures: every line design (one per bootstrap resample, subset or fit) then shares the same
// optimised methods and their type feedback, which IRLS loops over many designs depend on for speed.
class LineDesign implements LinearDesign {
  readonly n: number;
  readonly p = 2;
  /** Sums are taken about the unweighted mean of x (and y[0] for y), which keeps one-pass sums accurate. */
  private readonly shiftX: number;
  /** max |x − shiftX|: how far a change of slope can move a residual, per unit. */
  private readonly spreadX: number;
  private unweighted: LineMoments | undefined;
  /** What mStep hands to the norm's line pass (y is set on each call). */
  private readonly stepWork: LineStepWork;

  constructor(private readonly xs: Float64Array) {
    this.n = xs.length;
    let sum = 0;
    let min = Infinity;
    let max = -Infinity;
    for (let i = 0; i < this.n; i++) {
      const x = xs[i];
      sum += x;
      if (x < min) min = x;
      if (x > max) max = x;
    }
    this.shiftX = sum / this.n;
    this.spreadX = Math.max(max - this.shiftX, this.shiftX - min);
    this.stepWork = { xs, centre: this.shiftX, y: xs, sums: new Float64Array(LineStep.size) };
  }

  solveWeighted(y: Float64Array, weights: Float64Array | null): Float64Array {
    const { xs, shiftX, n } = this;
    const shiftY = y[0];
    let sumW = 0;
    let sumX = 0;
    let sumY = 0;
    let sumXX = 0;
    let sumXY = 0;
    if (weights === null) {
      for (let i = 0; i < n; i++) {
        const dx = xs[i] - shiftX;
        const dy = y[i] - shiftY;
        sumX += dx;
        sumY += dy;
        sumXX += dx * dx;
        sumXY += dx * dy;
      }
      sumW = n;
    } else {
      for (let i = 0; i < n; i++) {
        const w = weights[i];
        const dx = xs[i] - shiftX;
        const wdx = w * dx;
        const dy = y[i] - shiftY;
        sumW += w;
        sumX += wdx;
        sumY += w * dy;
        sumXX += wdx * dx;
        sumXY += wdx * dy;
      }
    }
    const sxx = sumXX - (sumX * sumX) / sumW;
    if (!(sumW > 0) || !(sxx > 1e-14 * sumXX)) singularLine();
    const slope = (sumXY - (sumX * sumY) / sumW) / sxx;
    const meanX = shiftX + sumX / sumW;
    const meanY = shiftY + sumY / sumW;
    return Float64Array.of(meanY - slope * meanX, slope);
  }

  solveExact(rows: readonly number[], y: Float64Array): Float64Array | null {
    const [i, j] = rows;
    const dx = this.xs[j] - this.xs[i];
    if (dx === 0) return null;
    const slope = (y[j] - y[i]) / dx;
    return Float64Array.of(y[i] - slope * this.xs[i], slope);
  }

  residuals(y: Float64Array, beta: Float64Array, out: Float64Array): void {
    const { xs, n } = this;
    const a = beta[0];
    const b = beta[1];
    for (let i = 0; i < n; i++) out[i] = y[i] - a - b * xs[i];
  }

  mStep(
    y: Float64Array,
    beta: Float64Array,
    norm: RobustNorm,
    scale: { fixed?: number; previous: number },
    work: MStepWork,
    irls: Float64Array,
    newton: Float64Array | null,
  ): number {
    const { xs, shiftX } = this;
    const a = beta[0];
    const b = beta[1];
    const s = scale.fixed ?? this.madWithBand(y, a, b, work, scale.previous * MAD_CONSTANT, newton !== null);
    const step = this.stepWork;
    step.y = y;
    norm.lineStep(step, a, b, s);
    const { sums } = step;
    // in the coordinates (intercept at shiftX, slope): X'WX = [[Σw, Σwd], [Σwd, Σwd²]], X'Wr = (Σwr, Σwrd)
    const sumW = sums[LineStep.w];
    const sumWD = sums[LineStep.wd];
    const sumWDD = sums[LineStep.wdd];
    const g0 = sums[LineStep.wr];
    const g1 = sums[LineStep.wrd];
    const sxx = sumWDD - (sumWD * sumWD) / sumW;
    if (!(sumW > 0) || !(sxx > 1e-14 * sumWDD)) singularLine();
    const irlsSlope = (g1 - (sumWD * g0) / sumW) / sxx;
    irls[0] = a + (g0 - sumWD * irlsSlope) / sumW - irlsSlope * shiftX;
    irls[1] = b + irlsSlope;
    if (newton === null) return s;
    // ∇s through the residuals at the median of |r| (madWithBand left their positions): ∂|rₖ|/∂β = −sign(rₖ)·(1, xₖ − shiftX)
    let grad0 = 0;
    let grad1 = 0;
    if (scale.fixed === undefined) {
      for (let middle = 0; middle < 2; middle++) {
        const k = work.middles[middle];
        const sign = Math.sign(y[k] - a - b * xs[k]) / (2 * MAD_CONSTANT);
        grad0 -= sign;
        grad1 -= sign * (xs[k] - shiftX);
      }
    }
    const v0 = sums[LineStep.dpsiR] / s;
    const v1 = sums[LineStep.dpsiRD] / s;
    const m00 = sums[LineStep.dpsi] + v0 * grad0;
    const m01 = sums[LineStep.dpsiD] + v0 * grad1;
    const m10 = sums[LineStep.dpsiD] + v1 * grad0;
    const m11 = sums[LineStep.dpsiDD] + v1 * grad1;
    const det = m00 * m11 - m01 * m10;
    const solvable = Math.abs(det) > 1e-12 * (Math.abs(m00 * m11) + Math.abs(m01 * m10));
    // the plain iteration's Jacobian I − (X'WX)⁻¹M, with (X'WX)⁻¹ = [[Σwd², −Σwd], [−Σwd, Σw]] / (Σw·sxx)
    const q = sumW * sxx;
    const c00 = 1 - (sumWDD * m00 - sumWD * m10) / q;
    const c01 = -(sumWDD * m01 - sumWD * m11) / q;
    const c10 = -(sumW * m10 - sumWD * m00) / q;
    const c11 = 1 - (sumW * m11 - sumWD * m01) / q;
    const newtonSlope = (m00 * g1 - m10 * g0) / det;
    const taken = solvable && spectralRadius2(c00, c01, c10, c11) < 1;
    newton[0] = taken ? a + (m11 * g0 - m01 * g1) / det - newtonSlope * shiftX : Number.NaN;
    newton[1] = taken ? b + newtonSlope : Number.NaN;
    return s;
  }

  /**
   * The MAD scale of the residuals of (a, b). The |r| within ±10 % of `near` (a previous median) are gathered with
   * their positions in one pass and the median selected among them, or among all |r| when it lies outside that band;
   * without `near`, a large sample takes the median of an evenly spaced subsample as its guess, within ±25 %.
   * After a small step from the fit of the last band, no residual has moved by more than δ = |Δa + Δb·c| + |Δb|·
   * max|x − c|, so only the last band's residuals can lie in that band narrowed by δ at both ends, and every other one
   * keeps its side: the median is looked for among them alone when it lies there. With `locate`, leaves the positions of
   * the lower and upper middle value in work.middles.
   */
  private madWithBand(y: Float64Array, a: number, b: number, work: MStepWork, near: number, locate: boolean): number {
    const { xs, n, shiftX } = this;
    const { band, bandIndex, last } = work;
    let found = false;
    if (last.count >= 0) {
      const delta = Math.abs(a - last.a + (b - last.b) * shiftX) + Math.abs(b - last.b) * this.spreadX;
      const low = last.low + delta;
      const high = last.high - delta;
      if (low < high) {
        let m = 0;
        let below = last.below;
        for (let j = 0; j < last.count; j++) {
          const i = bandIndex[j];
          const size = Math.abs(y[i] - a - b * xs[i]);
          if (size < low) below++;
          else if (size <= high) {
            band[m] = size;
            bandIndex[m++] = i; // m ≤ j: the positions still to be read are not overwritten
          }
        }
        found = middleInBand(band, m, below, n);
        work.keepBand(a, b, low, high, m, below);
      }
    }
    if (!found) found = this.gatherNear(y, a, b, work, near);
    if (!found) {
      for (let i = 0; i < n; i++) {
        band[i] = Math.abs(y[i] - a - b * xs[i]);
        bandIndex[i] = i;
      }
      middleOf(band, n, 0, n);
      work.forget();
    }
    const median = (MIDDLES[0] + MIDDLES[1]) / 2;
    if (locate) {
      // the positions of the middle values, for the scale's derivative (the band's positions are in order)
      const count = last.count >= 0 ? last.count : n;
      let lowerAt = -1;
      let upperAt = -1;
      for (let j = 0; j < count && (lowerAt < 0 || upperAt < 0); j++) {
        const i = bandIndex[j];
        const size = Math.abs(y[i] - a - b * xs[i]);
        if (size === MIDDLES[0] && lowerAt < 0) lowerAt = i;
        if (size === MIDDLES[1] && upperAt < 0) upperAt = i;
      }
      work.middles[0] = lowerAt;
      work.middles[1] = upperAt;
    }
    return scaleFromMedian(median);
  }

  /**
   * Gathers the |r| within ±10 % of `near`, or ±25 % of a subsample's median at large n when there is no `near`, and
   * finds their median when it lies in that band (then the band is kept in work.last for the next MAD).
   */
  private gatherNear(y: Float64Array, a: number, b: number, work: MStepWork, near: number): boolean {
    const { xs, n } = this;
    const { band, bandIndex } = work;
    let guess = near;
    let width = MEDIAN_BAND;
    if (!(near > 0) && n >= GUESS_MEDIAN_ABOVE) {
      for (let j = 0; j < GUESS_SAMPLE; j++) {
        const i = Math.floor((j * n) / GUESS_SAMPLE);
        band[j] = Math.abs(y[i] - a - b * xs[i]);
      }
      guess = selectKth(band.subarray(0, GUESS_SAMPLE), GUESS_SAMPLE >> 1);
      width = GUESS_BAND;
    }
    if (!(guess > 0)) return false;
    const low = guess * (1 - width);
    const high = guess * (1 + width);
    gatherBand(y, xs, a, b, low, high, band, bandIndex);
    work.keepBand(a, b, low, high, BAND_COUNTS[0], BAND_COUNTS[1]);
    return middleInBand(band, BAND_COUNTS[0], BAND_COUNTS[1], n);
  }

  mFinal(y: Float64Array, beta: Float64Array, norm: RobustNorm, scale: number): MFinal {
    const { n, shiftX } = this;
    const step = this.stepWork;
    step.y = y;
    const weights = new Array<number>(n);
    norm.lineFinal(step, beta[0], beta[1], scale, weights);
    const { sums } = step;
    // the hat values of W^½X from the weighted moments of the same pass
    const hat = this.hatValues(lineMoments(shiftX, sums[LineFinal.w], sums[LineFinal.wd], sums[LineFinal.wdd]), weights);
    return { weights, hat, sumPsiSquared: sums[LineFinal.psi2], sumPsiDeriv: sums[LineFinal.dpsi], sumPsiDerivSquared: sums[LineFinal.dpsi2] };
  }

  crossProductInverse(weights: Float64Array | null): number[][] {
    const { sumW, meanX, sxx } = this.moments(weights);
    return [
      [1 / sumW + (meanX * meanX) / sxx, -meanX / sxx],
      [-meanX / sxx, 1 / sxx],
    ];
  }

  hatDiagonal(weights: Float64Array | null): number[] {
    return this.hatValues(this.moments(weights), weights);
  }

  /** hᵢ = wᵢ(1/Σw + (xᵢ − x̄)²/Sxx) from the weighted moments of these same weights (null: all 1). */
  private hatValues({ sumW, meanX, sxx }: LineMoments, weights: ArrayLike<number> | null): number[] {
    const { xs, n } = this;
    const hat = new Array<number>(n);
    const inverseSumW = 1 / sumW;
    for (let i = 0; i < n; i++) {
      const d = xs[i] - meanX;
      hat[i] = (weights === null ? 1 : weights[i]) * (inverseSumW + (d * d) / sxx);
    }
    return hat;
  }

  select(rows: ArrayLike<number>): LinearDesign {
    const xs = new Float64Array(rows.length);
    for (let k = 0; k < rows.length; k++) xs[k] = this.xs[rows[k]];
    return new LineDesign(xs);
  }

  column(j: number): Float64Array {
    return j === 0 ? new Float64Array(this.n).fill(1) : this.xs.slice();
  }

  private moments(weights: Float64Array | null): LineMoments {
    if (weights === null) return this.unweighted ?? (this.unweighted = this.weightedMoments(null));
    return this.weightedMoments(weights);
  }

  private weightedMoments(weights: Float64Array | null): LineMoments {
    const { xs, shiftX, n } = this;
    let sumW = 0;
    let sumX = 0;
    let sumXX = 0;
    for (let i = 0; i < n; i++) {
      const w = weights === null ? 1 : weights[i];
      const dx = xs[i] - shiftX;
      sumW += w;
      sumX += w * dx;
      sumXX += w * dx * dx;
    }
    return lineMoments(shiftX, sumW, sumX, sumXX);
  }
}

/** The moments from the weighted sums Σw, Σw·d, Σw·d² of d = x − shift; throws when all weight is on one x. */
function lineMoments(shift: number, sumW: number, sumD: number, sumDD: number): LineMoments {
  const sxx = sumDD - (sumD * sumD) / sumW;
  if (!(sumW > 0) || !(sxx > 1e-14 * sumDD)) singularLine();
  return { sumW, meanX: shift + sumD / sumW, sxx };
}

function singularLine(): never {
  throw new StatsInputError('the weighted line fit is singular: the samples with non-zero weight all have the same x value', {
    field: 'x',
  });
}

/** Relative size below which a pivot of R (QR) or U (LU) counts as zero: the columns are collinear. */
const RANK_TOLERANCE = 1e-10;

/**
 * Design for a general X (n × p, p ≥ 1) through ml-matrix: weighted least squares by QR of W^½X
 * (Golub & Van Loan, Matrix Computations, §5.3). Rows of the shape [1, x] get the closed-form line path.
 *
 * @example
 * const design = createDesign([[1, 0], [1, 1], [1, 2]]);
 * design.p; // 2
 */
export function createDesign(X: readonly (readonly number[])[]): LinearDesign {
  const n = X.length;
  if (n === 0) throw new StatsInputError('the design matrix X has no rows', { field: 'X' });
  const p = X[0].length;
  if (p === 0) throw new StatsInputError('the design matrix X has no columns', { field: 'X' });
  for (let i = 0; i < n; i++) {
    if (X[i].length !== p) {
      throw new StatsInputError(`row ${i} of X has ${X[i].length} columns, expected ${p}`, { field: 'X', index: i });
    }
    validateFinite(X[i] as number[], `X[${i}]`);
  }
  if (p === 2 && X.every((r) => r[0] === 1)) return createLineDesign(X.map((r) => r[1]));

  const rows = X.map((r) => Array.from(r));
  const full = new Matrix(rows);

  function weightedCrossProduct(weights: Float64Array | null): Matrix {
    const xtwx = Matrix.zeros(p, p);
    for (let i = 0; i < n; i++) {
      const w = weights ? weights[i] : 1;
      const r = rows[i];
      for (let j = 0; j < p; j++) {
        for (let k = 0; k <= j; k++) xtwx.set(j, k, xtwx.get(j, k) + w * r[j] * r[k]);
      }
    }
    for (let j = 0; j < p; j++) for (let k = j + 1; k < p; k++) xtwx.set(j, k, xtwx.get(k, j));
    return xtwx;
  }

  function checkRank(diagonal: number[], what: string): void {
    if (!fullRank(diagonal)) throw new StatsInputError(`${what}: the columns of X are linearly dependent`, { field: 'X' });
  }

  function crossProductInverseMatrix(weights: Float64Array | null): Matrix {
    const xtwx = weightedCrossProduct(weights);
    const lu = new LuDecomposition(xtwx);
    const u = lu.upperTriangularMatrix;
    checkRank(
      Array.from({ length: p }, (_, j) => u.get(j, j)),
      'X\'WX is singular',
    );
    return inverse(xtwx);
  }

  return {
    n,
    p,
    solveWeighted(y, weights) {
      const sw = new Matrix(n, p);
      const sy = new Matrix(n, 1);
      for (let i = 0; i < n; i++) {
        const root = weights ? Math.sqrt(weights[i]) : 1;
        for (let j = 0; j < p; j++) sw.set(i, j, root * rows[i][j]);
        sy.set(i, 0, root * y[i]);
      }
      const qr = new QrDecomposition(sw);
      const r = qr.upperTriangularMatrix;
      checkRank(
        Array.from({ length: p }, (_, j) => r.get(j, j)),
        'the weighted least-squares fit is singular',
      );
      return Float64Array.from(qr.solve(sy).getColumn(0));
    },
    solveExact: (subset, y) => solveSquare(new Matrix(subset.map((i) => rows[i])), subset.map((i) => y[i])),
    residuals(y, beta, out) {
      for (let i = 0; i < n; i++) {
        const r = rows[i];
        let fitted = 0;
        for (let j = 0; j < p; j++) fitted += r[j] * beta[j];
        out[i] = y[i] - fitted;
      }
    },
    mStep(y, beta, norm, scale, _work, irls, newton) {
      const residuals = new Float64Array(n);
      this.residuals(y, beta, residuals);
      const s = scale.fixed ?? madScale(residuals, new Float64Array(n), scale.previous);
      const xtwx = Matrix.zeros(p, p);
      const xtdx = Matrix.zeros(p, p);
      const xtwr = new Array<number>(p).fill(0);
      const v = new Array<number>(p).fill(0); // Σψ′(u)·u·xᵢ
      for (let i = 0; i < n; i++) {
        const row = rows[i];
        const u = residuals[i] / s;
        const w = norm.weight(u);
        const d = norm.psiDeriv(u);
        for (let j = 0; j < p; j++) {
          xtwr[j] += w * residuals[i] * row[j];
          v[j] += d * u * row[j];
          for (let k = 0; k < p; k++) {
            xtwx.set(j, k, xtwx.get(j, k) + w * row[j] * row[k]);
            xtdx.set(j, k, xtdx.get(j, k) + d * row[j] * row[k]);
          }
        }
      }
      const step = solveSquare(xtwx, xtwr);
      if (step === null) throw new StatsInputError('the weighted least-squares fit is singular: the columns of X are linearly dependent', { field: 'X' });
      for (let j = 0; j < p; j++) irls[j] = beta[j] + step[j];
      if (newton === null) return s;
      if (scale.fixed === undefined) {
        // + v∇sᵀ, with ∂|rₖ|/∂β = −sign(rₖ)·xₖ for the residuals at the median of |r| (madScale left them in MIDDLES)
        const gradient = new Array<number>(p).fill(0);
        for (const middle of MIDDLES) {
          const k = residuals.findIndex((r) => Math.abs(r) === middle);
          for (let j = 0; j < p; j++) gradient[j] -= (Math.sign(residuals[k]) * rows[k][j]) / (2 * MAD_CONSTANT);
        }
        for (let j = 0; j < p; j++) for (let k = 0; k < p; k++) xtdx.set(j, k, xtdx.get(j, k) + v[j] * gradient[k]);
      }
      const newtonStep = solveSquare(xtdx, xtwr);
      // the plain iteration's Jacobian I − (X'WX)⁻¹M
      const plainJacobian = Matrix.eye(p).sub(solve(xtwx, xtdx));
      const eigen = new EigenvalueDecomposition(plainJacobian);
      const radius = Math.max(...eigen.realEigenvalues.map((re, j) => Math.hypot(re, eigen.imaginaryEigenvalues[j])));
      const taken = newtonStep !== null && radius < 1;
      for (let j = 0; j < p; j++) newton[j] = taken ? beta[j] + newtonStep[j] : Number.NaN;
      return s;
    },
    mFinal(y, beta, norm, scale) {
      const residuals = new Float64Array(n);
      this.residuals(y, beta, residuals);
      const weights = new Float64Array(n);
      norm.weights(residuals, scale, weights);
      let sumPsiSquared = 0;
      let sumPsiDeriv = 0;
      let sumPsiDerivSquared = 0;
      for (let i = 0; i < n; i++) {
        const u = residuals[i] / scale;
        const psi = norm.psi(u);
        const deriv = norm.psiDeriv(u);
        sumPsiSquared += psi * psi;
        sumPsiDeriv += deriv;
        sumPsiDerivSquared += deriv * deriv;
      }
      return { weights: toArray(weights), hat: this.hatDiagonal(weights), sumPsiSquared, sumPsiDeriv, sumPsiDerivSquared };
    },
    crossProductInverse: (weights) => crossProductInverseMatrix(weights).to2DArray(),
    hatDiagonal(weights) {
      const inv = crossProductInverseMatrix(weights);
      const xm = full.mmul(inv);
      const hat = new Array<number>(n);
      for (let i = 0; i < n; i++) {
        let h = 0;
        for (let j = 0; j < p; j++) h += xm.get(i, j) * rows[i][j];
        hat[i] = (weights ? weights[i] : 1) * h;
      }
      return hat;
    },
    select: (subset) => createDesign(Array.from(subset, (i) => rows[i])),
    column: (j) => Float64Array.from(rows, (row) => row[j]),
  };
}

/** How many |r| gatherBand found in its band, and below it. */
const BAND_COUNTS = new Int32Array(2);

/**
 * The |yᵢ − a − b·xᵢ| within [low, high] into band[0..m) with their positions in bandIndex, in order; m and the count
 * below `low` into BAND_COUNTS. Branch-free, as the comparisons are unpredictable and branches would be slow; a
 * function of its own, so that its type feedback is its own.
 */
function gatherBand(
  y: Float64Array,
  xs: Float64Array,
  a: number,
  b: number,
  low: number,
  high: number,
  band: Float64Array,
  bandIndex: Int32Array,
): void {
  let m = 0;
  let below = 0;
  for (let i = 0; i < xs.length; i++) {
    const size = Math.abs(y[i] - a - b * xs[i]);
    band[m] = size;
    bandIndex[m] = i;
    m += +(size >= low) & +(size <= high);
    below += +(size < low);
  }
  BAND_COUNTS[0] = m;
  BAND_COUNTS[1] = below;
}

/** The largest modulus of the eigenvalues of [[c00, c01], [c10, c11]]. */
function spectralRadius2(c00: number, c01: number, c10: number, c11: number): number {
  const half = (c00 + c11) / 2;
  const det = c00 * c11 - c01 * c10;
  const disc = half * half - det;
  return disc >= 0 ? Math.abs(half) + Math.sqrt(disc) : Math.sqrt(det);
}

/** Whether no pivot on this diagonal (of R in QR, of U in LU) is zero relative to the largest: X has full rank. */
function fullRank(diagonal: number[]): boolean {
  const largest = Math.max(...diagonal.map(Math.abs));
  return largest > 0 && diagonal.every((d) => Math.abs(d) > RANK_TOLERANCE * largest);
}

/** The solution of the square system a·z = b by LU decomposition, or null when a is singular. */
function solveSquare(a: Matrix, b: number[]): Float64Array | null {
  const lu = new LuDecomposition(a);
  const u = lu.upperTriangularMatrix;
  if (!fullRank(Array.from({ length: a.rows }, (_, j) => u.get(j, j)))) return null;
  return Float64Array.from(lu.solve(Matrix.columnVector(b)).getColumn(0));
}

/**
 * Moves the k-th smallest value of values[left..right] to index k, smaller ones before it and larger after,
 * by Floyd & Rivest's selection (CACM 1975, algorithm 489), in expected n + min(k, n − k) comparisons.
 */
function floydRivest(values: Float64Array, k: number, left: number, right: number): void {
  while (right > left) {
    if (right - left > 600) {
      // first narrow to a sample range that contains the k-th value with high probability
      const m = right - left + 1;
      const i = k - left + 1;
      const z = Math.log(m);
      const size = 0.5 * Math.exp((2 * z) / 3);
      const spread = 0.5 * Math.sqrt((z * size * (m - size)) / m) * (i - m / 2 < 0 ? -1 : 1);
      floydRivest(
        values,
        k,
        Math.max(left, Math.floor(k - (i * size) / m + spread)),
        Math.min(right, Math.floor(k + ((m - i) * size) / m + spread)),
      );
    }
    const pivot = values[k];
    let i = left;
    let j = right;
    swap(values, left, k);
    if (values[right] > pivot) swap(values, right, left);
    while (i < j) {
      swap(values, i, j);
      i++;
      j--;
      while (values[i] < pivot) i++;
      while (values[j] > pivot) j--;
    }
    if (values[left] === pivot) swap(values, left, j);
    else {
      j++;
      swap(values, j, right);
    }
    if (j <= k) left = j + 1;
    if (k <= j) right = j - 1;
  }
}

function swap(values: Float64Array, i: number, j: number): void {
  const t = values[i];
  values[i] = values[j];
  values[j] = t;
}

/**
 * The k-th smallest value (0-based) of `values` (Floyd & Rivest selection, expected O(n)).
 * Reorders `values` in place, so pass a scratch copy.
 *
 * @example
 * selectKth(Float64Array.from([5, 1, 4, 2]), 1); // 2
 */
export function selectKth(values: Float64Array, k: number): number {
  floydRivest(values, k, 0, values.length - 1);
  return values[k];
}

/** The two middle values, [lower, upper] (equal for odd n), of the last median found by middleOf. */
const MIDDLES = new Float64Array(2);

/**
 * The two middle values of n values, of which values[0..m) hold those from rank `offset` on, into MIDDLES;
 * returns the median, their mean.
 */
function middleOf(values: Float64Array, m: number, offset: number, n: number): number {
  const half = n >> 1;
  const upperAt = half - offset;
  floydRivest(values, upperAt, 0, m - 1);
  const upper = values[upperAt];
  let lower = upper;
  if (n % 2 === 0) {
    // after selection everything before `upperAt` is ≤ upper, so the lower middle is their maximum
    lower = -Infinity;
    for (let i = 0; i < upperAt; i++) if (values[i] > lower) lower = values[i];
  }
  MIDDLES[0] = lower;
  MIDDLES[1] = upper;
  return (lower + upper) / 2;
}

/** Half-width of the band around a previous median that medianAbs selects in, relative to that median. */
const MEDIAN_BAND = 0.1;

/**
 * From this many residuals on, a first MAD without a previous median starts from the median of GUESS_SAMPLE of them,
 * within ±GUESS_BAND (the sample median's relative standard error is about 7 % here).
 */
const GUESS_MEDIAN_ABOVE = 2000;
const GUESS_SAMPLE = 255;
const GUESS_BAND = 0.25;

/**
 * Whether the median of n values, of which `below` lie under a band and the m in it are in band[0..m), is in the
 * band; if so its middle values are found (middleOf), else a full selection is needed.
 */
function middleInBand(band: Float64Array, m: number, below: number, n: number): boolean {
  const half = n >> 1;
  const firstRank = n % 2 === 1 ? half : half - 1;
  if (!(firstRank >= below && half < below + m)) return false;
  middleOf(band, m, below, n);
  return true;
}

/**
 * Median of |values|, using `scratch` (same length) as work space so that hot loops allocate nothing.
 * Even n: mean of the two middle values, as R's median(). `near`, a previous median (as in IRLS, where it
 * changes little), lets one pass keep only the values within ±10 % of it and select among those;
 * when the median is not in that band the full selection runs, so the result is the same either way.
 *
 * @example
 * medianAbs(Float64Array.from([-3, 1, 2]), new Float64Array(3)); // 2
 */
export function medianAbs(values: Float64Array, scratch: Float64Array, near = 0): number {
  const n = values.length;
  if (near > 0) {
    const low = near * (1 - MEDIAN_BAND);
    const high = near * (1 + MEDIAN_BAND);
    let below = 0;
    let m = 0;
    // branch-free counting (the comparisons are unpredictable, so branches would be slow)
    for (let i = 0; i < n; i++) {
      const a = Math.abs(values[i]);
      scratch[m] = a;
      m += +(a >= low) & +(a <= high);
      below += +(a < low);
    }
    if (middleInBand(scratch, m, below, n)) return (MIDDLES[0] + MIDDLES[1]) / 2;
  }
  for (let i = 0; i < n; i++) scratch[i] = Math.abs(values[i]);
  return middleOf(scratch, n, 0, n);
}

/**
 * A plain array copy of a typed array (Array.from goes through the iterator protocol and is slow).
 *
 * @example
 * toArray(Float64Array.of(1, 2)); // [1, 2]
 */
export function toArray(values: Float64Array): number[] {
  const out = new Array<number>(values.length);
  for (let i = 0; i < values.length; i++) out[i] = values[i];
  return out;
}

/**
 * Normal consistency constant of the MAD, 0.6745 ≈ Φ⁻¹(0.75), as in R MASS::rlm.
 *
 * @example
 * medianAbs(residuals, scratch) / MAD_CONSTANT; // the MAD scale
 */
export const MAD_CONSTANT = 0.6745;

/**
 * MAD about zero, median(|r|)/0.6745, the scale of MASS::rlm (scale.est = "MAD") and statsmodels RLM.
 * A zero MAD means at least half the residuals are exactly 0; weights would be undefined, so it throws.
 * `previous`, the scale of the last iteration, only speeds the median up.
 *
 * @example
 * madScale(Float64Array.from([1, -2, 3]), new Float64Array(3)); // 2 / 0.6745
 */
export function madScale(residuals: Float64Array, scratch: Float64Array, previous = 0): number {
  return scaleFromMedian(medianAbs(residuals, scratch, previous * MAD_CONSTANT));
}

/** median(|r|)/0.6745, refusing 0 (see madScale). */
function scaleFromMedian(medianOfAbs: number): number {
  const scale = medianOfAbs / MAD_CONSTANT;
  if (!(scale > 0)) {
    throw new StatsInputError(
      'the robust scale is 0: at least half of the samples lie exactly on the fitted line, so robust weights are undefined',
      { field: 'y' },
    );
  }
  return scale;
}
