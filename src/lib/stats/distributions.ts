import tQuantileStd from '@stdlib/stats-base-dists-t-quantile';
import normalQuantileStd from '@stdlib/stats-base-dists-normal-quantile';
import normalCdfStd from '@stdlib/stats-base-dists-normal-cdf';
import chiSquareQuantileStd from '@stdlib/stats-base-dists-chisquare-quantile';
import tCdfStd from '@stdlib/stats-base-dists-t-cdf';

/**
 * Quantile of Student's t with `df` degrees of freedom (@stdlib).
 * @example tQuantile(0.975, 10) // 2.2281388519649385
 */
export function tQuantile(p: number, df: number): number {
  return tQuantileStd(p, df);
}

/** Cumulative distribution of Student's t (@stdlib). @example tCdf(2.228, 10) // ≈ 0.975 */
export function tCdf(t: number, df: number): number {
  return tCdfStd(t, df);
}

/** Quantile of the standard normal (@stdlib). @example normalQuantile(0.975) // 1.959963984540054 */
export function normalQuantile(p: number): number {
  return normalQuantileStd(p, 0, 1);
}

/** Cumulative distribution of the standard normal (@stdlib). @example normalCdf(1.96) // ≈ 0.975 */
export function normalCdf(z: number): number {
  return normalCdfStd(z, 0, 1);
}

/** Quantile of chi-square with `df` degrees of freedom (@stdlib). @example chiSquareQuantile(0.95, 1) // 3.841458820694124 */
export function chiSquareQuantile(p: number, df: number): number {
  return chiSquareQuantileStd(p, df);
}
