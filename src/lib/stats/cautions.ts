import { tCdf } from './distributions';
import type { LineFit, MethodKey } from './types';

/** A data-driven caution: a plain sentence naming the samples or numbers involved. */
export interface Caution {
  /** Stable identifier, for the UI and for tests. */
  code: CautionCode;
  severity: 'warning' | 'info';
  message: string;
  /** Sample ids the caution is about, in input order. */
  sampleIds?: string[];
}

export type CautionCode =
  | 'fewer-than-planned'
  | 'fewer-than-40'
  | 'poor-spread'
  | 'low-correlation'
  | 'differences-grow-with-concentration'
  | 'high-leverage'
  | 'redescending-not-converged'
  | 'redescending-start-dependent'
  | 'heavily-down-weighted'
  | 'decision-level-outside-range'
  | 'passing-bablok-negative-correlation'
  | 'passing-bablok-nonlinear'
  | 'many-excluded'
  | 'verdicts-disagree'
  | 'esd-outliers'
  | 'method-failed'
  | 'bootstrap-resamples-failed';

/**
 * Shown with every analysis, whatever the data.
 *
 * @example
 * STANDING_CAUTION.startsWith('These statistics'); // true
 */
export const STANDING_CAUTION =
  "These statistics inform the medical director's decision and never take its place. " +
  "Allowable limits come from local regulation and the laboratory's own quality policy, not from this software.";

/** Thresholds the cautions use, named so that each sentence can state its rule. */
export const CAUTION_THRESHOLDS = {
  /** EP09 practice (from memory — verify against the current edition). */
  minimumSamples: 40,
  /** Common practice, no single source. */
  minimumCorrelation: 0.975,
  /** A third of the interval holding less than this fraction of its target share is poorly covered. */
  spreadShareFraction: 0.5,
  /** One-sided significance level of the test that |d| rises with the mean. */
  heteroscedasticityAlpha: 0.05,
  /** Robust weight below which a sample counts as heavily down-weighted. */
  lowWeight: 0.25,
  /** EP09 practice (from memory). */
  excludedShare: 0.025,
  /** Lines from the two starts differ when they part by more than this share of the measured y range. */
  startDependenceShare: 0.01,
} as const;

const METHOD_NAMES: Record<MethodKey, string> = {
  ols: 'OLS',
  deming: 'Deming',
  weightedDeming: 'weighted Deming',
  passingBablok: 'Passing–Bablok',
  huber: 'Huber',
  tukey: 'Tukey bisquare',
  hampel: 'Hampel',
  mm: 'MM',
  lad: 'LAD',
};

/**
 * The readable name of an estimator key.
 *
 * @example
 * methodName('passingBablok'); // 'Passing–Bablok'
 */
export function methodName(key: MethodKey): string {
  return METHOD_NAMES[key];
}

/**
 * A number for a sentence: 4 significant digits, no trailing zeros, no exponent for ordinary magnitudes.
 *
 * @example
 * formatNumber(0.96234); // '0.9623'
 * formatNumber(126); // '126'
 */
export function formatNumber(value: number): string {
  if (value === 0) return '0';
  const abs = Math.abs(value);
  if (abs >= 1e-4 && abs < 1e7) {
    const digits = Math.max(0, 3 - Math.floor(Math.log10(abs)));
    return String(Number(value.toFixed(digits)));
  }
  return value.toPrecision(4);
}

/** "S1, S2 and S3"; long lists show the first ten and a count. */
function listIds(ids: readonly string[]): string {
  const shown = ids.length > 10 ? [...ids.slice(0, 10), `${ids.length - 10} more`] : [...ids];
  if (shown.length === 1) return shown[0];
  return `${shown.slice(0, -1).join(', ')} and ${shown[shown.length - 1]}`;
}

function plural(count: number, word: string): string {
  return `${count} ${word}${count === 1 ? '' : 's'}`;
}

/**
 * Fewer samples than the plan asks for.
 *
 * @example
 * sampleCountCautions(32, 40).map((c) => c.code); // ['fewer-than-planned', 'fewer-than-40']
 */
export function sampleCountCautions(n: number, plannedCount?: number): Caution[] {
  const cautions: Caution[] = [];
  if (plannedCount !== undefined && n < plannedCount) {
    cautions.push({
      code: 'fewer-than-planned',
      severity: 'warning',
      message: `Only ${n} samples were analysed, fewer than the ${plannedCount} the plan asks for.`,
    });
  }
  if (n < CAUTION_THRESHOLDS.minimumSamples) {
    cautions.push({
      code: 'fewer-than-40',
      severity: 'warning',
      message:
        `Only ${n} samples were analysed; EP09 practice asks for at least ${CAUTION_THRESHOLDS.minimumSamples}, ` +
        'so confidence intervals are wide and single samples weigh heavily.',
    });
  }
  return cautions;
}

/**
 * Spread over the measuring interval: the interval (the plan's, or else the measured comparative range) is cut
 * into thirds and a third holding less than half its target share of the comparative values (default target
 * one third each) is named.
 *
 * @example
 * spreadCaution([1, 1.2, 1.1, 1.3, 9], { interval: [0, 10] })?.code; // 'poor-spread'
 */
export function spreadCaution(
  comparative: readonly number[],
  options: { interval?: [number, number]; targetShares?: [number, number, number] } = {},
): Caution | null {
  const fromPlan = options.interval !== undefined;
  const [lo, hi] = options.interval ?? [Math.min(...comparative), Math.max(...comparative)];
  if (!(hi > lo)) return null;
  const targets = options.targetShares ?? [1 / 3, 1 / 3, 1 / 3];
  const width = (hi - lo) / 3;
  const counts = [0, 0, 0];
  for (const v of comparative) {
    if (v < lo || v > hi) continue;
    counts[Math.min(2, Math.floor((v - lo) / width))]++;
  }
  const n = comparative.length;
  const names = ['lower', 'middle', 'upper'];
  const poor = [0, 1, 2].filter((k) => counts[k] / n < CAUTION_THRESHOLDS.spreadShareFraction * targets[k]);
  if (poor.length === 0) return null;
  const percent = (v: number) => `${formatNumber(100 * v)} %`;
  const details = poor.map((k) => `the ${names[k]} third holds ${percent(counts[k] / n)} of the samples (target ${percent(targets[k])})`);
  return {
    code: 'poor-spread',
    severity: 'warning',
    message:
      `The samples cover the ${fromPlan ? 'planned measuring interval' : 'measured range'} ` +
      `${formatNumber(lo)}–${formatNumber(hi)} unevenly: ${details.join('; ')}. ` +
      'Rule: a third of the interval with less than half its target share of comparative values. ' +
      'Bias estimates there rest on few samples.',
  };
}

/**
 * Pearson correlation coefficient.
 *
 * @example
 * pearsonCorrelation([1, 2, 3], [2, 4, 7]); // ≈ 0.9934
 */
export function pearsonCorrelation(x: readonly number[], y: readonly number[]): number {
  const n = x.length;
  let mx = 0;
  let my = 0;
  for (let i = 0; i < n; i++) {
    mx += x[i];
    my += y[i];
  }
  mx /= n;
  my /= n;
  let sxy = 0;
  let sxx = 0;
  let syy = 0;
  for (let i = 0; i < n; i++) {
    sxy += (x[i] - mx) * (y[i] - my);
    sxx += (x[i] - mx) ** 2;
    syy += (y[i] - my) ** 2;
  }
  return sxx > 0 && syy > 0 ? sxy / Math.sqrt(sxx * syy) : 0;
}

/**
 * r below 0.975 (common practice, no single source): OLS then underestimates the slope because x has error.
 *
 * @example
 * correlationCaution(0.95)?.code; // 'low-correlation'
 */
export function correlationCaution(r: number): Caution | null {
  if (r >= CAUTION_THRESHOLDS.minimumCorrelation) return null;
  return {
    code: 'low-correlation',
    severity: 'warning',
    message:
      `The correlation between the procedures is r = ${formatNumber(r)}, below ${CAUTION_THRESHOLDS.minimumCorrelation}: ` +
      'the comparative values carry error relative to their spread, so OLS underestimates the slope. ' +
      'Rely on Deming or Passing–Bablok, and widen the measured range if you can.',
  };
}

/**
 * Differences growing with concentration: Pearson correlation of |yᵢ − xᵢ| with (xᵢ + yᵢ)/2, tested one-sided
 * with t = r√(n − 2)/√(1 − r²) on n − 2 df at α = 0.05 (a Glejser-type test: Glejser, JASA 1969).
 *
 * @example
 * heteroscedasticityTest([10, 20, 40, 80], [10.5, 21, 42, 84]).correlation; // ≈ 1
 */
export function heteroscedasticityTest(x: readonly number[], y: readonly number[]): { correlation: number; pValue: number } {
  const n = x.length;
  const absDiff = x.map((xi, i) => Math.abs(y[i] - xi));
  const mean = x.map((xi, i) => (xi + y[i]) / 2);
  const r = pearsonCorrelation(mean, absDiff);
  if (n < 3 || r >= 1) return { correlation: r, pValue: r >= 1 ? 0 : 1 };
  const t = (r * Math.sqrt(n - 2)) / Math.sqrt(1 - r * r);
  return { correlation: r, pValue: 1 - tCdf(t, n - 2) };
}

/**
 * Caution from {@link heteroscedasticityTest}: suggests weighted Deming or percent differences.
 *
 * @example
 * heteroscedasticityCaution([10, 20, 40, 80, 160], [10.5, 21, 42, 84, 168])?.code; // 'differences-grow-with-concentration'
 */
export function heteroscedasticityCaution(x: readonly number[], y: readonly number[]): Caution | null {
  const { correlation, pValue } = heteroscedasticityTest(x, y);
  if (!(pValue < CAUTION_THRESHOLDS.heteroscedasticityAlpha) || correlation <= 0) return null;
  return {
    code: 'differences-grow-with-concentration',
    severity: 'warning',
    message:
      `The differences grow with concentration: the absolute differences correlate with the mean of the two procedures ` +
      `(r = ${formatNumber(correlation)}, one-sided p = ${formatNumber(pValue)} < ${CAUTION_THRESHOLDS.heteroscedasticityAlpha}, ` +
      't test of the correlation). Prefer weighted Deming and read the percent difference plot.',
  };
}

/**
 * High-leverage samples, h > 2p/n with p = 2 (Hoaglin & Welsch, Am Stat 1978), on the OLS hat values.
 *
 * @example
 * leverageCaution(['a', 'b', 'c', 'd', 'e'], [0.2, 0.2, 0.2, 0.2, 0.95])?.sampleIds; // ['e']
 */
export function leverageCaution(sampleIds: readonly string[], hat: readonly number[]): Caution | null {
  const threshold = 4 / hat.length;
  const ids = sampleIds.filter((_, i) => hat[i] > threshold);
  if (ids.length === 0) return null;
  return {
    code: 'high-leverage',
    severity: 'warning',
    message:
      `${ids.length === 1 ? 'Sample' : 'Samples'} ${listIds(ids)} ${ids.length === 1 ? 'has' : 'have'} high leverage ` +
      `(hat value above 2p/n = ${formatNumber(threshold)}) and can pull the line. M-estimators (Huber, Tukey, Hampel) ` +
      'protect against outlying candidate values but not against outlying comparative values: compare with MM and look at these samples.',
    sampleIds: ids,
  };
}

/** A redescending fit and, for comparison, the same fit from the other start. */
export interface StartComparison {
  method: MethodKey;
  /** The fit that is reported (started from the S-estimate unless the caller chose otherwise). */
  reported: LineFit;
  /** The same estimator from the other start. */
  alternative: LineFit;
}

/**
 * Redescending fits (Tukey, Hampel) that did not converge, or that land elsewhere from the other start:
 * the two lines are compared at the ends of the measured comparative range and called different when they part
 * by more than 1 % of the measured candidate range.
 *
 * @example
 * // comparisons built from fitRobustLine(x, y, 'tukey', { start: 's-estimate' }) and { start: 'ols' }
 * redescendingCautions(comparisons, x, y).map((c) => c.code);
 */
export function redescendingCautions(
  comparisons: readonly StartComparison[],
  x: readonly number[],
  y: readonly number[],
): Caution[] {
  const cautions: Caution[] = [];
  const xLo = Math.min(...x);
  const xHi = Math.max(...x);
  const yRange = Math.max(...y) - Math.min(...y);
  for (const { method, reported, alternative } of comparisons) {
    const name = methodName(method);
    for (const fit of [reported, alternative]) {
      if (fit.converged === false) {
        cautions.push({
          code: 'redescending-not-converged',
          severity: 'warning',
          message:
            `The ${name} fit from the ${fit.start ?? 'given'} start did not converge within ${fit.iterations ?? 'the allowed'} iterations; ` +
            'its line may not be a minimum. Compare it with MM and Huber.',
        });
      }
    }
    const gap = Math.max(
      Math.abs(reported.intercept + reported.slope * xLo - (alternative.intercept + alternative.slope * xLo)),
      Math.abs(reported.intercept + reported.slope * xHi - (alternative.intercept + alternative.slope * xHi)),
    );
    if (gap > CAUTION_THRESHOLDS.startDependenceShare * yRange) {
      cautions.push({
        code: 'redescending-start-dependent',
        severity: 'warning',
        message:
          `The ${name} fit depends on its start: from the ${reported.start ?? 'given'} start the line is ` +
          `y = ${formatNumber(reported.intercept)} + ${formatNumber(reported.slope)}·x, from the ${alternative.start ?? 'other'} start ` +
          `y = ${formatNumber(alternative.intercept)} + ${formatNumber(alternative.slope)}·x; they part by up to ${formatNumber(gap)} ` +
          `over the measured range (more than ${CAUTION_THRESHOLDS.startDependenceShare * 100} % of the candidate range). ` +
          'Its loss has more than one minimum here: trust MM, which starts from a high-breakdown estimate.',
      });
    }
  }
  return cautions;
}

/**
 * Samples with robust weight below 0.25 in any robust fit, naming the fits; suggests looking for interference.
 *
 * @example
 * downWeightCaution(['a', 'b'], { huber: [1, 0.1] })?.sampleIds; // ['b']
 */
export function downWeightCaution(
  sampleIds: readonly string[],
  weightsByFit: Partial<Record<MethodKey, readonly number[]>>,
): Caution | null {
  const methods = (Object.keys(weightsByFit) as MethodKey[]).filter((k) => weightsByFit[k] !== undefined);
  const flagged = sampleIds
    .map((id, i) => ({ id, fits: methods.filter((m) => (weightsByFit[m] as readonly number[])[i] < CAUTION_THRESHOLDS.lowWeight) }))
    .filter((s) => s.fits.length > 0);
  if (flagged.length === 0) return null;
  const ids = flagged.map((s) => s.id);
  const detail = flagged
    .slice(0, 10)
    .map((s) => `${s.id} (${s.fits.map(methodName).join(', ')})`)
    .join(', ');
  return {
    code: 'heavily-down-weighted',
    severity: 'warning',
    message:
      `${ids.length === 1 ? 'Sample' : 'Samples'} ${listIds(ids)} ${ids.length === 1 ? 'is' : 'are'} heavily down-weighted ` +
      `(robust weight below ${CAUTION_THRESHOLDS.lowWeight}): ${detail}${flagged.length > 10 ? ', …' : ''}. ` +
      'Look for interference — haemolysis, icterus, lipaemia, heterophile antibodies — or a sample mix-up before keeping or excluding them.',
    sampleIds: ids,
  };
}

/**
 * Decision levels outside the measured comparative range: the bias there is an extrapolation.
 *
 * @example
 * extrapolationCaution([70, 400], [60, 300])?.message; // names 400
 */
export function extrapolationCaution(levels: readonly number[], comparative: readonly number[]): Caution | null {
  const lo = Math.min(...comparative);
  const hi = Math.max(...comparative);
  const outside = levels.filter((level) => level < lo || level > hi);
  if (outside.length === 0) return null;
  return {
    code: 'decision-level-outside-range',
    severity: 'warning',
    message:
      `Decision ${outside.length === 1 ? 'level' : 'levels'} ${outside.map(formatNumber).join(', ')} ` +
      `${outside.length === 1 ? 'lies' : 'lie'} outside the measured comparative range ${formatNumber(lo)}–${formatNumber(hi)}: ` +
      'the bias there is an extrapolation of the line. Add samples near those levels.',
  };
}

/**
 * Passing–Bablok assumptions: positive correlation and a linear relation (CUSUM test, Passing & Bablok 1983).
 *
 * @example
 * passingBablokCautions({ correlation: -0.2, cusum: { statistic: 2, critical: 1.36, linear: false } }).length; // 2
 */
export function passingBablokCautions(check: {
  correlation: number;
  cusum?: { statistic: number; critical: number; linear: boolean };
}): Caution[] {
  const cautions: Caution[] = [];
  if (check.correlation < 0) {
    cautions.push({
      code: 'passing-bablok-negative-correlation',
      severity: 'warning',
      message:
        `The procedures correlate negatively (r = ${formatNumber(check.correlation)}), against the Passing–Bablok assumption ` +
        'of a positive relation; its line and intervals are not meaningful here.',
    });
  }
  if (check.cusum && !check.cusum.linear) {
    cautions.push({
      code: 'passing-bablok-nonlinear',
      severity: 'warning',
      message:
        `The CUSUM test rejects a linear relation (statistic ${formatNumber(check.cusum.statistic)} above the critical ` +
        `${formatNumber(check.cusum.critical)}): a straight line does not describe the data, so bias from any line is doubtful. ` +
        'Look at the residual plot; consider a narrower interval.',
    });
  }
  return cautions;
}

/**
 * More than 2.5 % of the samples excluded (EP09 practice, from memory).
 *
 * @example
 * exclusionCaution(37, 3)?.code; // 'many-excluded'
 */
export function exclusionCaution(analysedCount: number, excludedCount: number): Caution | null {
  const total = analysedCount + excludedCount;
  if (total === 0 || excludedCount / total <= CAUTION_THRESHOLDS.excludedShare) return null;
  return {
    code: 'many-excluded',
    severity: 'warning',
    message:
      `${excludedCount} of ${total} samples (${formatNumber((100 * excludedCount) / total)} %) were excluded, more than ` +
      `${CAUTION_THRESHOLDS.excludedShare * 100} %: check that the exclusions have documented causes and do not flatter the result.`,
  };
}

/**
 * Estimators whose verdicts differ at a decision level.
 *
 * @example
 * verdictCaution(126, { ols: 'within', mm: 'inconclusive' })?.code; // 'verdicts-disagree'
 */
export function verdictCaution(level: number, verdicts: Partial<Record<MethodKey, string>>): Caution | null {
  const byVerdict = new Map<string, MethodKey[]>();
  for (const method of Object.keys(verdicts) as MethodKey[]) {
    const verdict = verdicts[method];
    if (verdict === undefined) continue;
    byVerdict.set(verdict, [...(byVerdict.get(verdict) ?? []), method]);
  }
  if (byVerdict.size < 2) return null;
  const groups = [...byVerdict.entries()].map(([verdict, methods]) => `${verdict}: ${methods.map(methodName).join(', ')}`);
  return {
    code: 'verdicts-disagree',
    severity: 'warning',
    message:
      `At decision level ${formatNumber(level)} the estimators disagree about the verdict (${groups.join('; ')}). ` +
      'Decide which estimator suits these data before reading the verdict.',
  };
}

/**
 * Outliers among the differences by generalized ESD (Rosner, Technometrics 1983).
 *
 * @example
 * esdCaution(['a', 'b', 'c'], [0.1, 9, -0.2], [1], 0.05)?.sampleIds; // ['b']
 */
export function esdCaution(
  sampleIds: readonly string[],
  differences: readonly number[],
  outlierIndices: readonly number[],
  alpha: number,
): Caution | null {
  if (outlierIndices.length === 0) return null;
  const ordered = [...outlierIndices].sort((a, b) => a - b);
  const ids = ordered.map((i) => sampleIds[i]);
  const detail = ordered.map((i) => `${sampleIds[i]} (difference ${formatNumber(differences[i])})`).join(', ');
  return {
    code: 'esd-outliers',
    severity: 'warning',
    message:
      `The generalized ESD test (α = ${alpha}) marks ${plural(ids.length, 'difference')} as outlying: ${detail}. ` +
      'Check these samples for a cause before deciding to keep or exclude them.',
    sampleIds: ids,
  };
}

/**
 * An estimator that could not be computed on these data.
 *
 * @example
 * methodFailedCaution('deming', 'all x values are equal').code; // 'method-failed'
 */
export function methodFailedCaution(method: MethodKey, reason: string): Caution {
  return { code: 'method-failed', severity: 'warning', message: `${methodName(method)} could not be computed: ${reason}.` };
}

/**
 * Bootstrap resamples on which a refit failed (skipped, not counted in the interval).
 *
 * @example
 * bootstrapFailureCaution('passingBablok', 12, 2000)?.code; // 'bootstrap-resamples-failed'
 */
export function bootstrapFailureCaution(method: MethodKey, failed: number, resamples: number): Caution | null {
  if (failed === 0) return null;
  return {
    code: 'bootstrap-resamples-failed',
    severity: 'info',
    message:
      `${failed} of ${resamples} bootstrap resamples could not be refitted with ${methodName(method)} ` +
      `(for example all resampled comparative values equal) and were left out of its bias intervals.`,
  };
}
