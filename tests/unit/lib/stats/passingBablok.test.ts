import { describe, expect, it } from 'vitest';
import { fitPassingBablok, stableOrder } from '../../../../src/lib/stats/passingBablok';
import { StatsInputError } from '../../../../src/lib/stats/errors';
import { normalQuantile } from '../../../../src/lib/stats/distributions';
import { seededRandom, type SeededRandom } from '../../../../src/lib/stats/random';

/**
 * Passing–Bablok over all pairs, straight from Passing & Bablok (J Clin Chem Clin Biochem 1983):
 * S_ij = (y_i − y_j)/(x_i − x_j) for i < j; 0/0 pairs not used; S_ij = −1 not used; equal x with
 * different y gives an infinite slope (taken as +∞, the sign for the pair ordered by y);
 * K = #(S_ij < −1); b = S_((N+1)/2+K) (N odd) or ½(S_(N/2+K) + S_(N/2+1+K)) (N even) in the ascending list;
 * CI of b: S_(M1+K), S_(M2+K) with M1 = round((N − C)/2), M2 = N − M1 + 1, C = z·√(n(n−1)(2n+5)/18);
 * a = med(y_i − b·x_i), CI of a from the slope bounds.
 */
function bruteForce(x: number[], y: number[], confidence = 0.95) {
  const n = x.length;
  const slopes: number[] = [];
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) {
      if (x[i] === x[j] && y[i] === y[j]) continue;
      const s = x[i] === x[j] ? Infinity : (y[i] - y[j]) / (x[i] - x[j]);
      if (s === -1) continue;
      slopes.push(s);
    }
  }
  const sorted = Float64Array.from(slopes).sort();
  const N = sorted.length;
  const K = sorted.filter((s) => s < -1).length;
  const at = (rank: number) => {
    if (rank < 1 || rank > N) throw new Error(`rank ${rank} outside 1..${N}`);
    return sorted[rank - 1];
  };
  const slope = N % 2 === 1 ? at((N + 1) / 2 + K) : (at(N / 2 + K) + at(N / 2 + 1 + K)) / 2;
  const C = normalQuantile((1 + confidence) / 2) * Math.sqrt((n * (n - 1) * (2 * n + 5)) / 18);
  const M1 = Math.round((N - C) / 2);
  const M2 = N - M1 + 1;
  const slopeCI = [at(M1 + K), at(M2 + K)];
  const median = (values: number[]) => {
    const v = Float64Array.from(values).sort();
    return v.length % 2 === 1 ? v[(v.length - 1) / 2] : (v[v.length / 2 - 1] + v[v.length / 2]) / 2;
  };
  const offsets = (b: number) => y.map((yi, i) => yi - b * x[i]);
  return {
    slope,
    intercept: median(offsets(slope)),
    slopeCI,
    interceptCI: [median(offsets(slopeCI[1])), median(offsets(slopeCI[0]))],
    shift: K,
    slopeCount: N,
  };
}

interface Scenario {
  name: string;
  make: (rng: SeededRandom) => { x: number[]; y: number[] };
}

function normal(rng: SeededRandom): number {
  return Math.sqrt(-2 * Math.log(1 - rng.next())) * Math.cos(2 * Math.PI * rng.next());
}

function line(n: number, a: number, b: number, noise: number, round: number) {
  return (rng: SeededRandom) => {
    const x: number[] = [];
    const y: number[] = [];
    for (let i = 0; i < n; i++) {
      const truth = 5 + 95 * rng.next();
      const xi = truth + noise * normal(rng);
      const yi = a + b * truth + noise * normal(rng);
      x.push(round ? Math.round(xi / round) * round : xi);
      y.push(round ? Math.round(yi / round) * round : yi);
    }
    return { x, y };
  };
}

const scenarios: Scenario[] = [
  { name: 'continuous, n = 12', make: line(12, 2, 1.05, 3, 0) },
  { name: 'continuous, n = 57', make: line(57, -1, 0.93, 2, 0) },
  { name: 'integer values (ties, vertical pairs, identical points, slopes of −1), n = 40', make: line(40, 0, 1, 4, 1) },
  { name: 'coarse integers, n = 150', make: line(150, 3, 1.1, 6, 5) },
  { name: 'continuous, n = 260 (sampling path)', make: line(260, 1, 1.02, 4, 0) },
  { name: 'integers, n = 420 (sampling path with ties)', make: line(420, 0, 1, 3, 1) },
  { name: 'weak negative relation, n = 30', make: line(30, 120, -0.3, 25, 1) },
  {
    name: 'duplicated points and x ties, n = 45',
    make: (rng) => {
      const base = line(15, 1, 1.2, 2, 0.5)(rng);
      return { x: [...base.x, ...base.x, ...base.x], y: [...base.y, ...base.y, ...base.y.map((v) => v + 1)] };
    },
  },
  {
    name: 'exact slopes of −1 among the pairs, n = 24',
    make: (rng) => {
      const base = line(20, 0, 1, 2, 1)(rng);
      // Points on the anti-diagonal x + y = 100 give many slopes of exactly −1.
      return { x: [...base.x, 10, 20, 30, 40], y: [...base.y, 90, 80, 70, 60] };
    },
  },
];

type Outcome = { ok: true; value: ReturnType<typeof bruteForce> } | { ok: false };

function bruteOutcome(x: number[], y: number[]): Outcome {
  try {
    const value = bruteForce(x, y);
    if (!Number.isFinite(value.slope) || !Number.isFinite(value.slopeCI[1])) return { ok: false };
    return { ok: true, value };
  } catch {
    return { ok: false };
  }
}

describe('fitPassingBablok against the brute-force definition', () => {
  for (const scenario of scenarios) {
    for (const algorithm of ['direct', 'selection'] as const) {
      it(`${scenario.name}: the ${algorithm} path equals the brute force on 6 seeded data sets`, () => {
        for (let seed = 1; seed <= 6; seed++) {
          const { x, y } = scenario.make(seededRandom(seed * 7919 + scenario.name.length));
          const expected = bruteOutcome(x, y);
          if (!expected.ok) {
            expect(() => fitPassingBablok(x, y, { algorithm })).toThrow(StatsInputError);
            continue;
          }
          const fit = fitPassingBablok(x, y, { algorithm });
          expect(fit.slope).toBe(expected.value.slope);
          expect(fit.intercept).toBe(expected.value.intercept);
          expect(fit.slopeCI).toEqual(expected.value.slopeCI);
          expect(fit.interceptCI).toEqual(expected.value.interceptCI);
          expect(fit.shift).toBe(expected.value.shift);
          expect(fit.slopeCount).toBe(expected.value.slopeCount);
        }
      });
    }
  }

  it('larger integer data (n = 1500, many tied slopes): selection equals the brute force', () => {
    const { x, y } = line(1500, 2, 1, 3, 1)(seededRandom(31));
    const expected = bruteForce(x, y);
    const fit = fitPassingBablok(x, y, { algorithm: 'selection' });
    expect([fit.slope, fit.intercept, ...fit.slopeCI, ...fit.interceptCI, fit.shift, fit.slopeCount]).toEqual([
      expected.slope,
      expected.intercept,
      ...expected.slopeCI,
      ...expected.interceptCI,
      expected.shift,
      expected.slopeCount,
    ]);
  });

  // Values with two decimals: the slopes of pairs that are equal in decimal arithmetic scatter over
  // neighbouring floating-point values, closer together than any bound on y − t·x can separate.
  for (const [step, slope, seed] of [
    [0.01, 1.1, 41],
    [0.1, 2, 42],
  ] as const) {
    it(`decimal data (step ${step}, n = 2500, nearly tied slopes around ${slope}): selection equals the brute force`, () => {
      const rng = seededRandom(seed);
      const x: number[] = [];
      const y: number[] = [];
      for (let i = 0; i < 2500; i++) {
        const truth = Math.round((5 + 45 * rng.next()) / step) * step;
        x.push(Number(truth.toFixed(2)));
        y.push(Number((Math.round((0.37 + slope * truth + 0.2 * step * normal(rng)) / step) * step).toFixed(2)));
      }
      const expected = bruteForce(x, y);
      const fit = fitPassingBablok(x, y, { algorithm: 'selection' });
      expect([fit.slope, fit.intercept, ...fit.slopeCI, ...fit.interceptCI, fit.shift, fit.slopeCount]).toEqual([
        expected.slope,
        expected.intercept,
        ...expected.slopeCI,
        ...expected.interceptCI,
        expected.shift,
        expected.slopeCount,
      ]);
    });
  }

  // Decimal data with a negative slope and duplicated x: a bound can land on a tie cluster.
  for (const seed of [5, 11]) {
    it(`decimal data with a negative slope and duplicated x (n = 2000, seed ${seed}): selection equals the brute force`, () => {
      const rng = seededRandom(seed);
      const x: number[] = [];
      const y: number[] = [];
      for (let i = 0; i < 2000; i++) {
        if (i > 0 && rng.next() < 0.3) {
          const j = rng.int(i);
          x.push(x[j]);
          y.push(rng.next() < 0.5 ? y[j] : y[j] + 0.1);
          continue;
        }
        const truth = 1 + 60 * rng.next();
        x.push(Number((Math.round((truth + 0.1 * normal(rng)) / 0.1) * 0.1).toFixed(2)));
        y.push(Number((Math.round((0.3 - 0.2 * truth + 0.1 * normal(rng)) / 0.1) * 0.1).toFixed(2)));
      }
      const expected = bruteForce(x, y);
      const fit = fitPassingBablok(x, y, { algorithm: 'selection' });
      expect([fit.slope, fit.intercept, ...fit.slopeCI, ...fit.interceptCI, fit.shift, fit.slopeCount]).toEqual([
        expected.slope,
        expected.intercept,
        ...expected.slopeCI,
        ...expected.interceptCI,
        expected.shift,
        expected.slopeCount,
      ]);
    });
  }

  // Medians are found by selection, which cannot tell −0 from +0; sorting (the brute force) puts −0 first.
  for (const [half, algorithm] of [
    [40, 'direct'],
    [150, 'selection'],
  ] as const) {
    it(`a median offset of −0 (n = ${2 * half + 1}, ${algorithm}): intercept and its CI equal the brute force, sign included`, () => {
      // y = x (offset +0) at even x, y = x − 5 at odd x, and (0, −0), whose offset −0 − 1·0 is −0 and the middle one;
      // integers, so every slope within a line is exactly 1, and so is the median slope
      const x = [0];
      const y = [-0];
      for (let i = 1; i <= half; i++) {
        x.push(2 * i, 2 * i - 1);
        y.push(2 * i, 2 * i - 6);
      }
      const expected = bruteForce(x, y);
      expect(expected.slope).toBe(1);
      expect(Object.is(expected.intercept, -0)).toBe(true);
      const fit = fitPassingBablok(x, y, { algorithm });
      expect(fit.slope).toBe(expected.slope);
      expect(Object.is(fit.intercept, -0)).toBe(true);
      expect(fit.slopeCI).toEqual(expected.slopeCI);
      fit.interceptCI.forEach((end, k) => expect(Object.is(end, expected.interceptCI[k])).toBe(true));
    });
  }

  it('larger continuous data (n = 1200): selection equals the brute force', () => {
    const { x, y } = line(1200, -2, 0.98, 2, 0)(seededRandom(77));
    const expected = bruteForce(x, y);
    const fit = fitPassingBablok(x, y);
    expect([fit.slope, fit.intercept, ...fit.slopeCI, ...fit.interceptCI, fit.shift]).toEqual([
      expected.slope,
      expected.intercept,
      ...expected.slopeCI,
      ...expected.interceptCI,
      expected.shift,
    ]);
  });
});

describe('stableOrder', () => {
  it('equals a comparison sort by key, ties (−0 and +0 among them, ±∞) in index order', () => {
    const rng = seededRandom(3);
    const keys = Float64Array.from({ length: 3000 }, () => {
      const u = rng.next();
      return u < 0.05 ? -0 : u < 0.1 ? 0 : u < 0.12 ? Infinity : u < 0.14 ? -Infinity : Math.round(40 * (rng.next() - 0.5)) / 4;
    });
    const expected = Array.from(keys, (_, i) => i).sort((p, q) => (keys[p] === keys[q] ? p - q : keys[p] - keys[q]));
    expect(Array.from(stableOrder(keys))).toEqual(expected);
  });
});

describe('fitPassingBablok properties', () => {
  it('gives slope 2 and intercept 1 on exact y = 2x + 1 data', () => {
    const x = Array.from({ length: 20 }, (_, i) => i + 1);
    const fit = fitPassingBablok(
      x,
      x.map((v) => 2 * v + 1),
    );
    expect(fit.slope).toBe(2);
    expect(fit.intercept).toBe(1);
    expect(fit.slopeCI).toEqual([2, 2]);
    expect(fit.interceptCI).toEqual([1, 1]);
    expect(fit.shift).toBe(0);
    expect(fit.slopeCount).toBe(190);
    expect(fit.cusum.linear).toBe(true);
  });

  it('does not depend on the order of the samples', () => {
    const { x, y } = line(300, 1, 1.1, 3, 1)(seededRandom(5));
    const rng = seededRandom(6);
    const order = x.map((_, i) => i);
    for (let i = order.length - 1; i > 0; i--) {
      const j = rng.int(i + 1);
      [order[i], order[j]] = [order[j], order[i]];
    }
    const a = fitPassingBablok(x, y);
    const b = fitPassingBablok(
      order.map((i) => x[i]),
      order.map((i) => y[i]),
    );
    expect(b).toEqual(a);
  });

  it('CUSUM flags a clearly curved relationship and passes a linear one', () => {
    const rng = seededRandom(11);
    const x = Array.from({ length: 80 }, (_, i) => 1 + i);
    const curved = fitPassingBablok(
      x,
      x.map((v) => (v * v) / 40 + 0.5 * normal(rng)),
    );
    expect(curved.cusum.linear).toBe(false);
    expect(curved.cusum.statistic).toBeGreaterThan(curved.cusum.critical);
    const straight = fitPassingBablok(
      x,
      x.map((v) => 2 + 1.1 * v + 2 * normal(rng)),
    );
    expect(straight.cusum.linear).toBe(true);
  });

  it('CUSUM rejects linear data at about the nominal 5 %', () => {
    // Calibration against the stated level α = 0.05, not against our own numbers.
    let rejected = 0;
    const replicates = 300;
    for (let r = 0; r < replicates; r++) {
      const { x, y } = line(60, 0, 1, 3, 0)(seededRandom(1000 + r));
      if (!fitPassingBablok(x, y).cusum.linear) rejected++;
    }
    // Binomial(300, 0.05) has SD 3.8: 2 to 30 rejections is far beyond chance only if the level is wrong.
    expect(rejected).toBeGreaterThanOrEqual(2);
    expect(rejected).toBeLessThanOrEqual(30);
  });

  it('reports the Pearson correlation', () => {
    const fit = fitPassingBablok([1, 2, 3, 4, 5, 6], [2, 4, 6, 8, 10, 12.5]);
    expect(fit.pearsonR).toBeGreaterThan(0.99);
  });

  it('refuses bad input with StatsInputError', () => {
    expect(() => fitPassingBablok([1, 2], [1, 2])).toThrow(/at least 3 pairs/);
    expect(() => fitPassingBablok([3, 3, 3], [1, 2, 3])).toThrow(/all x values are equal/);
    expect(() => fitPassingBablok([1, 2, Infinity], [1, 2, 3])).toThrow(/x\[2\] is not a finite number/);
    expect(() => fitPassingBablok([1, 2, 3], [1, 2])).toThrow(/same length/);
    expect(() => fitPassingBablok([1, 2, 3, 4, 5], [1, 2, 3, 4, 5], { confidence: 1 })).toThrow(/confidence/);
    // n = 4: N = 6 slopes, C = 1.96·√(4·3·13/18) ≈ 5.77, M1 = round(0.11) = 0.
    expect(() => fitPassingBablok([1, 2, 3, 4], [1, 2, 3, 4])).toThrow(/too few slopes/);
    // Strongly negative relation: the shifted median falls among the slopes below −1.
    expect(() => fitPassingBablok([1, 2, 3, 4, 5, 6, 7], [70, 60, 50, 40, 30, 20, 10])).toThrow(/positively related/);
  });
});
