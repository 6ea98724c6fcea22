import { StatsInputError } from './errors';

/**
 * Checks paired data before any fit: same length, at least `minPairs` pairs, every value finite,
 * and x not constant (a line through a single x is undefined).
 *
 * @example
 * validatePairs([1, 2, 3], [1.1, 2.0, 2.9]); // passes
 * validatePairs([1, 2], [1, 2]); // throws StatsInputError: at least 3 pairs are needed (got 2)
 */
export function validatePairs(x: readonly number[], y: readonly number[], minPairs = 3): void {
  if (x.length !== y.length) {
    throw new StatsInputError(`x and y must have the same length (x has ${x.length}, y has ${y.length})`, { field: 'y' });
  }
  if (x.length < minPairs) {
    throw new StatsInputError(`at least ${minPairs} pairs are needed (got ${x.length})`, { field: 'x' });
  }
  validateFinite(x, 'x');
  validateFinite(y, 'y');
  let allEqual = true;
  for (let i = 1; i < x.length && allEqual; i++) allEqual = x[i] === x[0];
  if (allEqual) {
    throw new StatsInputError(`all x values are equal (${x[0]}), so no line can be fitted`, { field: 'x' });
  }
}

/**
 * Throws unless every value is a finite number, naming the first bad index.
 *
 * @example
 * validateFinite([1, Number.NaN], 'y'); // throws: y[1] is not a finite number (got NaN)
 */
export function validateFinite(values: readonly number[], field: string): void {
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (typeof v !== 'number' || !Number.isFinite(v)) {
      throw new StatsInputError(`${field}[${i}] is not a finite number (got ${String(v)})`, { field, index: i });
    }
  }
}

/**
 * Throws unless a tuning constant or similar parameter is a finite number above zero.
 *
 * @example
 * validatePositive(1.345, 'tuning'); // passes
 * validatePositive(0, 'tuning'); // throws: tuning must be a finite number above 0 (got 0)
 */
export function validatePositive(value: number, field: string): void {
  if (!Number.isFinite(value) || value <= 0) {
    throw new StatsInputError(`${field} must be a finite number above 0 (got ${String(value)})`, { field });
  }
}

/**
 * Throws unless the confidence level is strictly between 0 and 1.
 *
 * @example
 * validateConfidence(0.95); // passes
 * validateConfidence(95); // throws StatsInputError: confidence must be between 0 and 1 (got 95)
 */
export function validateConfidence(confidence: number): void {
  if (!Number.isFinite(confidence) || confidence <= 0 || confidence >= 1) {
    throw new StatsInputError(`confidence must be between 0 and 1 (got ${String(confidence)})`, { field: 'confidence' });
  }
}
