/**
 * Number and date text for the report: one number of decimals per table column (so a column reads with
 * consistent significant figures), a true minus sign, and UTC times from stored timestamps.
 */
import type { BiasVerdict } from '../../lib/stats/bias';

/**
 * Decimals that give the largest magnitude in a column `significant` significant figures (0 to 4 decimals).
 *
 * @example
 * decimalsFor([1.2345, 126]); // 0 (126 has three figures)
 * decimalsFor([0.98, 1.03]);  // 2
 */
export function decimalsFor(values: readonly number[], significant = 3): number {
  const largest = Math.max(0, ...values.filter(Number.isFinite).map(Math.abs));
  if (largest === 0) return Math.min(4, significant - 1);
  return Math.min(4, Math.max(0, significant - 1 - Math.floor(Math.log10(largest))));
}

/**
 * A number with fixed decimals and a true minus sign (U+2212).
 *
 * @example
 * fixed(-2.345, 2); // '−2.35'
 */
export function fixed(value: number, decimals: number): string {
  const text = value.toFixed(decimals);
  // A value that rounds to zero carries no sign ("0.0", not "−0.0").
  if (!text.startsWith('-') || Number(text) === 0) return text.replace(/^-/, '');
  return `\u2212${text.slice(1)}`;
}

/**
 * A confidence interval as "low to high".
 *
 * @example
 * interval([-1.5, 2.25], 1); // '−1.5 to 2.3'
 */
export function interval(ci: readonly [number, number], decimals: number): string {
  return `${fixed(ci[0], decimals)} to ${fixed(ci[1], decimals)}`;
}

/**
 * A stored timestamp as UTC text to the second.
 *
 * @example
 * utc('2026-11-20T09:15:02.123Z'); // '2026-11-20 09:15:02 UTC'
 */
export function utc(iso: string): string {
  return `${iso.slice(0, 10)} ${iso.slice(11, 19)} UTC`;
}

/** The words for a decision level's verdict (the PDF has no icons, so the word says it all). */
export const BIAS_VERDICT_WORDS: Record<BiasVerdict, string> = {
  within: 'Within limit',
  beyond: 'Beyond limit',
  inconclusive: 'Inconclusive',
};
