import { describe, expect, it } from 'vitest';
import { fitDeming, fitWeightedDeming, lambdaFromDuplicates } from '../../../../src/lib/stats/deming';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import fixture from '../../../fixtures/classical/deming.json';

// Reference values: tests/fixtures/classical/generate_odr.py (scipy and numpy versions recorded in deming.json).

function expectRelativelyClose(actual: number, expected: number, tolerance: number): void {
  expect(Math.abs(actual - expected)).toBeLessThanOrEqual(tolerance * Math.max(Math.abs(expected), 1e-12));
}

describe('fitDeming', () => {
  for (const data of fixture.deming) {
    it(`matches scipy.odr (ODR, linear model, sy²/sx² = λ; scipy ${fixture.scipy}) on ${data.name}`, () => {
      const fit = fitDeming(data.x, data.y, { lambda: data.lambda });
      expectRelativelyClose(fit.slope, data.odrSlope, 1e-6);
      expectRelativelyClose(fit.intercept, data.odrIntercept, 1e-6);
      expect(fit.lambda).toBe(data.lambda);
      expect(fit.method).toBe('deming');
    });

    it(`matches the leave-one-out jackknife computed with numpy ${fixture.numpy} in the fixture script on ${data.name}`, () => {
      const fit = fitDeming(data.x, data.y, { lambda: data.lambda });
      const cov = fit.covariance!;
      expectRelativelyClose(cov[0][0], data.jackknifeCovariance[0][0], 1e-8);
      expectRelativelyClose(cov[0][1], data.jackknifeCovariance[0][1], 1e-8);
      expectRelativelyClose(cov[1][0], data.jackknifeCovariance[1][0], 1e-8);
      expectRelativelyClose(cov[1][1], data.jackknifeCovariance[1][1], 1e-8);
      expect(fit.df).toBe(data.x.length - 2);
      // Interval half-width = t(0.975, n − 2) · jackknife SE, t from scipy.stats.t.ppf.
      const slopeHalfWidth = data.t975 * Math.sqrt(data.jackknifeCovariance[1][1]);
      expectRelativelyClose(fit.slopeCI[1] - fit.slope, slopeHalfWidth, 1e-8);
      expectRelativelyClose(fit.slope - fit.slopeCI[0], slopeHalfWidth, 1e-8);
      const interceptHalfWidth = data.t975 * Math.sqrt(data.jackknifeCovariance[0][0]);
      expectRelativelyClose(fit.interceptCI[1] - fit.intercept, interceptHalfWidth, 1e-8);
    });
  }

  it('refuses bad input with StatsInputError', () => {
    expect(() => fitDeming([1, 2], [1, 2])).toThrow(/at least 3 pairs/);
    expect(() => fitDeming([2, 2, 2], [1, 2, 3])).toThrow(/all x values are equal/);
    expect(() => fitDeming([1, 2, Number.NaN], [1, 2, 3])).toThrow(/x\[2\] is not a finite number/);
    expect(() => fitDeming([1, 2, 3], [1, 2])).toThrow(/same length/);
    expect(() => fitDeming([1, 2, 3], [1, 2, 4], { lambda: 0 })).toThrow(/lambda must be a finite number above 0/);
    expect(() => fitDeming([1, 2, 3], [1, 2, 4], { lambda: -1 })).toThrow(StatsInputError);
    expect(() => fitDeming([1, 2, 3], [1, 2, 4], { confidence: 95 })).toThrow(/confidence must be between 0 and 1/);
  });

  it('refuses uncorrelated data, where the slope is undefined', () => {
    // Σ(x−x̄)(y−ȳ) = 0 and the y spread exceeds the x spread: the Deming line would be vertical.
    expect(() => fitDeming([-1, 0, 1, 0], [0, 5, 0, -5])).toThrow(/uncorrelated/);
  });
});

describe('fitWeightedDeming', () => {
  for (const data of fixture.weightedDeming) {
    it(`matches the independent Linnet (1990) iteration in the fixture script on ${data.name}`, () => {
      const fit = fitWeightedDeming(data.x, data.y, { lambda: data.lambda });
      expect(fit.converged).toBe(true);
      expect(fit.method).toBe('weightedDeming');
      expectRelativelyClose(fit.slope, data.slope, 1e-8);
      expectRelativelyClose(fit.intercept, data.intercept, 1e-7);
      fit.precisionWeights.forEach((w, i) => expectRelativelyClose(w, data.weights[i], 1e-7));
    });

    it(`agrees with scipy.odr refitted at the final weights (scipy ${fixture.scipy}) on ${data.name}`, () => {
      const fit = fitWeightedDeming(data.x, data.y, { lambda: data.lambda });
      expectRelativelyClose(fit.slope, data.odrSlopeAtFinalWeights, 1e-6);
      expectRelativelyClose(fit.intercept, data.odrInterceptAtFinalWeights, 1e-6);
    });

    it(`matches the leave-one-out jackknife of the fixture script's iteration on ${data.name}`, () => {
      const fit = fitWeightedDeming(data.x, data.y, { lambda: data.lambda });
      const cov = fit.covariance!;
      expectRelativelyClose(cov[0][0], data.jackknifeCovariance[0][0], 1e-6);
      expectRelativelyClose(cov[0][1], data.jackknifeCovariance[0][1], 1e-6);
      expectRelativelyClose(cov[1][1], data.jackknifeCovariance[1][1], 1e-6);
      const slopeHalfWidth = data.t975 * Math.sqrt(data.jackknifeCovariance[1][1]);
      expectRelativelyClose(fit.slopeCI[1] - fit.slope, slopeHalfWidth, 1e-6);
    });
  }

  it('reports non-convergence when the iteration cap is too low', () => {
    const data = fixture.weightedDeming[0];
    const fit = fitWeightedDeming(data.x, data.y, { maxIterations: 1 });
    expect(fit.converged).toBe(false);
    expect(fit.iterations).toBe(1);
  });

  it('refuses values that are not above 0, naming the sample', () => {
    expect(() => fitWeightedDeming([1, 0, 3], [1, 2, 3])).toThrow(/x\[1\] is 0.*above 0/);
    expect(() => fitWeightedDeming([1, 2, 3], [1, 2, -3])).toThrow(/y\[2\] is -3/);
    expect(() => fitWeightedDeming([1, 2], [1, 2])).toThrow(/at least 3 pairs/);
    expect(() => fitWeightedDeming([1, 2, 3], [1, 2, 4], { lambda: 0 })).toThrow(/lambda/);
  });
});

describe('lambdaFromDuplicates', () => {
  it('is Σ(y₁ − y₂)² / Σ(x₁ − x₂)²', () => {
    // Σ(x₁ − x₂)² = 1 + 4 = 5, Σ(y₁ − y₂)² = 9 + 0 = 9 (hand arithmetic).
    expect(lambdaFromDuplicates([1, 2], [2, 4], [1, 1], [4, 1])).toBeCloseTo(9 / 5, 15);
  });

  it('refuses duplicates that cannot give a ratio', () => {
    expect(() => lambdaFromDuplicates([1, 2], [1, 2], [1, 1], [4, 1])).toThrow(/comparative duplicates are identical/);
    expect(() => lambdaFromDuplicates([1, 2], [2, 3], [1, 1], [1, 1])).toThrow(/candidate duplicates are identical/);
    expect(() => lambdaFromDuplicates([1, 2], [2], [1, 1], [4, 1])).toThrow(/x2 must have the same length/);
    expect(() => lambdaFromDuplicates([1, Number.POSITIVE_INFINITY], [2, 3], [1, 1], [4, 1])).toThrow(/x1\[1\]/);
  });
});
