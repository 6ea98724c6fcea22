import { describe, expect, it } from 'vitest';
import { AndersonAcceleration, iterateToFixedPoint, relativeChange } from '../../../../src/lib/stats/acceleration';

const absoluteChange = (from: Float64Array, to: Float64Array) => Math.hypot(...Array.from(to, (v, j) => v - from[j]));

describe('iterateToFixedPoint', () => {
  it('finds the fixed point of cos: cos(x) = x to 1e-12, in fewer steps than the plain iteration', () => {
    const cos = (b: Float64Array) => Float64Array.of(Math.cos(b[0]));
    const accelerated = iterateToFixedPoint(cos, absoluteChange, Float64Array.of(1), 1e-13, 500);
    const plain = iterateToFixedPoint(cos, absoluteChange, Float64Array.of(1), 1e-13, 500, false);
    for (const result of [accelerated, plain]) {
      expect(result.converged).toBe(true);
      expect(Math.abs(Math.cos(result.beta[0]) - result.beta[0])).toBeLessThan(1e-12);
    }
    expect(accelerated.iterations).toBeLessThan(plain.iterations / 2);
  });

  it('a linear contraction β ← Aβ + c lands on the solution of (I − A)β = c', () => {
    // A with eigenvalues 0.9 and 0.5: the plain iteration needs ~250 steps to 1e-12
    const step = (b: Float64Array) => Float64Array.of(0.7 * b[0] + 0.2 * b[1] + 1, 0.2 * b[0] + 0.7 * b[1] - 2);
    const result = iterateToFixedPoint(step, absoluteChange, Float64Array.of(0, 0), 1e-12, 1000);
    // (I − A) = [[0.3, −0.2], [−0.2, 0.3]], det 0.05: β = [ (0.3·1 + 0.2·(−2)) / 0.05, (0.2·1 + 0.3·(−2)) / 0.05 ] = [−2, −8]
    expect(result.beta[0]).toBeCloseTo(-2, 10);
    expect(result.beta[1]).toBeCloseTo(-8, 10);
    expect(result.iterations).toBeLessThan(100);
  });

  it('stops at maxIterations and says it did not converge', () => {
    const slow = (b: Float64Array) => Float64Array.of(0.999 * b[0] + 1);
    const result = iterateToFixedPoint(slow, absoluteChange, Float64Array.of(0), 1e-300, 7, false);
    expect(result.iterations).toBe(7);
    expect(result.converged).toBe(false);
  });

  it('keeps plain steps far from the solution, so that the first steps equal plain IRLS', () => {
    const seen: number[] = [];
    const step = (b: Float64Array) => {
      seen.push(b[0]);
      return Float64Array.of(0.5 * b[0] + 1);
    };
    iterateToFixedPoint(step, (u, v) => Math.abs(v[0] - u[0]) / Math.abs(u[0] || 1), Float64Array.of(1000), 1e-12, 200);
    // plain halving towards 2 from 1000: relative steps stay above the threshold for the first iterates
    expect(seen.slice(0, 4)).toEqual([1000, 501, 251.5, 126.75]);
  });
});

describe('AndersonAcceleration', () => {
  it('proposes nothing until it has two steps of history', () => {
    const acceleration = new AndersonAcceleration(1);
    expect(acceleration.propose(Float64Array.of(0), Float64Array.of(1))).toBeNull();
    expect(acceleration.propose(Float64Array.of(1), Float64Array.of(1.5))).not.toBeNull();
    acceleration.reset();
    expect(acceleration.propose(Float64Array.of(1), Float64Array.of(1.5))).toBeNull();
  });
});

describe('relativeChange', () => {
  it('is ‖next − previous‖/‖previous‖, over the first entries when a length is given', () => {
    // by hand: ‖(0, 0.002)‖ / ‖(1, 2)‖ = 0.002 / √5
    expect(relativeChange(Float64Array.of(1, 2), Float64Array.of(1, 2.002))).toBeCloseTo(0.002 / Math.sqrt(5), 15);
    expect(relativeChange(Float64Array.of(1, 2, 100), Float64Array.of(1, 2.002, 5), 2)).toBeCloseTo(0.002 / Math.sqrt(5), 15);
  });
});
