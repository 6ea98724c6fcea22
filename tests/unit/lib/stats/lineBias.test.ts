import { describe, expect, it } from 'vitest';
import { lineBias } from '../../../../src/lib/stats/lineBias';

// B(X_c) = a + (b − 1)·X_c (STATISTICS.md); the values below are worked by hand.
describe('lineBias', () => {
  it('a = 2, b = 1.03 at 126: 2 + 0.03·126 = 5.78, 4.587 %', () => {
    const { bias, percentBias } = lineBias(2, 1.03, 126);
    expect(bias).toBeCloseTo(5.78, 12);
    expect(percentBias).toBeCloseTo(578 / 126, 10);
  });

  it('the identity line has no bias anywhere; a pure slope error grows with the level', () => {
    expect(lineBias(0, 1, 70).bias).toBe(0);
    expect(lineBias(0, 0.95, 200).bias).toBeCloseTo(-10, 12);
    expect(lineBias(0, 0.95, 200).percentBias).toBeCloseTo(-5, 12);
  });
});
