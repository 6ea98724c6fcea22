import { describe, expect, it } from 'vitest';
import { blandAltman } from '../../../../src/lib/stats/blandAltman';

// Bland & Altman, Lancet 1986: peak expiratory flow (l/min), first readings, 17 subjects (data as in STATISTICS.md).
const wright = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427];
const miniWright = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451];

describe('blandAltman', () => {
  // The paper reports Wright − mini; our differences are y − x, so x = mini Wright, y = Wright.
  it('reproduces the published mean difference, SD and limits (Bland & Altman, Lancet 1986)', () => {
    const ba = blandAltman(miniWright, wright, { multiplier: 2 }); // the paper uses mean ± 2 SD
    expect(ba.n).toBe(17);
    expect(ba.meanDifference).toBeCloseTo(-2.1, 1);
    expect(ba.sdDifference).toBeCloseTo(38.8, 1);
    // The paper's limits are built from the mean and SD rounded to 0.1 (−2.1 ± 2·38.8),
    // so they can be off by up to 0.05 + 2·0.05 = 0.15 from the unrounded ones.
    expect(Math.abs(ba.lowerLoA - -79.7)).toBeLessThanOrEqual(0.15);
    expect(Math.abs(ba.upperLoA - 75.5)).toBeLessThanOrEqual(0.15);
    expect(ba.differences[0]).toBe(494 - 512);
    expect(ba.means[0]).toBe((494 + 512) / 2);
  });

  it('gives the approximate intervals of Bland & Altman (Stat Methods Med Res 1999)', () => {
    const ba = blandAltman(miniWright, wright);
    // t(0.975, 16 df) = 2.120 from a t table (any statistics text); SE(d̄) = s/√n, SE(limit) = s·√(1/n + 1.96²/(2(n − 1))).
    const t = 2.1199;
    const s = ba.sdDifference;
    expect(ba.meanDifferenceCI[1] - ba.meanDifference).toBeCloseTo((t * s) / Math.sqrt(17), 2);
    expect(ba.meanDifference - ba.meanDifferenceCI[0]).toBeCloseTo((t * s) / Math.sqrt(17), 2);
    const limitHalfWidth = t * s * Math.sqrt(1 / 17 + 1.96 ** 2 / 32);
    expect(ba.upperLoACI[1] - ba.upperLoA).toBeCloseTo(limitHalfWidth, 2);
    expect(ba.lowerLoA - ba.lowerLoACI[0]).toBeCloseTo(limitHalfWidth, 2);
    expect(ba.upperLoA).toBeCloseTo(ba.meanDifference + 1.96 * s, 10);
  });

  it('computes percent differences 100·(y − x)/((x + y)/2)', () => {
    const ba = blandAltman([100, 200, 50], [110, 180, 50], { kind: 'percent' });
    expect(ba.kind).toBe('percent');
    // Hand arithmetic: 100·10/105, 100·(−20)/190, 0.
    expect(ba.differences[0]).toBeCloseTo(9.5238095, 6);
    expect(ba.differences[1]).toBeCloseTo(-10.5263158, 6);
    expect(ba.differences[2]).toBe(0);
  });

  it('refuses bad input with StatsInputError', () => {
    expect(() => blandAltman([-1, 1, 2], [1, 2, 3], { kind: 'percent' })).toThrow(/pair 0 has mean 0/);
    expect(() => blandAltman([1, 2], [1, 2])).toThrow(/at least 3 pairs/);
    expect(() => blandAltman([1, 2, 3], [1, Number.NaN, 3])).toThrow(/y\[1\] is not a finite number/);
    expect(() => blandAltman([1, 2, 3], [1, 2])).toThrow(/same length/);
    expect(() => blandAltman([5, 5, 5], [1, 2, 3])).toThrow(/all x values are equal/);
    expect(() => blandAltman([1, 2, 3], [1, 2, 4], { multiplier: 0 })).toThrow(/multiplier/);
  });
});
