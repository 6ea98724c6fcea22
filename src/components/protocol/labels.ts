/** Words and number formats shared by the protocol designer and the read-only protocol view. */
import type { PsiFamily } from '../../lib/protocolSchema';

/**
 * Plain names of the straight-line estimators a protocol may choose as primary.
 *
 * @example
 * ESTIMATOR_LABELS.passingBablok; // 'Passing–Bablok'
 */
export const ESTIMATOR_LABELS: Record<string, string> = {
  ols: 'Ordinary least squares',
  deming: 'Deming',
  weightedDeming: 'Weighted Deming',
  passingBablok: 'Passing–Bablok',
  huber: 'Huber M-estimator',
  tukey: 'Tukey bisquare M-estimator',
  hampel: 'Hampel M-estimator',
  mm: 'MM-estimator',
};

/**
 * Names of the ψ families.
 *
 * @example
 * PSI_LABELS.tukey; // 'Tukey bisquare'
 */
export const PSI_LABELS: Record<PsiFamily | string, string> = { huber: 'Huber', tukey: 'Tukey bisquare', hampel: 'Hampel' };

/**
 * A number with up to 4 significant figures, without trailing zeros; '—' for anything that is not a finite number.
 *
 * @example
 * formatNumber(1 / 3); // '0.3333'
 * formatNumber(126); // '126'
 */
export function formatNumber(value: unknown): string {
  if (typeof value !== 'number' || !Number.isFinite(value)) return '—';
  return String(Number(value.toPrecision(4)));
}

/**
 * The allowable-bias rule in words.
 *
 * @example
 * ruleText({ rule: 'larger', absolute: 6, percent: 8 }, 'mg/dL'); // '± 6 mg/dL or ± 8 %, whichever is larger'
 */
export function ruleText(bias: { rule?: string; absolute?: number; percent?: number }, units: string): string {
  const absolute = `± ${formatNumber(bias.absolute)} ${units}`.trim();
  const percent = `± ${formatNumber(bias.percent)} %`;
  if (bias.rule === 'absolute') return absolute;
  if (bias.rule === 'percent') return percent;
  if (bias.rule === 'larger') return `${absolute} or ${percent}, whichever is larger`;
  return '—';
}

/**
 * A protocol version's state as an icon and a word (never colour alone).
 *
 * @example
 * STATUS_LABELS.approved; // { icon: '✔', word: 'Approved' }
 */
export const STATUS_LABELS: Record<'draft' | 'approved', { icon: string; word: string }> = {
  draft: { icon: '✎', word: 'Draft' },
  approved: { icon: '✔', word: 'Approved' },
};
