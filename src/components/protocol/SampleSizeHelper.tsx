/**
 * The designer's sample-size helper: from an expected SD (or CV) of the differences and the allowable bias at each
 * decision level, the samples that make the bias interval narrow enough to decide; with the rule and its assumptions.
 */
import { useId, useState } from 'react';
import { samplesToDecideBias, type DifferenceSpread } from '../../lib/sampleSize';
import { allowableLimitAt, type AllowableLimit } from '../../lib/stats/allowable';
import { StatsInputError } from '../../lib/stats/errors';
import { formatNumber } from './labels';

interface Level {
  value?: number;
  allowableBias?: Partial<AllowableLimit>;
}

type Row = { level: number; allowable?: number; n?: number; sd?: number; problem?: string };

function rowFor(level: Level, spread: DifferenceSpread, expectedBiasPercent: number): Row | null {
  if (typeof level.value !== 'number' || !Number.isFinite(level.value)) return null;
  let allowable: number;
  try {
    allowable = allowableLimitAt(level.allowableBias as AllowableLimit, level.value);
  } catch {
    return { level: level.value, problem: 'complete the allowable bias first' };
  }
  try {
    const result = samplesToDecideBias({ level: level.value, allowable, spread, expectedBiasPercent });
    return { level: level.value, allowable, n: result.n, sd: result.sd };
  } catch (error) {
    if (error instanceof StatsInputError) return { level: level.value, allowable, problem: error.message };
    throw error;
  }
}

const inputClass = 'w-28 rounded border border-neutral-300 bg-white px-2 py-1 text-right tabular-nums';

/**
 * Samples needed at each decision level (samplesToDecideBias), the largest offered as the plan's count.
 *
 * @example
 * <SampleSizeHelper levels={values.decisionLevels} units="mmol/L" onUseCount={(n) => setValue('samplePlan.count', n)} />
 */
export function SampleSizeHelper({ levels, units, onUseCount }: { levels: Level[]; units: string; onUseCount: (n: number) => void }) {
  const id = useId();
  const [kind, setKind] = useState<'sd' | 'cv'>('cv');
  const [spreadText, setSpreadText] = useState('3');
  const [biasText, setBiasText] = useState('0');
  const spreadValue = Number(spreadText);
  const expectedBias = biasText.trim() === '' ? 0 : Number(biasText);
  const spread: DifferenceSpread = kind === 'sd' ? { kind, sd: spreadValue } : { kind, cvPercent: spreadValue };
  const inputsOk = spreadText.trim() !== '' && Number.isFinite(spreadValue) && spreadValue > 0 && Number.isFinite(expectedBias);
  const rows = inputsOk ? levels.map((level) => rowFor(level, spread, expectedBias)).filter((row): row is Row => row !== null) : [];
  const needed = rows.map((row) => row.n).filter((n): n is number => n !== undefined);
  const largest = needed.length > 0 ? Math.max(...needed) : undefined;

  return (
    <section className="rounded border border-neutral-200 bg-neutral-50 p-3 text-sm" aria-labelledby={`${id}-heading`} data-testid="sample-size-helper">
      <h3 id={`${id}-heading`} className="font-semibold">How many samples are enough to decide?</h3>
      <div className="mt-2 flex flex-wrap items-end gap-4">
        <div className="flex flex-col gap-1">
          <label htmlFor={`${id}-kind`} className="font-medium">Expected spread of the differences</label>
          <select id={`${id}-kind`} value={kind} onChange={(e) => setKind(e.currentTarget.value as 'sd' | 'cv')} className="rounded border border-neutral-300 bg-white px-2 py-1">
            <option value="cv">CV in % of the level</option>
            <option value="sd">SD in {units || 'units'}</option>
          </select>
        </div>
        <div className="flex flex-col gap-1">
          <label htmlFor={`${id}-spread`} className="font-medium">{kind === 'cv' ? 'CV of the differences (%)' : `SD of the differences (${units || 'units'})`}</label>
          <input id={`${id}-spread`} inputMode="decimal" value={spreadText} onChange={(e) => setSpreadText(e.currentTarget.value)} className={inputClass} aria-invalid={!inputsOk || undefined} />
        </div>
        <div className="flex flex-col gap-1">
          <label htmlFor={`${id}-bias`} className="font-medium">Expected bias (% of the level)</label>
          <input id={`${id}-bias`} inputMode="decimal" value={biasText} onChange={(e) => setBiasText(e.currentTarget.value)} className={inputClass} />
        </div>
      </div>
      {!inputsOk && <p className="mt-2 text-attention-800">⚠ Enter a spread above 0 and an expected bias as a number.</p>}
      {rows.length > 0 && (
        <table className="mt-3 w-full border-collapse bg-white">
          <caption className="sr-only">Samples needed at each decision level</caption>
          <thead>
            <tr className="border-b border-neutral-200 text-left text-neutral-500">
              <th className="num px-2 py-1 font-medium">Level ({units})</th>
              <th className="num px-2 py-1 font-medium">Allowable bias</th>
              <th className="num px-2 py-1 font-medium">SD at the level</th>
              <th className="num px-2 py-1 font-medium">Samples needed</th>
            </tr>
          </thead>
          <tbody>
            {rows.map((row, index) => (
              <tr key={index} className="border-b border-neutral-100">
                <td className="num px-2 py-1">{formatNumber(row.level)}</td>
                <td className="num px-2 py-1">{row.allowable === undefined ? '—' : `± ${formatNumber(row.allowable)}`}</td>
                <td className="num px-2 py-1">{formatNumber(row.sd)}</td>
                <td className="num px-2 py-1">{row.n ?? <span className="text-attention-800">⚠ {row.problem}</span>}</td>
              </tr>
            ))}
          </tbody>
        </table>
      )}
      {largest !== undefined && (
        <p className="mt-2">
          The most demanding level needs <strong className="tabular-nums" data-testid="sample-size-largest">{largest}</strong> samples.{' '}
          <button type="button" onClick={() => onUseCount(Math.max(largest, 40))} className="rounded border border-brand-700 px-2 py-0.5 text-brand-800 hover:bg-brand-50">
            Plan {Math.max(largest, 40)} samples
          </button>
          {largest < 40 && <span className="text-neutral-600"> (40 at least, as usual practice)</span>}
        </p>
      )}
      <details className="mt-2 text-neutral-700">
        <summary className="cursor-pointer">The rule and its assumptions</summary>
        <p className="mt-1">
          The bias at a level is decided when its 95 % confidence interval, bias ± t·SD/√n, lies inside ± the allowable bias even when the
          bias is as large as expected. The helper gives the smallest n with <span className="font-mono">t(0.975, n − 1) · SD / √n ≤ allowable − |expected bias|</span>;
          for large n this is <span className="font-mono">n ≥ (1.96 · SD / (allowable − |expected bias|))²</span> (the normal-theory interval of a mean; common practice).
        </p>
        <p className="mt-1">
          It assumes independent, roughly normal differences whose SD (or CV) is as entered near each level. A regression's interval at a level
          is wider far from the middle of the data, outliers widen it further, and duplicates narrow the SD — so read the number as a
          lower bound.
        </p>
      </details>
    </section>
  );
}
