import mt19937 from '@stdlib/random-base-mt19937';

/** A seeded source of uniform numbers in [0, 1) and integers; the same seed always gives the same stream. */
export interface SeededRandom {
  /** Uniform in [0, 1). */
  next(): number;
  /** Uniform integer in [0, n). */
  int(n: number): number;
}

/**
 * Mersenne Twister (Matsumoto & Nishimura, ACM TOMACS 1998) through @stdlib, seeded,
 * so that subsampling and bootstrap results are reproducible.
 *
 * @example
 * const rng = seededRandom(42);
 * rng.int(10); // the same integer in 0..9 every run
 */
export function seededRandom(seed: number): SeededRandom {
  const uint32 = mt19937.factory({ seed: (Math.abs(Math.trunc(seed)) % 4294967295) + 1 });
  const next = () => uint32() / 4294967296;
  return { next, int: (n: number) => Math.floor(next() * n) };
}
