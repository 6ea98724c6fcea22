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
  /** (X'WX)⁻¹ as a p × p array; `weights` null means all 1. */
  crossProductInverse(weights: Float64Array | null): number[][];
  /** Diagonal of the hat matrix of W^½X: hᵢ = wᵢ xᵢ'(X'WX)⁻¹xᵢ; `weights` null means all 1. */
  hatDiagonal(weights: Float64Array | null): Float64Array;
  /** Row i as a plain array. */
  row(i: number): number[];
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
 * computed in two passes over the data for accuracy.
 *
 * @example
 * const design = createLineDesign([1, 2, 3]);
 * design.solveWeighted(Float64Array.from([2, 4, 6]), null); // Float64Array [0, 2]
 */
export function createLineDesign(x: readonly number[] | Float64Array): LinearDesign {
  const xs = Float64Array.from(x);
  const n = xs.length;

  /** Weighted sums: total weight, weighted mean of x and Σw(x − x̄)². */
  function moments(weights: Float64Array | null): { sumW: number; meanX: number; sxx: number } {
    let sumW = 0;
    let sumWX = 0;
    for (let i = 0; i < n; i++) {
      const w = weights ? weights[i] : 1;
      sumW += w;
      sumWX += w * xs[i];
    }
    const meanX = sumWX / sumW;
    let sxx = 0;
    for (let i = 0; i < n; i++) {
      const d = xs[i] - meanX;
      sxx += (weights ? weights[i] : 1) * d * d;
    }
    if (!(sumW > 0) || !(sxx > 0)) {
      throw new StatsInputError(
        'the weighted line fit is singular: the samples with non-zero weight all have the same x value',
        { field: 'x' },
      );
    }
    return { sumW, meanX, sxx };
  }

  return {
    n,
    p: 2,
    solveWeighted(y, weights) {
      let sumW = 0;
      let sumWX = 0;
      let sumWY = 0;
      for (let i = 0; i < n; i++) {
        const w = weights ? weights[i] : 1;
        sumW += w;
        sumWX += w * xs[i];
        sumWY += w * y[i];
      }
      const meanX = sumWX / sumW;
      const meanY = sumWY / sumW;
      let sxx = 0;
      let sxy = 0;
      for (let i = 0; i < n; i++) {
        const w = weights ? weights[i] : 1;
        const dx = xs[i] - meanX;
        sxx += w * dx * dx;
        sxy += w * dx * (y[i] - meanY);
      }
      if (!(sumW > 0) || !(sxx > 0)) {
        throw new StatsInputError(
          'the weighted line fit is singular: the samples with non-zero weight all have the same x value',
          { field: 'x' },
        );
      }
      const slope = sxy / sxx;
      return Float64Array.of(meanY - slope * meanX, slope);
    },
    solveExact(rows, y) {
      const [i, j] = rows;
      const dx = xs[j] - xs[i];
      if (dx === 0) return null;
      const slope = (y[j] - y[i]) / dx;
      return Float64Array.of(y[i] - slope * xs[i], slope);
    },
    residuals(y, beta, out) {
      const a = beta[0];
      const b = beta[1];
      for (let i = 0; i < n; i++) out[i] = y[i] - a - b * xs[i];
    },
    crossProductInverse(weights) {
      const { sumW, meanX, sxx } = moments(weights);
      return [
        [1 / sumW + (meanX * meanX) / sxx, -meanX / sxx],
        [-meanX / sxx, 1 / sxx],
      ];
    },
    hatDiagonal(weights) {
      const { sumW, meanX, sxx } = moments(weights);
      const hat = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        const d = xs[i] - meanX;
        hat[i] = (weights ? weights[i] : 1) * (1 / sumW + (d * d) / sxx);
      }
      return hat;
    },
    row: (i) => [1, xs[i]],
  };
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
    row: (i) => rows[i].slice(),
  };
}

/**
 * The k-th smallest value (0-based) of `values` by quickselect (Hoare, CACM 1961), in expected O(n).
 * Reorders `values` in place, so pass a scratch copy.
 *
 * @example
 * selectKth(Float64Array.from([5, 1, 4, 2]), 1); // 2
 */
export function selectKth(values: Float64Array, k: number): number {
  let lo = 0;
  let hi = values.length - 1;
  while (hi > lo) {
    // median of three as pivot keeps sorted or nearly sorted input fast
    const mid = (lo + hi) >> 1;
    const a = values[lo];
    const b = values[mid];
    const c = values[hi];
    const pivot = a < b ? (b < c ? b : a < c ? c : a) : a < c ? a : b < c ? c : b;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (values[i] < pivot) i++;
      while (values[j] > pivot) j--;
      if (i <= j) {
        const t = values[i];
        values[i] = values[j];
        values[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return values[k];
  }
  return values[k];
}

/**
 * Median of |values|, using `scratch` (same length) as work space so that hot loops allocate nothing.
 * Even n: mean of the two middle values, as R's median().
 *
 * @example
 * medianAbs(Float64Array.from([-3, 1, 2]), new Float64Array(3)); // 2
 */
export function medianAbs(values: Float64Array, scratch: Float64Array): number {
  const n = values.length;
  for (let i = 0; i < n; i++) scratch[i] = Math.abs(values[i]);
  const half = n >> 1;
  const upper = selectKth(scratch, half);
  if (n % 2 === 1) return upper;
  // after selection everything left of `half` is ≤ upper, so the lower middle is their maximum
  let lower = -Infinity;
  for (let i = 0; i < half; i++) if (scratch[i] > lower) lower = scratch[i];
  return (lower + upper) / 2;
}

/** Normal consistency constant of the MAD, 0.6745 ≈ Φ⁻¹(0.75), as in R MASS::rlm. */
export const MAD_CONSTANT = 0.6745;

/**
 * MAD about zero, median(|r|)/0.6745, the scale of MASS::rlm (scale.est = "MAD") and statsmodels RLM.
 * A zero MAD means at least half the residuals are exactly 0; weights would be undefined, so it throws.
 *
 * @example
 * madScale(Float64Array.from([1, -2, 3]), new Float64Array(3)); // 2 / 0.6745
 */
export function madScale(residuals: Float64Array, scratch: Float64Array): number {
  const scale = medianAbs(residuals, scratch) / MAD_CONSTANT;
  if (!(scale > 0)) {
    throw new StatsInputError(
      'the robust scale is 0: at least half of the samples lie exactly on the fitted line, so robust weights are undefined',
      { field: 'y' },
    );
  }
  return scale;
}
