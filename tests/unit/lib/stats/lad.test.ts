import { describe, expect, it } from 'vitest';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import { fitLadLine, ladLine } from '../../../../src/lib/stats/lad';
import { fitOlsLine } from '../../../../src/lib/stats/ols';
import { datasets, expectRelativelyClose, lineDataNames, statsmodelsReference } from './robustFixtures';

// R quantreg (rq) is not installed on this machine, so the exact LAD line is checked against a brute force
// over all lines through two data points, straight from the fact that an L1 optimum passes through two points
// (e.g. Bloomfield & Steiger, Least Absolute Deviations, 1983, ch. 2).
const sumAbs = (x: number[], y: number[], a: number, b: number) => x.reduce((s, xi, i) => s + Math.abs(y[i] - a - b * xi), 0);

function bruteForceMinimum(x: number[], y: number[]): number {
  let best = Infinity;
  for (let i = 0; i < x.length; i++) {
    for (let j = i + 1; j < x.length; j++) {
      if (x[i] === x[j]) continue;
      const b = (y[j] - y[i]) / (x[j] - x[i]);
      best = Math.min(best, sumAbs(x, y, y[i] - b * x[i], b));
    }
  }
  return best;
}

describe('LAD line against a brute force over all pairs of points', () => {
  const extra = {
    ties: { x: [1, 1, 2, 2, 3, 3, 4, 4, 5, 5], y: [1, 2, 2, 2, 3, 5, 4, 4, 5, 9] },
    collinear: { x: [1, 2, 3, 4, 5, 6, 7], y: [2, 4, 6, 8, 10, 12, 3] },
    skewed: { x: [0.5, 1, 1.5, 2, 8, 9, 30], y: [0.7, 1.1, 1.4, 2.3, 8.1, 9.6, 12] },
  };
  const cases: [string, number[], number[]][] = [
    ...lineDataNames.map((name) => [name, datasets[name].x, datasets[name].y] as [string, number[], number[]]),
    ...Object.entries(extra).map(([name, d]) => [name, d.x, d.y] as [string, number[], number[]]),
  ];
  for (const [name, x, y] of cases) {
    it(`${name}: Σ|r| equals the brute-force minimum and the line passes through two samples`, () => {
      const fit = ladLine(x, y);
      const objective = sumAbs(x, y, fit.intercept, fit.slope);
      expect(objective).toBeCloseTo(bruteForceMinimum(x, y), 9);
      const onLine = x.filter((xi, i) => Math.abs(y[i] - fit.intercept - fit.slope * xi) < 1e-9 * (1 + Math.abs(y[i])));
      expect(new Set(onLine).size).toBeGreaterThanOrEqual(2);
    });
  }
});

// statsmodels 0.13.5 QuantReg(y, X).fit(q = 0.5, vcov = "iid", kernel = "epa", bandwidth = "hsheather"):
// its coefficients come from an IRLS approximation, so they agree with the exact line to about 1e-5 (and its
// Σ|r| is never below ours); the SEs depend on the residuals only through a kernel density, hence 1e-4.
describe('LAD against statsmodels QuantReg at the median', () => {
  for (const name of lineDataNames) {
    it(`${name}: coefficients, standard errors and t intervals`, () => {
      const ref = statsmodelsReference[name].lad;
      const { x, y } = datasets[name];
      const fit = fitLadLine(x, y);
      expectRelativelyClose([fit.intercept, fit.slope], ref.coefficients, 1e-5, 1);
      expect(sumAbs(x, y, fit.intercept, fit.slope)).toBeLessThanOrEqual(sumAbs(x, y, ref.coefficients[0], ref.coefficients[1]));
      const se = [Math.sqrt(fit.covariance![0][0]), Math.sqrt(fit.covariance![1][1])];
      expectRelativelyClose(se, ref.standardErrors, 1e-4);
      expectRelativelyClose([fit.interceptCI[0], fit.slopeCI[0]], ref.ciLower, 1e-4, 1);
      expectRelativelyClose([fit.interceptCI[1], fit.slopeCI[1]], ref.ciUpper, 1e-4, 1);
    });
  }
});

describe('LAD properties', () => {
  it('the line through 7 of 9 collinear points ignores the other two; its intervals are then undefined', () => {
    const x = [1, 2, 3, 4, 5, 6, 7, 8, 9];
    const y = [1, 2, 3, 4, 5, 6, 7, 8.5, 30];
    const fit = ladLine(x, y);
    expect(fit.slope).toBeCloseTo(1, 12);
    expect(fit.intercept).toBeCloseTo(0, 12);
    expect(() => fitLadLine(x, y)).toThrow(/interquartile range of the residuals is 0/);
  });

  it('reordering the samples leaves the minimum unchanged', () => {
    const { x, y } = datasets.yOutliers;
    const order = x.map((_, i) => (i * 11) % x.length);
    const a = fitLadLine(x, y);
    const xs = order.map((i) => x[i]);
    const ys = order.map((i) => y[i]);
    const b = fitLadLine(xs, ys);
    expect(sumAbs(xs, ys, b.intercept, b.slope)).toBeCloseTo(sumAbs(x, y, a.intercept, a.slope), 9);
  });

  it('scaling x and y by the same factor scales the intercept and keeps the slope', () => {
    const { x, y } = datasets.clean;
    const a = fitLadLine(x, y);
    const b = fitLadLine(x.map((v) => v * 4), y.map((v) => v * 4));
    expect(b.slope).toBeCloseTo(a.slope, 10);
    expect(b.intercept).toBeCloseTo(a.intercept * 4, 9);
  });

  it('one gross outlier moves LAD far less than OLS', () => {
    const { x, y } = datasets.clean;
    const lad = Math.abs(fitLadLine([...x, 11], [...y, 40]).slope - fitLadLine(x, y).slope);
    const ols = Math.abs(fitOlsLine([...x, 11], [...y, 40]).slope - fitOlsLine(x, y).slope);
    expect(lad).toBeLessThan(ols / 5);
  });

  it('intervals narrow with lower confidence and are symmetric t intervals on n − 2 df', () => {
    const { x, y } = datasets.yOutliers;
    const a = fitLadLine(x, y);
    const narrow = fitLadLine(x, y, { confidence: 0.8 });
    expect(narrow.slopeCI[1] - narrow.slopeCI[0]).toBeLessThan(a.slopeCI[1] - a.slopeCI[0]);
    expect(a.slopeCI[1] - a.slope).toBeCloseTo(a.slope - a.slopeCI[0], 12);
    expect(a).toMatchObject({ method: 'lad', df: x.length - 2 });
  });

  it.each([
    ['fewer than 3 pairs', () => ladLine([1, 2], [1, 2]), /at least 3 pairs/],
    ['all x equal', () => fitLadLine([1, 1, 1], [1, 2, 3]), /all x values are equal/],
    ['NaN', () => fitLadLine([1, Number.NaN, 3], [1, 2, 3]), /x\[1\] is not a finite number/],
    ['mismatched lengths', () => fitLadLine([1, 2, 3], [1, 2]), /same length/],
    ['fewer than 8 samples', () => fitLadLine([1, 2, 3, 4, 5, 6, 7], [1, 2, 3, 4, 5, 6, 8]), /at least 8 samples \(got 7\)/],
  ])('%s throws StatsInputError', (_, run, message) => {
    expect(run).toThrow(StatsInputError);
    expect(run).toThrow(message);
  });
});
