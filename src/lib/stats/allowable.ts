import { StatsInputError } from './errors';

/**
 * An allowable bias (acceptance limit) as the trade writes it: an absolute part in measurement units,
 * a percent part, and the rule combining them — "± 6 mg/dL or ± 10 %, whichever is greater" is
 * `{ absolute: 6, percent: 10, rule: 'larger' }`.
 */
export interface AllowableLimit {
  absolute?: number;
  percent?: number;
  rule: 'absolute' | 'percent' | 'larger';
}

/**
 * Half-width of the allowable interval ±limit in measurement units at the level X_c:
 * absolute → absolute; percent → percent·|X_c|/100; larger → max(absolute, percent·|X_c|/100).
 *
 * @example
 * allowableLimitAt({ absolute: 6, percent: 10, rule: 'larger' }, 126); // 12.6
 * allowableLimitAt({ absolute: 6, percent: 10, rule: 'larger' }, 40); // 6
 */
export function allowableLimitAt(limit: AllowableLimit, level: number): number {
  validateAllowableLimit(limit);
  if (!Number.isFinite(level)) throw new StatsInputError(`decision level must be a finite number (got ${level})`, { field: 'level' });
  const percentPart = limit.percent === undefined ? undefined : (limit.percent * Math.abs(level)) / 100;
  if (limit.rule === 'absolute') return limit.absolute as number;
  if (limit.rule === 'percent') return percentPart as number;
  return Math.max(limit.absolute as number, percentPart as number);
}

/**
 * Throws StatsInputError unless the parts that the rule needs are present, finite and not negative.
 *
 * @example
 * validateAllowableLimit({ percent: 10, rule: 'percent' }); // passes
 * validateAllowableLimit({ percent: 10, rule: 'larger' }); // throws: rule 'larger' needs both absolute and percent
 */
export function validateAllowableLimit(limit: AllowableLimit): void {
  const rule = limit.rule;
  if (rule !== 'absolute' && rule !== 'percent' && rule !== 'larger') {
    throw new StatsInputError(`allowable rule must be 'absolute', 'percent' or 'larger' (got '${String(rule)}')`, { field: 'allowable.rule' });
  }
  const needed: ('absolute' | 'percent')[] = rule === 'larger' ? ['absolute', 'percent'] : [rule];
  for (const part of needed) {
    const value = limit[part];
    if (value === undefined) {
      throw new StatsInputError(
        rule === 'larger' ? `rule 'larger' needs both absolute and percent (${part} is missing)` : `rule '${rule}' needs ${part}`,
        { field: `allowable.${part}` },
      );
    }
    if (!Number.isFinite(value) || value < 0) {
      throw new StatsInputError(`allowable ${part} must be a finite number of at least 0 (got ${value})`, { field: `allowable.${part}` });
    }
  }
}
