import { StatsInputError } from './errors';
import { validatePositive } from './validate';

/**
 * One ψ family for M-estimation, on standardized residuals u = r / s:
 * ρ (the loss), ψ = ρ′, ψ′, and the IRLS weight w(u) = ψ(u) / u (w(0) is its limit, 1 for all families here).
 * `convex` tells whether ρ is convex; when it is not, IRLS can stop in a local minimum and the start matters.
 */
export interface RobustNorm {
  name: 'leastSquares' | 'huber' | 'tukey' | 'hampel';
  tuning: number[];
  convex: boolean;
  rho(u: number): number;
  psi(u: number): number;
  psiDeriv(u: number): number;
  weight(u: number): number;
  /** w(rᵢ/s) for every residual, into `out`: IRLS's inner loop, so that it runs one family's code only. */
  weights(residuals: Float64Array, scale: number, out: Float64Array): void;
  /**
   * The sums of a straight line's M-step at (a, b) with scale s, in one pass (LinearDesign.mStep): with residuals
   * r = y − a − b·x, d = x − centre, w = w(r/s) and ψ′ = ψ′(r/s), Σw, Σw·d, Σw·d², Σw·r, Σw·r·d, Σψ′, Σψ′·d, Σψ′·d²,
   * Σψ′·r, Σψ′·r·d, into work.sums (layout LineStep).
   */
  lineStep(work: LineStepWork, a: number, b: number, scale: number): void;
  /**
   * The final pass of a straight line's M-estimate at (a, b) with scale s (LinearDesign.mFinal): w(rᵢ/s) into
   * `weights`, and with d = x − centre, u = r/s, the sums Σw, Σw·d, Σw·d², Σψ(u)², Σψ′(u), Σψ′(u)² into work.sums
   * (layout LineFinal).
   */
  lineFinal(work: LineStepWork, a: number, b: number, scale: number, weights: number[]): void;
}

/** What RobustNorm.lineStep reads (x, its centre, y) and writes (`sums`). */
export interface LineStepWork {
  xs: Float64Array;
  centre: number;
  y: Float64Array;
  sums: Float64Array;
}

/** Positions in LineStepWork.sums: the cross-products of [1, x − centre] and of the residuals with w and with ψ′. */
export const LineStep = { w: 0, wd: 1, wdd: 2, wr: 3, wrd: 4, dpsi: 5, dpsiD: 6, dpsiDD: 7, dpsiR: 8, dpsiRD: 9, size: 10 } as const;

/** Positions in LineStepWork.sums after RobustNorm.lineFinal: the weighted moments of x − centre, then the sandwich's sums. */
export const LineFinal = { w: 0, wd: 1, wdd: 2, psi2: 3, dpsi: 4, dpsi2: 5 } as const;

/** Stores the sums of a final pass (each family's lineFinal ends with this). */
function storeLineFinal(sums: Float64Array, w: number, wd: number, wdd: number, psi2: number, dpsi: number, dpsi2: number): void {
  sums[0] = w;
  sums[1] = wd;
  sums[2] = wdd;
  sums[3] = psi2;
  sums[4] = dpsi;
  sums[5] = dpsi2;
}

/** Stores the sums of a line step (each family's lineStep ends with this). */
function storeLineStep(
  sums: Float64Array,
  w: number,
  wd: number,
  wdd: number,
  wr: number,
  wrd: number,
  dpsi: number,
  dpsiD: number,
  dpsiDD: number,
  dpsiR: number,
  dpsiRD: number,
): void {
  sums[0] = w;
  sums[1] = wd;
  sums[2] = wdd;
  sums[3] = wr;
  sums[4] = wrd;
  sums[5] = dpsi;
  sums[6] = dpsiD;
  sums[7] = dpsiDD;
  sums[8] = dpsiR;
  sums[9] = dpsiRD;
}

// Each family is a class so that all its instances share one set of methods: IRLS loops call them
// per sample, and shared methods keep those calls cheap (inlined) whatever the tuning constants.
// Each class has its own weights and line-step loops on purpose: a loop shared through a base class would see every
// family at one call site, and V8 stops inlining such (megamorphic) calls. They are written out with the constants on
// the scale of r; norms.test.ts checks them against weight(u) and psiDeriv(u) for every family.

class LeastSquaresNorm implements RobustNorm {
  readonly name = 'leastSquares' as const;
  readonly tuning: number[] = [];
  readonly convex = true;
  rho(u: number): number {
    return (u * u) / 2;
  }
  psi(u: number): number {
    return u;
  }
  psiDeriv(_u: number): number {
    return 1;
  }
  weight(_u: number): number {
    return 1;
  }
  weights(residuals: Float64Array, scale: number, out: Float64Array): void {
    const k = 1 / scale;
    for (let i = 0; i < residuals.length; i++) out[i] = this.weight(residuals[i] * k);
  }
  lineStep(work: LineStepWork, a: number, b: number, _scale: number): void {
    const { xs, centre, y } = work;
    let sd = 0;
    let sdd = 0;
    let sr = 0;
    let srd = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      sd += d;
      sdd += d * d;
      sr += r;
      srd += r * d;
    }
    const n = xs.length;
    storeLineStep(work.sums, n, sd, sdd, sr, srd, n, sd, sdd, sr, srd);
  }

  lineFinal(work: LineStepWork, a: number, b: number, scale: number, weights: number[]): void {
    const { xs, centre, y } = work;
    let sw = 0;
    let swd = 0;
    let swdd = 0;
    let psi2 = 0;
    let sp = 0;
    let sp2 = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const w = 1;
      const p = 1;
      const wd = w * d;
      weights[i] = w;
      sw += w;
      swd += wd;
      swdd += wd * d;
      psi2 += w * r * (w * r);
      sp += p;
      sp2 += p * p;
    }
    const inverseScale2 = 1 / (scale * scale); // ψ(u) = w·r/s
    storeLineFinal(work.sums, sw, swd, swdd, psi2 * inverseScale2, sp, sp2);
  }

}

class HuberNorm implements RobustNorm {
  readonly name = 'huber' as const;
  readonly convex = true;
  readonly tuning: number[];
  constructor(private readonly t: number) {
    this.tuning = [t];
  }
  rho(u: number): number {
    const a = Math.abs(u);
    return a <= this.t ? (u * u) / 2 : this.t * a - (this.t * this.t) / 2;
  }
  psi(u: number): number {
    return Math.max(-this.t, Math.min(this.t, u));
  }
  psiDeriv(u: number): number {
    return +(Math.abs(u) <= this.t);
  }
  weight(u: number): number {
    const a = Math.abs(u);
    return a <= this.t ? 1 : this.t / a; // most residuals lie inside t: no division for them
  }
  weights(residuals: Float64Array, scale: number, out: Float64Array): void {
    const limit = this.t * scale; // |r| ≤ t·s ⇔ |u| ≤ t
    for (let i = 0; i < residuals.length; i++) {
      const a = Math.abs(residuals[i]);
      out[i] = a <= limit ? 1 : limit / a;
    }
  }
  lineStep(work: LineStepWork, a: number, b: number, scale: number): void {
    const { xs, centre, y } = work;
    const limit = this.t * scale;
    let sw = 0, swd = 0, swdd = 0, swr = 0, swrd = 0;
    let sp = 0, spd = 0, spdd = 0, spr = 0, sprd = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const size = Math.abs(r);
      if (size <= limit) {
        // w = ψ′ = 1 inside t
        sp += 1;
        spd += d;
        spdd += d * d;
        spr += r;
        sprd += r * d;
      } else {
        // outside t: ψ′ = 0 and w·r = ±t·s
        const w = limit / size;
        const wd = w * d;
        const wr = r > 0 ? limit : -limit;
        sw += w;
        swd += wd;
        swdd += wd * d;
        swr += wr;
        swrd += wr * d;
      }
    }
    storeLineStep(work.sums, sw + sp, swd + spd, swdd + spdd, swr + spr, swrd + sprd, sp, spd, spdd, spr, sprd);
  }

  lineFinal(work: LineStepWork, a: number, b: number, scale: number, weights: number[]): void {
    const limit = this.t * scale;
    const { xs, centre, y } = work;
    let sw = 0;
    let swd = 0;
    let swdd = 0;
    let psi2 = 0;
    let sp = 0;
    let sp2 = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const size = Math.abs(r);
      const inside = size <= limit;
      const w = inside ? 1 : limit / size;
      const p = inside ? 1 : 0;
      const wd = w * d;
      weights[i] = w;
      sw += w;
      swd += wd;
      swdd += wd * d;
      psi2 += w * r * (w * r);
      sp += p;
      sp2 += p * p;
    }
    const inverseScale2 = 1 / (scale * scale); // ψ(u) = w·r/s
    storeLineFinal(work.sums, sw, swd, swdd, psi2 * inverseScale2, sp, sp2);
  }

}

class TukeyBisquareNorm implements RobustNorm {
  readonly name = 'tukey' as const;
  readonly convex = false;
  readonly tuning: number[];
  private readonly rhoMax: number;
  constructor(private readonly c: number) {
    this.tuning = [c];
    this.rhoMax = (c * c) / 6;
  }
  rho(u: number): number {
    if (Math.abs(u) > this.c) return this.rhoMax;
    const v = 1 - (u / this.c) ** 2;
    return this.rhoMax * (1 - v * v * v);
  }
  psi(u: number): number {
    if (Math.abs(u) > this.c) return 0;
    const v = 1 - (u / this.c) ** 2;
    return u * v * v;
  }
  psiDeriv(u: number): number {
    if (Math.abs(u) > this.c) return 0;
    const z2 = (u / this.c) ** 2;
    return (1 - z2) * (1 - 5 * z2);
  }
  weight(u: number): number {
    const v = Math.max(0, 1 - (u / this.c) ** 2); // 0 beyond c
    return v * v;
  }
  weights(residuals: Float64Array, scale: number, out: Float64Array): void {
    const q = 1 / (this.c * scale); // u/c = r·q
    for (let i = 0; i < residuals.length; i++) {
      const z = residuals[i] * q;
      const v = 1 - z * z;
      out[i] = v > 0 ? v * v : 0;
    }
  }
  lineStep(work: LineStepWork, a: number, b: number, scale: number): void {
    const { xs, centre, y } = work;
    const q = 1 / (this.c * scale);
    let sw = 0, swd = 0, swdd = 0, swr = 0, swrd = 0;
    let sp = 0, spd = 0, spdd = 0, spr = 0, sprd = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const z = r * q;
      const z2 = z * z;
      const t = 1 - z2;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − z², 0) without a branch; w = v², ψ′ = v·(1 − 5z²), both 0 beyond c
      const w = v * v;
      const p = v * (1 - 5 * z2);
      const wd = w * d;
      const pd = p * d;
      sw += w;
      swd += wd;
      swdd += wd * d;
      swr += w * r;
      swrd += wd * r;
      sp += p;
      spd += pd;
      spdd += pd * d;
      spr += p * r;
      sprd += pd * r;
    }
    storeLineStep(work.sums, sw, swd, swdd, swr, swrd, sp, spd, spdd, spr, sprd);
  }

  lineFinal(work: LineStepWork, a: number, b: number, scale: number, weights: number[]): void {
    const q = 1 / (this.c * scale);
    const { xs, centre, y } = work;
    let sw = 0;
    let swd = 0;
    let swdd = 0;
    let psi2 = 0;
    let sp = 0;
    let sp2 = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const z2 = r * q * (r * q);
      const t = 1 - z2;
      const v = 0.5 * (t + Math.abs(t)); // max(1 − z², 0) without a branch
      const w = v * v;
      const p = v * (1 - 5 * z2);
      const wd = w * d;
      weights[i] = w;
      sw += w;
      swd += wd;
      swdd += wd * d;
      psi2 += w * r * (w * r);
      sp += p;
      sp2 += p * p;
    }
    const inverseScale2 = 1 / (scale * scale); // ψ(u) = w·r/s
    storeLineFinal(work.sums, sw, swd, swdd, psi2 * inverseScale2, sp, sp2);
  }

}

class HampelNorm implements RobustNorm {
  readonly name = 'hampel' as const;
  readonly convex = false;
  readonly tuning: number[];
  private readonly slope: number;
  private readonly rhoAtB: number;
  private readonly rhoMax: number;
  constructor(
    private readonly a: number,
    private readonly b: number,
    private readonly c: number,
  ) {
    this.tuning = [a, b, c];
    this.slope = a / (c - b);
    this.rhoAtB = a * b - (a * a) / 2;
    this.rhoMax = this.rhoAtB + (a * (c - b)) / 2;
  }
  rho(u: number): number {
    const { a, b, c } = this;
    const z = Math.abs(u);
    if (z <= a) return (z * z) / 2;
    if (z <= b) return a * z - (a * a) / 2;
    if (z <= c) return this.rhoAtB + this.slope * (c * (z - b) - (z * z - b * b) / 2);
    return this.rhoMax;
  }
  psi(u: number): number {
    const z = Math.abs(u);
    if (z <= this.a) return u;
    if (z <= this.b) return this.a * Math.sign(u);
    if (z <= this.c) return Math.sign(u) * this.slope * (this.c - z);
    return 0;
  }
  psiDeriv(u: number): number {
    const z = Math.abs(u);
    if (z <= this.a) return 1;
    if (z <= this.b) return 0;
    if (z <= this.c) return -this.slope;
    return 0;
  }
  weight(u: number): number {
    const z = Math.abs(u);
    if (z <= this.a) return 1;
    if (z <= this.b) return this.a / z;
    if (z <= this.c) return (this.slope * (this.c - z)) / z;
    return 0;
  }
  weights(residuals: Float64Array, scale: number, out: Float64Array): void {
    // the breakpoints on the scale of r, so that each residual needs no division unless it is past a
    const a = this.a * scale;
    const b = this.b * scale;
    const c = this.c * scale;
    const { slope } = this;
    for (let i = 0; i < residuals.length; i++) {
      const z = Math.abs(residuals[i]);
      out[i] = z <= a ? 1 : z <= b ? a / z : z <= c ? (slope * (c - z)) / z : 0;
    }
  }
  lineStep(work: LineStepWork, a: number, b: number, scale: number): void {
    const { xs, centre, y } = work;
    const ra = this.a * scale;
    const rb = this.b * scale;
    const rc = this.c * scale;
    const { slope } = this;
    let sw = 0, swd = 0, swdd = 0, swr = 0, swrd = 0;
    let sp = 0, spd = 0, spdd = 0, spr = 0, sprd = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const size = Math.abs(r);
      // w: 1 up to a, a/|r| up to b, slope·(c − |r|)/|r| up to c, 0 beyond; ψ′: 1, 0, −slope, 0
      const w = size <= ra ? 1 : size <= rb ? ra / size : size <= rc ? (slope * (rc - size)) / size : 0;
      const p = size <= ra ? 1 : size > rb && size <= rc ? -slope : 0;
      const wd = w * d;
      const pd = p * d;
      sw += w;
      swd += wd;
      swdd += wd * d;
      swr += w * r;
      swrd += wd * r;
      sp += p;
      spd += pd;
      spdd += pd * d;
      spr += p * r;
      sprd += pd * r;
    }
    storeLineStep(work.sums, sw, swd, swdd, swr, swrd, sp, spd, spdd, spr, sprd);
  }

  lineFinal(work: LineStepWork, a: number, b: number, scale: number, weights: number[]): void {
    const ra = this.a * scale;
    const rb = this.b * scale;
    const rc = this.c * scale;
    const { slope } = this;
    const { xs, centre, y } = work;
    let sw = 0;
    let swd = 0;
    let swdd = 0;
    let psi2 = 0;
    let sp = 0;
    let sp2 = 0;
    for (let i = 0; i < xs.length; i++) {
      const r = y[i] - a - b * xs[i];
      const d = xs[i] - centre;
      const size = Math.abs(r);
      const w = size <= ra ? 1 : size <= rb ? ra / size : size <= rc ? (slope * (rc - size)) / size : 0;
      const p = size <= ra ? 1 : size > rb && size <= rc ? -slope : 0;
      const wd = w * d;
      weights[i] = w;
      sw += w;
      swd += wd;
      swdd += wd * d;
      psi2 += w * r * (w * r);
      sp += p;
      sp2 += p * p;
    }
    const inverseScale2 = 1 / (scale * scale); // ψ(u) = w·r/s
    storeLineFinal(work.sums, sw, swd, swdd, psi2 * inverseScale2, sp, sp2);
  }

}

/**
 * Least squares as a norm: ρ(u) = u²/2, ψ(u) = u, w(u) = 1, so IRLS with it is one ordinary fit.
 *
 * @example
 * leastSquaresNorm().psi(3); // 3
 */
export function leastSquaresNorm(): RobustNorm {
  return new LeastSquaresNorm();
}

/**
 * Huber's norm (Huber, Ann Math Stat 1964): ρ(u) = u²/2 for |u| ≤ t, t|u| − t²/2 beyond;
 * ψ(u) = max(−t, min(t, u)); w(u) = min(1, t/|u|). t = 1.345 gives 95 % efficiency at the normal.
 *
 * @example
 * huberNorm().weight(2.69); // 0.5
 */
export function huberNorm(t = 1.345): RobustNorm {
  validatePositive(t, 'tuning');
  return new HuberNorm(t);
}

/**
 * Tukey's bisquare (biweight) norm (Beaton & Tukey, Technometrics 1974), for |u| ≤ c:
 * ρ(u) = c²/6 · (1 − (1 − (u/c)²)³), ψ(u) = u(1 − (u/c)²)², ψ′(u) = (1 − (u/c)²)(1 − 5(u/c)²);
 * beyond c, ρ = c²/6 and ψ = 0. c = 4.685 gives 95 % efficiency at the normal. ρ is not convex.
 *
 * @example
 * tukeyBisquareNorm().weight(5); // 0 (beyond c = 4.685)
 */
export function tukeyBisquareNorm(c = 4.685): RobustNorm {
  validatePositive(c, 'tuning');
  return new TukeyBisquareNorm(c);
}

/**
 * Hampel's three-part redescending norm (Hampel, Ronchetti, Rousseeuw & Stahel, Robust Statistics 1986):
 * ψ(u) = u for |u| ≤ a; a·sign(u) for a < |u| ≤ b; a·sign(u)·(c − |u|)/(c − b) for b < |u| ≤ c; 0 beyond c.
 * ρ is the integral of ψ, constant beyond c, so ρ is not convex. Requires 0 < a < b < c.
 *
 * @example
 * hampelNorm().psi(6); // 1 (a·(c − 6)/(c − b) with a, b, c = 2, 4, 8)
 */
export function hampelNorm(a = 2, b = 4, c = 8): RobustNorm {
  validatePositive(a, 'tuning.a');
  validatePositive(b, 'tuning.b');
  validatePositive(c, 'tuning.c');
  if (!(a < b && b < c)) {
    throw new StatsInputError(`Hampel tuning constants must satisfy a < b < c (got a = ${a}, b = ${b}, c = ${c})`, {
      field: 'tuning',
    });
  }
  return new HampelNorm(a, b, c);
}

/** The robust line methods that are M-estimators with a fixed ψ family. */
export type MNormKey = 'huber' | 'tukey' | 'hampel';

/**
 * The norm for a method key, with its default tuning constants unless `tuning` is given
 * (huber: [t], tukey: [c], hampel: [a, b, c]).
 *
 * @example
 * normByKey('hampel', [1.5, 3.5, 8]).tuning; // [1.5, 3.5, 8]
 */
export function normByKey(key: MNormKey, tuning?: number[]): RobustNorm {
  const expected = key === 'hampel' ? 3 : 1;
  if (tuning !== undefined && tuning.length !== expected) {
    throw new StatsInputError(
      `${key} takes ${expected} tuning constant${expected > 1 ? 's' : ''} (got ${tuning.length})`,
      { field: 'tuning' },
    );
  }
  switch (key) {
    case 'huber':
      return tuning ? huberNorm(tuning[0]) : huberNorm();
    case 'tukey':
      return tuning ? tukeyBisquareNorm(tuning[0]) : tukeyBisquareNorm();
    case 'hampel':
      return tuning ? hampelNorm(tuning[0], tuning[1], tuning[2]) : hampelNorm();
    default:
      throw new StatsInputError(`unknown robust method "${String(key)}"`, { field: 'method' });
  }
}
