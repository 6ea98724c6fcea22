import { describe, expect, it } from 'vitest';
import { decimalsFor, fixed, interval, tickLabel } from '../../../../src/components/analysis/format';

describe('table numbers', () => {
  it('gives the largest magnitude of a column four significant figures', () => {
    expect(decimalsFor([1.0312, 0.98])).toBe(3);
    expect(decimalsFor([126.4, 4.3])).toBe(1);
    expect(decimalsFor([2540, 12])).toBe(0);
    expect(decimalsFor([0.00123])).toBe(6);
    expect(decimalsFor([null, undefined])).toBe(2);
  });

  it('writes a true minus sign, no negative zero, and a dash for a missing value', () => {
    expect(fixed(-0.5, 2)).toBe('−0.50');
    expect(fixed(-0.001, 2)).toBe('0.00');
    expect(fixed(undefined, 2)).toBe('—');
    expect(fixed(Number.NaN, 2)).toBe('—');
    expect(interval([0.98, 1.04], 3)).toBe('0.980 to 1.040');
    expect(interval(undefined, 3)).toBe('—');
  });

  it('labels ticks with as few decimals as their step needs', () => {
    expect(tickLabel(0.25, [0, 0.25, 0.5])).toBe('0.25');
    expect(tickLabel(200, [0, 100, 200])).toBe('200');
    expect(tickLabel(-0.1, [-0.1, 0, 0.1])).toBe('−0.1');
  });
});
