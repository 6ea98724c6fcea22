import { StatsInputError } from './errors';
import { tQuantile } from './distributions';
import { validateConfidence, validatePairs, validatePositive } from './validate';

export type DifferenceKind = 'absolute' | 'percent';

export interface BlandAltmanOptions {
  /** 'absolute': y − x; 'percent': 100·(y − x)/((x + y)/2). */
  kind?: DifferenceKind;
  /** Limits of agreement are mean ± multiplier·SD (1.96 for 95 % of differences). */
  multiplier?: number;
  /** Confidence level of the intervals around the mean and the limits. */
  confidence?: number;
}

export interface BlandAltmanResult {
  kind: DifferenceKind;
  n: number;
  /** Per sample, in input order. */
  differences: number[];
  /** Per sample, (x + y)/2, the horizontal axis of the plot. */
  means: number[];
  meanDifference: number;
  /** Sample SD of the differences (n − 1 denominator). */
  sdDifference: number;
  lowerLoA: number;
  upperLoA: number;
  multiplier: number;
  confidence: number;
  meanDifferenceCI: [number, number];
  lowerLoACI: [number, number];
  upperLoACI: [number, number];
}

/**
 * Bland–Altman agreement: differences y − x (or percent differences) against the pair means,
 * mean difference d̄, SD s and limits of agreement d̄ ± z·s (Bland & Altman, Lancet 1986).
 * Approximate intervals (Bland & Altman, Stat Methods Med Res 1999): SE(d̄) = s/√n,
 * SE(limit) ≈ s·√(1/n + z²/(2(n − 1))), both with the t quantile on n − 1 df.
 *
 * @example
 * const ba = blandAltman([10, 20, 30, 40], [11, 19, 32, 41]);
 * ba.meanDifference; // 0.75
 */
export function blandAltman(x: readonly number[], y: readonly number[], options: BlandAltmanOptions = {}): BlandAltmanResult {
  const { kind = 'absolute', multiplier = 1.96, confidence = 0.95 } = options;
  validatePairs(x, y);
  validatePositive(multiplier, 'multiplier');
  validateConfidence(confidence);
  if (kind !== 'absolute' && kind !== 'percent') {
    throw new StatsInputError(`kind must be 'absolute' or 'percent' (got ${String(kind)})`, { field: 'kind' });
  }
  const n = x.length;
  const means = x.map((xi, i) => (xi + y[i]) / 2);
  const differences = x.map((xi, i) => {
    if (kind === 'absolute') return y[i] - xi;
    if (means[i] === 0) {
      throw new StatsInputError(`pair ${i} has mean 0, so its percent difference is undefined`, { field: 'x', index: i });
    }
    return (100 * (y[i] - xi)) / means[i];
  });
  const meanDifference = differences.reduce((sum, d) => sum + d, 0) / n;
  const sdDifference = Math.sqrt(differences.reduce((sum, d) => sum + (d - meanDifference) ** 2, 0) / (n - 1));
  const lowerLoA = meanDifference - multiplier * sdDifference;
  const upperLoA = meanDifference + multiplier * sdDifference;
  const t = tQuantile((1 + confidence) / 2, n - 1);
  const seMean = sdDifference / Math.sqrt(n);
  const seLimit = sdDifference * Math.sqrt(1 / n + (multiplier * multiplier) / (2 * (n - 1)));
  return {
    kind,
    n,
    differences,
    means,
    meanDifference,
    sdDifference,
    lowerLoA,
    upperLoA,
    multiplier,
    confidence,
    meanDifferenceCI: [meanDifference - t * seMean, meanDifference + t * seMean],
    lowerLoACI: [lowerLoA - t * seLimit, lowerLoA + t * seLimit],
    upperLoACI: [upperLoA - t * seLimit, upperLoA + t * seLimit],
  };
}
