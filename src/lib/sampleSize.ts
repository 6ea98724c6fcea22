/**
 * How many samples make the confidence interval of the bias at a decision level narrow enough to decide
 * whether the bias is within the allowable limit. Pure; shared by the protocol designer and its tests.
 */
import { StatsInputError } from './stats/errors';
import { normalQuantile, tQuantile } from './stats/distributions';

/** The spread of the differences candidate − comparative: an SD in the analyte's units, or a CV in % of the level. */
export type DifferenceSpread = { kind: 'sd'; sd: number } | { kind: 'cv'; cvPercent: number };

export interface SampleSizeInput {
  /** The medical decision level X_c. */
  level: number;
  /** Allowable bias at the level, in the analyte's units (> 0). */
  allowable: number;
  spread: DifferenceSpread;
  /** The bias one expects at the level, in % of the level (0 when none is expected). */
  expectedBiasPercent?: number;
  /** Two-sided confidence of the bias interval; 0.95 unless given. */
  confidence?: number;
}

export interface SampleSizeResult {
  /** Samples needed (at least 3, the fewest a comparison takes). */
  n: number;
  /** SD of the differences at the level, in units. */
  sd: number;
  /** allowable − |expected bias|: the room the interval's half-width may take. */
  margin: number;
  /** Half-width t·SD/√n reached with n samples. */
  halfWidth: number;
}

/** The fewest samples a comparison takes (the protocol schema's minimum). */
const MIN_SAMPLES = 3;
/** Beyond this the plan is not a practical study; the designer says so instead of a number. */
const MAX_SAMPLES = 100_000;

/**
 * Human-readable statement of the rule, shown beside the helper's numbers.
 *
 * @example
 * SAMPLE_SIZE_RULE; // 'smallest n with t(1 − α/2, n − 1) · SD / √n ≤ allowable − |expected bias| …'
 */
export const SAMPLE_SIZE_RULE =
  'smallest n with t(1 − α/2, n − 1) · SD / √n ≤ allowable − |expected bias|; starting from n ≈ (z · SD / (allowable − |expected bias|))²';

function checkPositive(value: number, field: string) {
  if (!Number.isFinite(value) || value <= 0) throw new StatsInputError(`${field} must be a number greater than 0 (got ${value}).`, { field });
}

/**
 * Samples needed so that the two-sided CI of the mean difference at a decision level, bias ± t·SD/√n,
 * stays inside ± allowable when the true bias is the expected one: the smallest n with
 * t(1 − α/2, n − 1)·SD/√n ≤ allowable − |expected bias| (normal-theory interval of a mean; common practice).
 * The closed form n ≥ (z·SD/margin)² is the large-n version and the search's starting point.
 * Assumptions: independent differences, roughly normal, with the given SD (constant, or a constant CV) near the level.
 * A regression's interval at X_c is wider away from the mean of the comparative values, so read n as a lower bound.
 *
 * @example
 * samplesToDecideBias({ level: 126, allowable: 10.08, spread: { kind: 'sd', sd: 6 } }).n; // 4 (t quantiles, 95 %)
 * samplesToDecideBias({ level: 100, allowable: 5, spread: { kind: 'cv', cvPercent: 4 }, expectedBiasPercent: 2 }).n; // 10
 */
export function samplesToDecideBias(input: SampleSizeInput): SampleSizeResult {
  const { level, allowable, spread, expectedBiasPercent = 0, confidence = 0.95 } = input;
  if (!Number.isFinite(level)) throw new StatsInputError(`The decision level must be a finite number (got ${level}).`, { field: 'level' });
  checkPositive(allowable, 'allowable');
  if (!Number.isFinite(expectedBiasPercent)) {
    throw new StatsInputError(`The expected bias must be a finite number (got ${expectedBiasPercent}).`, { field: 'expectedBiasPercent' });
  }
  if (!(confidence > 0 && confidence < 1)) throw new StatsInputError(`The confidence is between 0 and 1 (got ${confidence}).`, { field: 'confidence' });
  let sd: number;
  if (spread.kind === 'sd') {
    checkPositive(spread.sd, 'sd');
    sd = spread.sd;
  } else {
    checkPositive(spread.cvPercent, 'cvPercent');
    sd = (spread.cvPercent * Math.abs(level)) / 100;
    if (sd === 0) throw new StatsInputError('A CV gives no SD at a decision level of 0; give the SD in units instead.', { field: 'cvPercent' });
  }
  const margin = allowable - Math.abs((expectedBiasPercent * level) / 100);
  if (margin <= 0) {
    throw new StatsInputError(
      `The expected bias (${Math.abs((expectedBiasPercent * level) / 100)}) is not below the allowable bias (${allowable}) at ${level}: no number of samples can show the bias is acceptable.`,
      { field: 'expectedBiasPercent' },
    );
  }
  const tail = 1 - (1 - confidence) / 2;
  const halfWidthAt = (n: number) => (tQuantile(tail, n - 1) * sd) / Math.sqrt(n);
  // t > z, so the closed-form z answer is never too many; step up from it (a few steps at most for useful n).
  let n = Math.max(MIN_SAMPLES, Math.ceil(((normalQuantile(tail) * sd) / margin) ** 2));
  while (n <= MAX_SAMPLES && halfWidthAt(n) > margin) n += 1;
  if (n > MAX_SAMPLES) {
    throw new StatsInputError(`More than ${MAX_SAMPLES} samples would be needed at ${level}; the SD is too large for this allowable bias.`, { field: 'sd' });
  }
  return { n, sd, margin, halfWidth: halfWidthAt(n) };
}
