import { describe, expect, it } from 'vitest';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import { createDesign, createLineDesign, lineDesignMatrix, madScale, medianAbs, MStepWork, selectKth, type LinearDesign } from '../../../../src/lib/stats/linear';
import { hampelNorm, huberNorm, tukeyBisquareNorm, type RobustNorm } from '../../../../src/lib/stats/norms';
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { seededRandom } from '../../../../src/lib/stats/random';
import { datasets } from './robustFixtures';

// Selection and the closed-form line path are checked against their definitions (a full sort)
// and against the general QR path; the regressions themselves are checked against R in ols.test.ts.
describe('selection', () => {
  it('selectKth equals the k-th element of the sorted array, also with ties and for long arrays', () => {
    const rng = seededRandom(5);
    for (const n of [1, 2, 7, 1000, 5001]) {
      const values = Float64Array.from({ length: n }, () => Math.round(rng.next() * 50) / 5);
      const sorted = Float64Array.from(values).sort();
      for (const k of [0, n >> 1, n - 1]) expect(selectKth(Float64Array.from(values), k)).toBe(sorted[k]);
    }
  });

  it('medianAbs equals the median of |v| from a sort, with or without a starting guess', () => {
    const rng = seededRandom(9);
    for (const n of [3, 4, 10, 2500, 2501]) {
      const values = Float64Array.from({ length: n }, () => rng.next() * 10 - 5);
      const sorted = Float64Array.from(values, Math.abs).sort();
      const median = n % 2 ? sorted[n >> 1] : (sorted[n / 2 - 1] + sorted[n / 2]) / 2;
      const scratch = new Float64Array(n);
      expect(medianAbs(values, scratch)).toBe(median);
      for (const guess of [median, median * 1.05, median * 3, 0.01]) expect(medianAbs(values, scratch, guess)).toBe(median);
    }
  });
});

describe('line design against the general QR design', () => {
  const { x, y } = datasets.yOutliers;
  const weights = Float64Array.from(x, (_, i) => 0.1 + ((i * 37) % 10) / 10);
  const line = createLineDesign(x);
  // the same line with its columns swapped, [x, 1], is not of the [1, x] shape and so takes the QR path
  const general = createDesign(x.map((v) => [v, 1]));
  const yy = Float64Array.from(y);

  it('weighted coefficients agree', () => {
    const a = line.solveWeighted(yy, weights);
    const b = general.solveWeighted(yy, weights);
    expect(a[0]).toBeCloseTo(b[1], 10);
    expect(a[1]).toBeCloseTo(b[0], 12);
  });

  it('hat values of W^½X agree and sum to p = 2', () => {
    const a = line.hatDiagonal(weights);
    const b = general.hatDiagonal(weights);
    a.forEach((h, i) => expect(h).toBeCloseTo(b[i], 12));
    expect(a.reduce((s, h) => s + h, 0)).toBeCloseTo(2, 10);
  });

  it('columns agree (swapped) and are those of X', () => {
    expect(Array.from(line.column(0))).toEqual(Array.from(general.column(1)));
    expect(Array.from(line.column(1))).toEqual(Array.from(general.column(0)));
    expect(Array.from(line.column(1))).toEqual(x);
    expect(line.column(0).every((v) => v === 1)).toBe(true);
  });

  it('createDesign recognises [1, x] rows and takes the line path', () => {
    const design = createDesign(lineDesignMatrix(x));
    const a = design.solveWeighted(yy, weights);
    const b = line.solveWeighted(yy, weights);
    expect(Array.from(a)).toEqual(Array.from(b));
  });

  it('an exact fit through two rows passes through them', () => {
    const beta = line.solveExact([3, 8], yy)!;
    expect(beta[0] + beta[1] * x[3]).toBeCloseTo(y[3], 10);
    expect(beta[0] + beta[1] * x[8]).toBeCloseTo(y[8], 10);
    expect(createLineDesign([1, 1, 2]).solveExact([0, 1], Float64Array.of(1, 2, 3))).toBeNull();
  });

  it('a weighted fit with all weight on one x value is reported as singular', () => {
    const design = createLineDesign([1, 1, 2, 3]);
    expect(() => design.solveWeighted(Float64Array.of(1, 2, 3, 4), Float64Array.of(1, 1, 0, 0))).toThrow(StatsInputError);
  });
});

describe('mStep', () => {
  // built for this test: one M-step of each design against the same quantities computed directly
  const x = Array.from({ length: 41 }, (_, i) => i + 1);
  const y = Float64Array.from(x, (v) => 2 + 0.5 * v + Math.sin(3 * v) + (v % 9 === 0 ? 6 : 0));
  const designs = [
    ['line', createLineDesign(x), Float64Array.of(1.8, 0.52)],
    ['general', createDesign(x.map((v) => [1, v, v * v])), Float64Array.of(1.8, 0.52, 0.001)],
  ] as const;
  const residualsAt = (design: LinearDesign, beta: Float64Array) => {
    const r = new Float64Array(x.length);
    design.residuals(y, beta, r);
    return r;
  };
  /** F(β) = Σψ(rᵢ/s(β))xᵢ with s(β) the MAD of r(β), as the Newton update solves it. */
  const equations = (design: LinearDesign, rows: number[][], beta: Float64Array, norm: RobustNorm, fixed?: number) => {
    const r = residualsAt(design, beta);
    const s = fixed ?? madScale(r, new Float64Array(x.length));
    return rows[0].map((_, j) => rows.reduce((sum, row, i) => sum + norm.psi(r[i] / s) * row[j], 0));
  };

  for (const [name, design, beta] of designs) {
    const rows = x.map((v) => (design.p === 2 ? [1, v] : [1, v, v * v]));
    for (const norm of [huberNorm(), tukeyBisquareNorm(), hampelNorm()]) {
      it(`${name} design, ${norm.name}: the scale is the MAD of the residuals (any previous scale), the IRLS update the weighted fit`, () => {
        const r = residualsAt(design, beta);
        const mad = madScale(r, new Float64Array(x.length));
        const weights = Float64Array.from(r, (v) => norm.weight(v / mad));
        const expected = design.solveWeighted(y, weights);
        // no previous scale, a close one, and one far off (the band misses the median and the full selection runs)
        for (const previous of [0, mad * 1.02, mad * 5]) {
          const irls = new Float64Array(design.p);
          expect(design.mStep(y, beta, norm, { previous }, new MStepWork(x.length), irls, null)).toBe(mad);
          irls.forEach((v, j) => expect(v).toBeCloseTo(expected[j], 9));
        }
      });

      it(`${name} design, ${norm.name}: the final pass gives the scalar weights, the hat values of W^½X and the sandwich's sums`, () => {
        const r = residualsAt(design, beta);
        const s = madScale(r, new Float64Array(x.length));
        const final = design.mFinal(y, beta, norm, s);
        const weights = Float64Array.from(r, (v) => norm.weight(v / s));
        final.weights.forEach((w, i) => expect(w).toBeCloseTo(weights[i], 12));
        const hat = createDesign(rows.map((row) => row.map((v, j) => (j === 0 ? 2 : v)))).hatDiagonal(weights); // the QR path: a column of 2s
        final.hat.forEach((h, i) => expect(h).toBeCloseTo(hat[i], 10));
        expect(final.sumPsiSquared).toBeCloseTo(r.reduce((sum, v) => sum + norm.psi(v / s) ** 2, 0), 9);
        expect(final.sumPsiDeriv).toBeCloseTo(r.reduce((sum, v) => sum + norm.psiDeriv(v / s), 0), 9);
        expect(final.sumPsiDerivSquared).toBeCloseTo(r.reduce((sum, v) => sum + norm.psiDeriv(v / s) ** 2, 0), 9);
      });

      it(`${name} design, ${norm.name}: steps that share their work space find the same scale as fresh ones`, () => {
        // a path of small steps (the last band is reused, narrowed), then a jump (the band is gathered anew)
        const work = new MStepWork(x.length);
        const path = [0, 1e-6, 3e-6, 1e-5, 1e-4, 1e-3, 0.3].map((t) => Float64Array.from(beta, (v, j) => v + t * (j === 0 ? 1 : 0.01)));
        let previous = 0;
        for (const at of path) {
          const expected = madScale(residualsAt(design, at), new Float64Array(x.length));
          previous = design.mStep(y, at, norm, { previous }, work, new Float64Array(design.p), new Float64Array(design.p));
          expect(previous).toBe(expected);
        }
      });

      it(`${name} design, ${norm.name}: the Newton update solves the linearised equations, and is withheld only where plain IRLS barely contracts`, () => {
        for (const fixed of [undefined, 1.3]) {
          const newton = new Float64Array(design.p);
          design.mStep(y, beta, norm, { fixed, previous: 0 }, new MStepWork(x.length), new Float64Array(design.p), newton);
          // central differences (the MAD is linear in β between switches of its median residuals; h stays inside)
          const jacobian = (map: (at: Float64Array) => number[]) =>
            Array.from({ length: design.p }, (_, k) => {
              const h = 1e-7 * Math.max(1, Math.abs(beta[k]));
              const up = beta.slice();
              const down = beta.slice();
              up[k] += h;
              down[k] -= h;
              const fUp = map(up);
              const fDown = map(down);
              return fUp.map((v, j) => (v - fDown[j]) / (2 * h)); // column k
            });
          const irlsUpdate = (at: Float64Array) => {
            const out = new Float64Array(design.p);
            design.mStep(y, at, norm, { fixed, previous: 0 }, new MStepWork(x.length), out, null);
            return Array.from(out);
          };
          const columns = jacobian(irlsUpdate);
          const plainJacobian = new Matrix(columns).transpose();
          const eigen = new EigenvalueDecomposition(plainJacobian);
          const radius = Math.max(...eigen.realEigenvalues.map((re, j) => Math.hypot(re, eigen.imaginaryEigenvalues[j])));
          if (Number.isNaN(newton[0])) {
            // withheld: mStep judges contraction by the Jacobian at a solution, which differs from this one away from it
            expect(radius).toBeGreaterThan(0.5);
            continue;
          }
          // F(β) + J·Δ vanishes for Δ = newton − β
          const f0 = equations(design, rows, beta, norm, fixed);
          const fColumns = jacobian((at) => equations(design, rows, at, norm, fixed));
          const predicted = f0.map((v, j) => v + fColumns.reduce((sum, column, k) => sum + column[j] * (newton[k] - beta[k]), 0));
          const size = Math.max(...f0.map(Math.abs));
          predicted.forEach((v) => expect(Math.abs(v)).toBeLessThan(1e-5 * size));
        }
      });
    }
  }
});
