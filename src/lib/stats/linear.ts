import { Matrix, QrDecomposition, LuDecomposition, inverse } from 'ml-matrix';
import { StatsInputError } from './errors';
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
   * Writes the residuals into `out` and returns their MAD scale, madScale(out, scratch, previousScale): for IRLS,
   * which needs both at every step (the line does it in one pass over the data).
   */
  residualsAndMadScale(y: Float64Array, beta: Float64Array, out: Float64Array, scratch: Float64Array, previousScale: number): number;
  /** (X'WX)⁻¹ as a p × p array; `weights` null means all 1. */
  crossProductInverse(weights: Float64Array | null): number[][];
  /** Diagonal of the hat matrix of W^½X: hᵢ = wᵢ xᵢ'(X'WX)⁻¹xᵢ; `weights` null means all 1. */
  hatDiagonal(weights: Float64Array | null): Float64Array;
  /** The design made of the given rows only, in that order (repeats allowed, as in a bootstrap resample). */
  select(rows: ArrayLike<number>): LinearDesign;
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
  private unweighted: LineMoments | undefined;

  constructor(private readonly xs: Float64Array) {
    this.n = xs.length;
    let sum = 0;
    for (let i = 0; i < this.n; i++) sum += xs[i];
    this.shiftX = sum / this.n;
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

  residualsAndMadScale(y: Float64Array, beta: Float64Array, out: Float64Array, scratch: Float64Array, previousScale: number): number {
    const { xs, n } = this;
    const a = beta[0];
    const b = beta[1];
    if (!(previousScale > 0)) {
      for (let i = 0; i < n; i++) out[i] = y[i] - a - b * xs[i];
      return madScale(out, scratch);
    }
    // the residuals and the band of |r| near the last median, in the same pass (see medianAbs)
    const near = previousScale * MAD_CONSTANT;
    const low = near * (1 - MEDIAN_BAND);
    const high = near * (1 + MEDIAN_BAND);
    let below = 0;
    let m = 0;
    for (let i = 0; i < n; i++) {
      const r = y[i] - a - b * xs[i];
      out[i] = r;
      const size = Math.abs(r);
      scratch[m] = size;
      m += +(size >= low) & +(size <= high);
      below += +(size < low);
    }
    const median = medianInBand(scratch, m, below, n);
    return scaleFromMedian(Number.isNaN(median) ? medianAbs(out, scratch) : median);
  }

  crossProductInverse(weights: Float64Array | null): number[][] {
    const { sumW, meanX, sxx } = this.moments(weights);
    return [
      [1 / sumW + (meanX * meanX) / sxx, -meanX / sxx],
      [-meanX / sxx, 1 / sxx],
    ];
  }

  hatDiagonal(weights: Float64Array | null): Float64Array {
    const { sumW, meanX, sxx } = this.moments(weights);
    const { xs, n } = this;
    const hat = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const d = xs[i] - meanX;
      hat[i] = 1 / sumW + (d * d) / sxx;
    }
    if (weights !== null) for (let i = 0; i < n; i++) hat[i] *= weights[i];
    return hat;
  }

  select(rows: ArrayLike<number>): LinearDesign {
    const xs = new Float64Array(rows.length);
    for (let k = 0; k < rows.length; k++) xs[k] = this.xs[rows[k]];
    return new LineDesign(xs);
  }

  private moments(weights: Float64Array | null): LineMoments {
    if (weights === null) return this.unweighted ?? (this.unweighted = this.weightedMoments(new Float64Array(this.n).fill(1)));
    return this.weightedMoments(weights);
  }

  private weightedMoments(weights: Float64Array): LineMoments {
    const { xs, shiftX, n } = this;
    let sumW = 0;
    let sumX = 0;
    let sumXX = 0;
    for (let i = 0; i < n; i++) {
      const w = weights[i];
      const dx = xs[i] - shiftX;
      sumW += w;
      sumX += w * dx;
      sumXX += w * dx * dx;
    }
    const sxx = sumXX - (sumX * sumX) / sumW;
    if (!(sumW > 0) || !(sxx > 1e-14 * sumXX)) singularLine();
    return { sumW, meanX: shiftX + sumX / sumW, sxx };
  }
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
    const largest = Math.max(...diagonal.map(Math.abs));
    if (!(largest > 0) || diagonal.some((d) => Math.abs(d) <= RANK_TOLERANCE * largest)) {
      throw new StatsInputError(`${what}: the columns of X are linearly dependent`, { field: 'X' });
    }
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
    solveExact(subset, y) {
      const a = new Matrix(subset.map((i) => rows[i]));
      const lu = new LuDecomposition(a);
      const u = lu.upperTriangularMatrix;
      const pivots = Array.from({ length: p }, (_, j) => Math.abs(u.get(j, j)));
      const largest = Math.max(...pivots);
      if (!(largest > 0) || pivots.some((d) => d <= RANK_TOLERANCE * largest)) return null;
      return Float64Array.from(lu.solve(Matrix.columnVector(subset.map((i) => y[i]))).getColumn(0));
    },
    residuals(y, beta, out) {
      for (let i = 0; i < n; i++) {
        const r = rows[i];
        let fitted = 0;
        for (let j = 0; j < p; j++) fitted += r[j] * beta[j];
        out[i] = y[i] - fitted;
      }
    },
    residualsAndMadScale(y, beta, out, scratch, previousScale) {
      this.residuals(y, beta, out);
      return madScale(out, scratch, previousScale);
    },
    crossProductInverse: (weights) => crossProductInverseMatrix(weights).to2DArray(),
    hatDiagonal(weights) {
      const inv = crossProductInverseMatrix(weights);
      const xm = full.mmul(inv);
      const hat = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        let h = 0;
        for (let j = 0; j < p; j++) h += xm.get(i, j) * rows[i][j];
        hat[i] = (weights ? weights[i] : 1) * h;
      }
      return hat;
    },
    select: (subset) => createDesign(Array.from(subset, (i) => rows[i])),
  };
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

/** Median of values[0..m) given the overall ranks; `offset` is how many smaller values lie outside. */
function middleOf(values: Float64Array, m: number, offset: number, n: number): number {
  const half = n >> 1;
  const upperAt = half - offset;
  floydRivest(values, upperAt, 0, m - 1);
  const upper = values[upperAt];
  if (n % 2 === 1) return upper;
  // after selection everything before `upperAt` is ≤ upper, so the lower middle is their maximum
  let lower = -Infinity;
  for (let i = 0; i < upperAt; i++) if (values[i] > lower) lower = values[i];
  return (lower + upper) / 2;
}

/** Half-width of the band around a previous median that medianAbs selects in, relative to that median. */
const MEDIAN_BAND = 0.1;

/**
 * The median of n values of which `below` lie under a band and the m in it are in band[0..m), or NaN when the
 * median is not in the band (then a full selection is needed).
 */
function medianInBand(band: Float64Array, m: number, below: number, n: number): number {
  const half = n >> 1;
  const firstRank = n % 2 === 1 ? half : half - 1;
  return firstRank >= below && half < below + m ? middleOf(band, m, below, n) : Number.NaN;
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
    const median = medianInBand(scratch, m, below, n);
    if (!Number.isNaN(median)) return median;
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
