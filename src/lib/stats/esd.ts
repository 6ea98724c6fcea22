import { StatsInputError } from './errors';
import { tQuantile } from './distributions';
import { validateFinite } from './validate';

export interface EsdStep {
  /** Index in the original `values` of the point removed at this step. */
  index: number;
  value: number;
  /** R_i = max |v − mean| / SD over the points still in. */
  statistic: number;
  /** λ_i, the critical value for R_i. */
  critical: number;
}

export interface EsdResult {
  /** Original indices of the points declared outliers, in the order they were removed. */
  outlierIndices: number[];
  steps: EsdStep[];
  outlierCount: number;
}

/**
 * Generalized extreme studentized deviate test for up to r outliers (Rosner, Technometrics 1983;
 * NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.5.17). Step i removes the point farthest
 * from the mean of those left, R_i = max|vⱼ − v̄|/s; with p = 1 − α/(2(n − i + 1)),
 * λ_i = (n − i)·t_{p, n−i−1} / √((n − i − 1 + t²_{p, n−i−1})(n − i + 1)).
 * The number of outliers is the largest i with R_i > λ_i. Steps stop early if the points left are
 * all equal (SD 0: nothing stands out).
 *
 * @example
 * generalizedEsd([1.0, 1.2, 0.9, 1.1, 1.0, 9.5, 1.05, 0.95, 1.15, 1.0], { maxOutliers: 2 }).outlierIndices; // [5]
 */
export function generalizedEsd(
  values: readonly number[],
  { alpha = 0.05, maxOutliers }: { alpha?: number; maxOutliers: number },
): EsdResult {
  validateFinite(values, 'values');
  const n = values.length;
  if (n < 3) throw new StatsInputError(`the outlier test needs at least 3 values (got ${n})`, { field: 'values' });
  if (!Number.isFinite(alpha) || alpha <= 0 || alpha >= 1) {
    throw new StatsInputError(`alpha must be between 0 and 1 (got ${String(alpha)})`, { field: 'alpha' });
  }
  if (!Number.isInteger(maxOutliers) || maxOutliers < 0 || maxOutliers > n - 2) {
    throw new StatsInputError(`maxOutliers must be a whole number from 0 to n − 2 = ${n - 2} (got ${String(maxOutliers)})`, {
      field: 'maxOutliers',
    });
  }
  const remaining = values.map((_, i) => i);
  const steps: EsdStep[] = [];
  let outlierCount = 0;
  for (let step = 1; step <= maxOutliers; step++) {
    const m = remaining.length; // n − step + 1
    let mean = 0;
    for (const i of remaining) mean += values[i];
    mean /= m;
    let sumSquares = 0;
    let farthest = 0;
    for (let k = 0; k < m; k++) {
      const deviation = Math.abs(values[remaining[k]] - mean);
      sumSquares += deviation * deviation;
      if (deviation > Math.abs(values[remaining[farthest]] - mean)) farthest = k;
    }
    const sd = Math.sqrt(sumSquares / (m - 1));
    if (sd === 0) break;
    const index = remaining[farthest];
    const p = 1 - alpha / (2 * m);
    const t = tQuantile(p, m - 2);
    const critical = ((m - 1) * t) / Math.sqrt((m - 2 + t * t) * m);
    const statistic = Math.abs(values[index] - mean) / sd;
    steps.push({ index, value: values[index], statistic, critical });
    if (statistic > critical) outlierCount = step;
    remaining.splice(farthest, 1);
  }
  const outlierIndices = steps.slice(0, outlierCount).map((s) => s.index);
  return { outlierIndices, steps, outlierCount };
}

/**
 * Upper bound on outliers for the screen: floor(share·n), but at least 1 once n ≥ 10 so that
 * a single gross error is still looked for in small studies (our choice; 2.5 % of the samples is
 * EP09 practice, from memory), and never more than n − 2 (the test needs 3 points left).
 * Below 10 values it returns 0: no screen.
 *
 * @example
 * maxOutliersForShare(40); // 1
 * maxOutliersForShare(120); // 3
 */
export function maxOutliersForShare(n: number, share = 0.025): number {
  if (!Number.isInteger(n) || n < 0) {
    throw new StatsInputError(`n must be a whole number of at least 0 (got ${String(n)})`, { field: 'n' });
  }
  if (!Number.isFinite(share) || share <= 0 || share >= 1) {
    throw new StatsInputError(`share must be between 0 and 1 (got ${String(share)})`, { field: 'share' });
  }
  if (n < 10) return 0;
  return Math.min(n - 2, Math.max(1, Math.floor(share * n)));
}
