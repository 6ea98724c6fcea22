import { describe, expect, it } from 'vitest';
import { decimalsFor, fixed, interval, utc } from '../../../../src/server/report/format';

describe('report number text', () => {
  it('gives a column three significant figures at its largest magnitude', () => {
    expect(decimalsFor([126, 54])).toBe(0);
    expect(decimalsFor([4.56, -0.2])).toBe(2);
    expect(decimalsFor([12.4, 3])).toBe(1);
    expect(decimalsFor([0.98, 1.03])).toBe(2);
    expect(decimalsFor([0.0001234])).toBe(4);
    expect(decimalsFor([0, 0])).toBe(2);
  });

  it('writes a true minus sign, and no sign for a value that rounds to zero', () => {
    expect(fixed(-2.345, 2)).toBe('\u22122.35');
    expect(fixed(-0.04, 1)).toBe('0.0');
    expect(fixed(3, 1)).toBe('3.0');
    expect(interval([-1.5, 2.25], 1)).toBe('\u22121.5 to 2.3');
  });

  it('writes stored timestamps as UTC to the second', () => {
    expect(utc('2026-11-20T09:15:02.123Z')).toBe('2026-11-20 09:15:02 UTC');
  });
});
