import { describe, expect, it } from 'vitest';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import { fitOlsLine, meanResponseInterval, olsRegression } from '../../../../src/lib/stats/ols';
import { datasets, expectRelativelyClose, lineDataNames, rReference } from './robustFixtures';

// Reference: R 4.2.2 stats::lm, summary.lm, confint, hatvalues, predict(interval = "confidence")
// (tests/fixtures/robust/generate.R). Closed form, so agreement to 1e-9 relative.
describe('olsRegression against R lm', () => {
  it('stackloss, 3 predictors: coefficients, SEs, residual SD, df, CIs, hat values', () => {
    const ref = rReference.stackloss;
    const fit = olsRegression(ref.X, ref.y);
    expectRelativelyClose(fit.coefficients, ref.ols.coefficients, 1e-9);
    expectRelativelyClose(fit.standardErrors, ref.ols.standardErrors, 1e-9);
    expect(fit.residualSD).toBeCloseTo(ref.ols.sigma, 10);
    expect(fit.df).toBe(ref.ols.df);
    expectRelativelyClose(fit.ci.map((c) => c[0]), ref.ols.ciLower, 1e-9);
    expectRelativelyClose(fit.ci.map((c) => c[1]), ref.ols.ciUpper, 1e-9);
    expectRelativelyClose(fit.hat, ref.ols.hat, 1e-9);
  });
});

describe('fitOlsLine against R lm', () => {
  for (const name of lineDataNames) {
    it(`${name}: line, CIs, covariance, scale and hat values`, () => {
      const ref = rReference[name].ols;
      const { x, y } = datasets[name];
      const fit = fitOlsLine(x, y);
      expect(fit.method).toBe('ols');
      expectRelativelyClose([fit.intercept, fit.slope], ref.coefficients, 1e-9);
      expectRelativelyClose([fit.interceptCI[0], fit.slopeCI[0]], ref.ciLower, 1e-9);
      expectRelativelyClose([fit.interceptCI[1], fit.slopeCI[1]], ref.ciUpper, 1e-9);
      expectRelativelyClose(
        [Math.sqrt(fit.covariance![0][0]), Math.sqrt(fit.covariance![1][1])],
        ref.standardErrors,
        1e-9,
      );
      expect(fit.df).toBe(x.length - 2);
      expect(fit.scale).toBeCloseTo(ref.sigma, 10);
      expectRelativelyClose(fit.hat!, ref.hat, 1e-9);
    });

    it(`${name}: mean-response interval equals predict.lm(interval = "confidence")`, () => {
      const ref = rReference[name].ols.meanResponse;
      const fit = fitOlsLine(datasets[name].x, datasets[name].y);
      ref.x0.forEach((x0: number, i: number) => {
        const interval = meanResponseInterval(fit, x0);
        expectRelativelyClose([interval.estimate, interval.standardError], [ref.fit[i], ref.se[i]], 1e-9);
        expectRelativelyClose(interval.ci, [ref.lower[i], ref.upper[i]], 1e-9);
      });
    });
  }

  it('a 90 % interval is narrower than the 95 % one', () => {
    const { x, y } = datasets.clean;
    const wide = fitOlsLine(x, y);
    const narrow = fitOlsLine(x, y, { confidence: 0.9 });
    expect(narrow.slopeCI[1] - narrow.slopeCI[0]).toBeLessThan(wide.slopeCI[1] - wide.slopeCI[0]);
  });
});

describe('OLS properties', () => {
  it('reordering the samples leaves the fit unchanged', () => {
    const { x, y } = datasets.yOutliers;
    const order = x.map((_, i) => (i * 17) % x.length);
    const a = fitOlsLine(x, y);
    const b = fitOlsLine(order.map((i) => x[i]), order.map((i) => y[i]));
    expect(b.intercept).toBeCloseTo(a.intercept, 10);
    expect(b.slope).toBeCloseTo(a.slope, 12);
  });

  it('scaling x and y by the same factor scales the intercept and keeps the slope', () => {
    const { x, y } = datasets.clean;
    const a = fitOlsLine(x, y);
    const b = fitOlsLine(x.map((v) => v * 18), y.map((v) => v * 18));
    expect(b.intercept).toBeCloseTo(a.intercept * 18, 9);
    expect(b.slope).toBeCloseTo(a.slope, 12);
  });
});

describe('OLS bad input', () => {
  it.each([
    ['fewer than 3 pairs', () => fitOlsLine([1, 2], [1, 2]), /at least 3 pairs/],
    ['all x equal', () => fitOlsLine([2, 2, 2], [1, 2, 3]), /all x values are equal/],
    ['non-finite value', () => fitOlsLine([1, 2, 3], [1, Number.NaN, 3]), /y\[1\] is not a finite number/],
    ['mismatched lengths', () => fitOlsLine([1, 2, 3], [1, 2]), /same length/],
    ['bad confidence', () => fitOlsLine([1, 2, 3], [1, 2, 4], { confidence: 95 }), /confidence must be between 0 and 1/],
    ['collinear X', () => olsRegression([[1, 1, 2], [1, 2, 4], [1, 3, 6], [1, 4, 8]], [1, 2, 3, 5]), /linearly dependent/],
    ['ragged X', () => olsRegression([[1, 1], [1], [1, 3]], [1, 2, 3]), /row 1 of X has 1 columns, expected 2/],
    ['too few rows for p', () => olsRegression([[1, 1, 5], [1, 2, 3], [1, 4, 4]], [1, 2, 3]), /at least 4 samples/],
  ])('%s throws StatsInputError', (_, run, message) => {
    expect(run).toThrow(StatsInputError);
    expect(run).toThrow(message);
  });

  it('meanResponseInterval needs a covariance', () => {
    const fit = { ...fitOlsLine([1, 2, 3, 4], [1, 2.1, 2.9, 4.2]), covariance: undefined };
    expect(() => meanResponseInterval(fit, 2)).toThrow(StatsInputError);
  });
});
