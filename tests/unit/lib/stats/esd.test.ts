import { describe, expect, it } from 'vitest';
import { generalizedEsd, maxOutliersForShare } from '../../../../src/lib/stats/esd';
import fixture from '../../../fixtures/classical/esd.json';

// The 54 values of Rosner's example as shown in the NIST/SEMATECH e-Handbook, 1.3.5.17 (values from memory).
const rosnerExample = fixture.cases[0].values;

// Test statistics R_i and critical values λ_i for r = 10, α = 0.05 as tabulated in the e-Handbook
// (from memory; the table shows three decimals and reports 3 outliers).
const handbookTable: Array<[number, number]> = [
  [3.118, 3.158],
  [2.942, 3.151],
  [3.179, 3.143],
  [2.81, 3.136],
  [2.815, 3.128],
  [2.848, 3.12],
  [2.279, 3.111],
  [2.31, 3.103],
  [2.101, 3.094],
  [2.067, 3.085],
];

describe('generalizedEsd', () => {
  it('reproduces the e-Handbook worked example (values and table from memory): 3 outliers', () => {
    const result = generalizedEsd(rosnerExample, { alpha: 0.05, maxOutliers: 10 });
    expect(result.outlierCount).toBe(3);
    expect(result.outlierIndices.map((i) => rosnerExample[i])).toEqual([6.01, 5.42, 5.34]);
    result.steps.forEach((step, k) => {
      // The table's three decimals look truncated, hence 0.0015.
      expect(Math.abs(step.statistic - handbookTable[k][0])).toBeLessThanOrEqual(0.0015);
      expect(Math.abs(step.critical - handbookTable[k][1])).toBeLessThanOrEqual(0.0015);
    });
  });

  for (const data of fixture.cases) {
    it(`matches the Rosner procedure with scipy.stats.t.ppf (scipy ${fixture.scipy}, generate_esd.py) on ${data.name}`, () => {
      const result = generalizedEsd(data.values, { alpha: data.alpha, maxOutliers: data.maxOutliers });
      expect(result.outlierCount).toBe(data.outlierCount);
      expect(result.steps.map((s) => s.index)).toEqual(data.steps.map((s) => s.index));
      result.steps.forEach((step, k) => {
        expect(step.statistic).toBeCloseTo(data.steps[k].statistic, 10);
        expect(step.critical).toBeCloseTo(data.steps[k].critical, 8);
        expect(step.value).toBe(data.values[step.index]);
      });
      expect(result.outlierIndices).toEqual(data.steps.slice(0, data.outlierCount).map((s) => s.index));
    });
  }

  it('stops when the values left are all equal', () => {
    const result = generalizedEsd([5, 5, 5, 5, 5, 5, 5, 5, 5, 50], { maxOutliers: 3 });
    expect(result.steps).toHaveLength(1);
    expect(result.outlierIndices).toEqual([9]);
  });

  it('refuses bad input with StatsInputError', () => {
    expect(() => generalizedEsd([1, 2], { maxOutliers: 0 })).toThrow(/at least 3 values/);
    expect(() => generalizedEsd([1, 2, Number.NaN], { maxOutliers: 1 })).toThrow(/values\[2\] is not a finite number/);
    expect(() => generalizedEsd([1, 2, 3, 4], { maxOutliers: 3 })).toThrow(/maxOutliers must be a whole number from 0 to n − 2 = 2/);
    expect(() => generalizedEsd([1, 2, 3, 4], { maxOutliers: 1, alpha: 1.5 })).toThrow(/alpha/);
  });
});

describe('maxOutliersForShare', () => {
  it('is floor(2.5 % of n), at least 1 from n = 10, and 0 below 10', () => {
    expect(maxOutliersForShare(9)).toBe(0);
    expect(maxOutliersForShare(10)).toBe(1);
    expect(maxOutliersForShare(79)).toBe(1);
    expect(maxOutliersForShare(80)).toBe(2);
    expect(maxOutliersForShare(120)).toBe(3);
    expect(maxOutliersForShare(100, 0.1)).toBe(10);
    expect(() => maxOutliersForShare(-1)).toThrow(/n must be a whole number/);
    expect(() => maxOutliersForShare(10, 0)).toThrow(/share/);
  });
});
