/**
 * Numbers for the analysis tables: one number of decimals per column, so that a column reads with consistent
 * significant figures (its largest magnitude gets `significant` figures), right-aligned by the `num` class.
 */

/**
 * Decimals that give the largest magnitude of a column `significant` significant figures (0 to 6).
 *
 * @example
 * decimalsFor([1.0312, 0.98]); // 3
 * decimalsFor([126, 4.3]); // 1
 */
export function decimalsFor(values: readonly (number | null | undefined)[], significant = 4): number {
  const finite = values.filter((v): v is number => typeof v === 'number' && Number.isFinite(v) && v !== 0);
  if (finite.length === 0) return 2;
  const largest = Math.max(...finite.map(Math.abs));
  return Math.min(6, Math.max(0, significant - 1 - Math.floor(Math.log10(largest))));
}

/**
 * A number with fixed decimals and a true minus sign; '—' for a missing value.
 *
 * @example
 * fixed(-0.5, 2); // '−0.50'
 */
export function fixed(value: number | null | undefined, decimals: number): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '—';
  const text = value.toFixed(decimals);
  return text.startsWith('-') ? (Number(text) === 0 ? text.slice(1) : `−${text.slice(1)}`) : text;
}

/**
 * An interval "lo to hi" with the same decimals as its estimate.
 *
 * @example
 * interval([0.98, 1.04], 3); // '0.980 to 1.040'
 */
export function interval(ci: readonly [number, number] | undefined, decimals: number): string {
  return ci ? `${fixed(ci[0], decimals)} to ${fixed(ci[1], decimals)}` : '—';
}

/**
 * A tick label: as few decimals as the tick step needs.
 *
 * @example
 * tickLabel(0.25, [0, 0.25, 0.5]); // '0.25'
 */
export function tickLabel(value: number, ticks: readonly number[]): string {
  const step = ticks.length > 1 ? Math.abs(ticks[1] - ticks[0]) : 1;
  let decimals = 0;
  // The fewest decimals that write the step exactly (0.25 needs 2, 0.5 needs 1).
  while (decimals < 6 && Math.abs(step * 10 ** decimals - Math.round(step * 10 ** decimals)) > 1e-6) decimals++;
  return fixed(value, decimals);
}
