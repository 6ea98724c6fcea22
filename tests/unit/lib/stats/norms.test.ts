import { describe, expect, it } from 'vitest';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import {
  hampelNorm,
  LineFinal,
  LineStep,
  huberNorm,
  leastSquaresNorm,
  normByKey,
  tukeyBisquareNorm,
  type RobustNorm,
} from '../../../../src/lib/stats/norms';
import { expectRelativelyClose, rReference, statsmodelsReference } from './robustFixtures';

const grid: number[] = rReference.normValues.u;
const norms: Record<'huber' | 'tukey' | 'hampel', RobustNorm> = {
  huber: huberNorm(),
  tukey: tukeyBisquareNorm(),
  hampel: hampelNorm(),
};

describe('ψ families against MASS and statsmodels', () => {
  for (const key of ['huber', 'tukey', 'hampel'] as const) {
    it(`${key}: weights and ψ′ equal MASS::psi.${key === 'tukey' ? 'bisquare' : key}(u, deriv = 0 / 1) (MASS 7.3-58.2)`, () => {
      const norm = norms[key];
      expectRelativelyClose(grid.map((u) => norm.weight(u)), rReference.normValues[key].weights, 1e-12, 1e-12);
      expectRelativelyClose(grid.map((u) => norm.psiDeriv(u)), rReference.normValues[key].psiDeriv, 1e-12, 1e-12);
    });
    it(`${key}: ψ and weights equal statsmodels 0.13.5 norms`, () => {
      const norm = norms[key];
      const ref = statsmodelsReference.normValues[key];
      // statsmodels 0.13.5 Hampel.psi returns ψ(|u|) for u < −a (a sign slip), so ψ is compared at |u| there
      const reference = key === 'hampel' ? grid.map((u, i) => Math.sign(u) * Math.abs(ref.psi[i])) : ref.psi;
      expectRelativelyClose(grid.map((u) => norm.psi(u)), reference, 1e-12, 1e-12);
      expectRelativelyClose(grid.map((u) => norm.weight(u)), ref.weights, 1e-12, 1e-12);
    });
  }

  it('huber and tukey: ρ(u) − ρ(0) equals statsmodels 0.13.5 HuberT / TukeyBiweight rho (which puts ρ(0) at −c²/6 for Tukey)', () => {
    for (const key of ['huber', 'tukey'] as const) {
      const norm = norms[key];
      const ref: number[] = statsmodelsReference.normValues[key].rho;
      const atZero = ref[grid.indexOf(0)];
      expectRelativelyClose(
        grid.map((u) => norm.rho(u) - norm.rho(0)),
        ref.map((v) => v - atZero),
        1e-12,
        1e-12,
      );
    }
  });

  it("hampel: ρ′ = ψ from statsmodels 0.13.5 Hampel (its own rho is not used: that version's Hampel rho is wrong beyond a)", () => {
    const h = 1e-6;
    const derivative = grid.map((u) => (norms.hampel.rho(u + h) - norms.hampel.rho(u - h)) / (2 * h));
    const psi: number[] = statsmodelsReference.normValues.hampel.psi;
    // away from the kinks at ±a, ±b, ±c the central difference is exact up to rounding
    expectRelativelyClose(derivative, grid.map((u, i) => Math.sign(u) * Math.abs(psi[i])), 1e-6, 1e-3);
    expect(norms.hampel.rho(100)).toBeCloseTo(norms.hampel.rho(8), 12);
  });
});

describe('norm properties', () => {
  it('weight(0) is the limit 1 and weight = ψ(u)/u elsewhere', () => {
    for (const norm of [...Object.values(norms), leastSquaresNorm()]) {
      expect(norm.weight(0)).toBe(1);
      for (const u of [-6, -2.2, 0.7, 3.1, 5]) expect(norm.weight(u)).toBeCloseTo(norm.psi(u) / u, 14);
    }
  });

  it('convexity flags: Huber and least squares convex, Tukey and Hampel not', () => {
    expect([huberNorm().convex, leastSquaresNorm().convex, tukeyBisquareNorm().convex, hampelNorm().convex]).toEqual([
      true,
      true,
      false,
      false,
    ]);
  });

  it('normByKey gives defaults and passes tuning', () => {
    expect(normByKey('huber').tuning).toEqual([1.345]);
    expect(normByKey('tukey').tuning).toEqual([4.685]);
    expect(normByKey('hampel').tuning).toEqual([2, 4, 8]);
    expect(normByKey('tukey', [3]).weight(3)).toBe(0);
  });
});

describe('bad tuning constants', () => {
  it.each([
    ['huber t = 0', () => huberNorm(0), /tuning must be a finite number above 0/],
    ['tukey c < 0', () => tukeyBisquareNorm(-1), /tuning must be a finite number above 0/],
    ['hampel a = 0', () => hampelNorm(0, 4, 8), /tuning\.a must be a finite number above 0/],
    ['hampel not a < b < c', () => hampelNorm(2, 8, 4), /a < b < c/],
    ['hampel NaN', () => hampelNorm(2, Number.NaN, 8), /tuning\.b/],
    ['wrong number of constants', () => normByKey('hampel', [1, 2]), /hampel takes 3 tuning constants \(got 2\)/],
  ])('%s throws StatsInputError', (_, make, message) => {
    expect(make).toThrow(StatsInputError);
    expect(make).toThrow(message);
  });
});

describe('the weights array form', () => {
  // residuals across every piece of every family: inside, between the breakpoints, beyond, and exactly 0
  const residuals = Float64Array.from([0, 0.3, -0.9, 1.2, -2.5, 3.1, -4.2, 5.5, -6.8, 7.9, -9.5, 14, -40]);
  const families = [leastSquaresNorm(), huberNorm(), huberNorm(2), tukeyBisquareNorm(), tukeyBisquareNorm(3), hampelNorm(), hampelNorm(1.5, 3.5, 8)];
  for (const norm of families) {
    it(`${norm.name} ${norm.tuning.join(', ')}: weights equal the scalar weight at r/s`, () => {
      for (const scale of [0.7, 1, 2.3]) {
        const out = new Float64Array(residuals.length);
        norm.weights(residuals, scale, out);
        residuals.forEach((r, i) => expect(out[i]).toBeCloseTo(norm.weight(r / scale), 12));
      }
    });
  }
});

describe('the line passes', () => {
  // residuals across every piece of every family (as above), on x values around a centre
  const residuals = [0, 0.3, -0.9, 1.2, -2.5, 3.1, -4.2, 5.5, -6.8, 7.9, -9.5, 14, -40];
  const xs = Float64Array.from(residuals, (_, i) => 10 + 3 * i);
  const [a, b] = [1.5, 0.8];
  const y = Float64Array.from(residuals, (r, i) => a + b * xs[i] + r);
  const families = [leastSquaresNorm(), huberNorm(), huberNorm(2), tukeyBisquareNorm(), tukeyBisquareNorm(3), hampelNorm(), hampelNorm(1.5, 3.5, 8)];
  const centre = 25;
  for (const norm of families) {
    it(`${norm.name} ${norm.tuning.join(', ')}: the sums of w and ψ′ times 1, d, d², r, r·d equal those from the scalar forms`, () => {
      for (const scale of [0.7, 1, 2.3]) {
        const work = { xs, centre, y, sums: new Float64Array(LineStep.size) };
        norm.lineStep(work, a, b, scale);
        const expected = new Array<number>(LineStep.size).fill(0);
        residuals.forEach((r, i) => {
          const d = xs[i] - centre;
          const w = norm.weight(r / scale);
          const p = norm.psiDeriv(r / scale);
          const terms = [w, w * d, w * d * d, w * r, w * r * d, p, p * d, p * d * d, p * r, p * r * d];
          terms.forEach((t, k) => (expected[k] += t));
        });
        expected.forEach((v, k) => expect(work.sums[k]).toBeCloseTo(v, 9));
      }
    });
  }
  for (const norm of families) {
    it(`${norm.name} ${norm.tuning.join(', ')}: weights, weighted moments and the sandwich's sums equal the scalar forms`, () => {
      for (const scale of [0.7, 1, 2.3]) {
        const work = { xs, centre, y, sums: new Float64Array(LineStep.size) };
        const weights = new Array<number>(residuals.length);
        norm.lineFinal(work, a, b, scale, weights);
        const expected = [0, 0, 0, 0, 0, 0];
        residuals.forEach((r, i) => {
          const d = xs[i] - centre;
          const u = r / scale;
          const w = norm.weight(u);
          expect(weights[i]).toBeCloseTo(w, 12);
          const terms = [w, w * d, w * d * d, norm.psi(u) ** 2, norm.psiDeriv(u), norm.psiDeriv(u) ** 2];
          terms.forEach((t, k) => (expected[k] += t));
        });
        expected.forEach((v, k) => expect(work.sums[LineFinal[(['w', 'wd', 'wdd', 'psi2', 'dpsi', 'dpsi2'] as const)[k]]]).toBeCloseTo(v, 9));
      }
    });
  }
});
