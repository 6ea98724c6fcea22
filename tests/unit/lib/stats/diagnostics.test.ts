import { describe, expect, it } from 'vitest';
import { diagnosticFlags, regressionDiagnostics } from '../../../../src/lib/stats/diagnostics';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import { fitRobustLine } from '../../../../src/lib/stats/mEstimator';
import { fitMMLine } from '../../../../src/lib/stats/mm';
import { datasets, expectRelativelyClose, lineDataNames, rReference } from './robustFixtures';

// Reference: R 4.2.2 hatvalues, rstudent, cooks.distance, dffits of lm (tests/fixtures/robust/generate.R).
describe('OLS diagnostics against R', () => {
  for (const name of lineDataNames) {
    it(`${name}: hat, studentized residuals, Cook's distance, DFFITS`, () => {
      const ref = rReference[name].ols;
      const d = regressionDiagnostics(datasets[name].x, datasets[name].y);
      expect(d.method).toBe('ols');
      expectRelativelyClose(d.hat, ref.hat, 1e-9);
      expectRelativelyClose(d.studentizedResiduals as number[], ref.rstudent, 1e-8, 1e-6);
      expectRelativelyClose(d.cooksDistance as number[], ref.cooksDistance, 1e-8, 1e-8);
      expectRelativelyClose(d.dffits as number[], ref.dffits, 1e-8, 1e-6);
    });
  }
});

// Reference: the same R functions on lm(y ~ x, weights = the final MASS::rlm Huber weights); our Huber weights
// agree with MASS to about 1e-9, hence the 1e-6 tolerance.
describe('weighted diagnostics of a robust fit against R lm with its weights', () => {
  for (const name of lineDataNames) {
    it(`${name}, Huber`, () => {
      const ref = rReference[name].huberWeightedDiagnostics;
      const fit = fitRobustLine(datasets[name].x, datasets[name].y, 'huber');
      const d = regressionDiagnostics(datasets[name].x, datasets[name].y, fit);
      expectRelativelyClose(d.hat, ref.hat, 1e-6);
      expectRelativelyClose(d.studentizedResiduals as number[], ref.rstudent, 1e-6, 1e-3);
      expectRelativelyClose(d.cooksDistance as number[], ref.cooksDistance, 1e-6, 1e-6);
      expectRelativelyClose(d.dffits as number[], ref.dffits, 1e-6, 1e-3);
      expect(d.weights).toEqual(fit.weights);
    });
  }

  it('samples with weight 0 have no influence on the weighted step', () => {
    const { x, y, outliers } = datasets.badLeverage;
    const d = regressionDiagnostics(x, y, fitMMLine(x, y));
    for (const i of outliers!) {
      expect(d.cooksDistance[i - 1]).toBe(0);
      expect(d.dffits[i - 1]).toBe(0);
      expect(Math.abs(d.studentizedResiduals[i - 1]!)).toBeGreaterThan(10);
    }
  });
});

describe('diagnostic flags', () => {
  it('flag the bad leverage points with named thresholds: high leverage in OLS, low weight and outlying in MM', () => {
    const { x, y, outliers } = datasets.badLeverage;
    const n = x.length;
    const olsFlags = diagnosticFlags(regressionDiagnostics(x, y));
    // in the MM fit these samples have weight 0, so their hat value in its weighted step is 0
    const mmFlags = diagnosticFlags(regressionDiagnostics(x, y, fitMMLine(x, y)));
    for (const i of outliers!) {
      const ols = olsFlags.find((f) => f.index === i - 1)!;
      const leverage = ols.flags.find((f) => f.kind === 'highLeverage')!;
      expect(leverage).toMatchObject({ rule: 'h > 2p/n' });
      expect(leverage.threshold).toBeCloseTo(4 / n, 15);
      const mm = mmFlags.find((f) => f.index === i - 1)!;
      expect(mm.flags.map((f) => f.kind)).toEqual(['largeResidual', 'lowWeight']);
      const lowWeight = mm.flags.find((f) => f.kind === 'lowWeight')!;
      expect(lowWeight).toMatchObject({ threshold: 0.25, rule: 'weight < 0.25', value: 0 });
      expect(lowWeight.message).toContain(`sample ${i}`);
    }
  });

  it('thresholds follow the rules exactly: h > 2p/n, Cook > 4/n, |t| > 3', () => {
    const { x, y } = datasets.yOutliers;
    const d = regressionDiagnostics(x, y);
    const n = x.length;
    const flags = diagnosticFlags(d);
    for (let i = 0; i < n; i++) {
      const kinds = flags.find((f) => f.index === i)?.flags.map((f) => f.kind) ?? [];
      expect(kinds.includes('highLeverage')).toBe(d.hat[i] > 4 / n);
      expect(kinds.includes('influential')).toBe(d.cooksDistance[i]! > 4 / n);
      expect(kinds.includes('largeResidual')).toBe(Math.abs(d.studentizedResiduals[i]!) > 3);
      expect(kinds.includes('lowWeight')).toBe(false); // OLS has no weights
    }
    // the shifted samples of generate.R are the ones with large studentized residuals
    const large = flags.filter((f) => f.flags.some((g) => g.kind === 'largeResidual')).map((f) => f.index + 1);
    expect(large.every((i) => datasets.yOutliers.outliers!.includes(i))).toBe(true);
    expect(large.length).toBeGreaterThan(0);
  });

  it('a sample with hat value 1 gets null (undefined) statistics, not NaN', () => {
    const d = regressionDiagnostics([1, 1, 1, 5], [1, 2, 3, 9]);
    expect(d.hat[3]).toBeCloseTo(1, 12);
    expect(d.studentizedResiduals[3]).toBeNull();
    expect(d.cooksDistance[3]).toBeNull();
  });

  it.each([
    ['fewer than 3 pairs', () => regressionDiagnostics([1, 2], [1, 2]), /at least 3 pairs/],
    ['fit of another size', () => regressionDiagnostics([1, 2, 3, 4], [1, 2, 3, 5], fitRobustLine([1, 2, 3], [1, 2, 4], 'huber')), /fit was made on 3 samples but 4 were given/],
  ])('%s throws StatsInputError', (_, run, message) => {
    expect(run).toThrow(StatsInputError);
    expect(run).toThrow(message);
  });
});
