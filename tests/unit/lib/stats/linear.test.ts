import { describe, expect, it } from 'vitest';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import { createDesign, createLineDesign, lineDesignMatrix, madScale, medianAbs, selectKth } from '../../../../src/lib/stats/linear';
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

describe('residualsAndMadScale', () => {
  // built for this test: the one-pass form must agree with the two separate steps, whatever the hint
  const x = Array.from({ length: 40 }, (_, i) => i + 1);
  const y = Float64Array.from(x, (v) => 2 + 0.5 * v + Math.sin(3 * v));
  const beta = Float64Array.of(1.8, 0.52);
  for (const [name, design] of [
    ['line', createLineDesign(x)],
    ['general', createDesign(x.map((v) => [1, v, v * v]))],
  ] as const) {
    it(`${name} design: the residuals and the MAD scale as residuals() and madScale() give them, with any hint`, () => {
      const coefficients = design.p === 2 ? beta : Float64Array.of(1.8, 0.52, 0);
      const expected = new Float64Array(40);
      design.residuals(y, coefficients, expected);
      const scale = madScale(expected, new Float64Array(40));
      // no hint, a close one, and one far off (the band misses the median and the full selection runs)
      for (const hint of [0, scale * 1.02, scale * 5]) {
        const out = new Float64Array(40);
        expect(design.residualsAndMadScale(y, coefficients, out, new Float64Array(40), hint)).toBe(scale);
        expect(Array.from(out)).toEqual(Array.from(expected));
      }
    });
  }
});
