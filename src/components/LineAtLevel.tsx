import { useId, useState } from 'react';
import { lineBias } from '../lib/stats/lineBias';

/**
 * What a fitted line means at one medical decision level: B(Xc) = a + (b − 1)·Xc (lineBias).
 * A point estimate only; the analysis workspace gives the confidence interval that a verdict needs.
 */
export default function LineAtLevel() {
  const id = useId();
  const [intercept, setIntercept] = useState(2);
  const [slope, setSlope] = useState(1.03);
  const [level, setLevel] = useState(126);
  const [shown, setShown] = useState<null | { bias: number; percent: number }>(null);

  const field = (label: string, value: number, set: (v: number) => void, step: string) => (
    <label className="flex flex-col gap-1 text-sm">
      <span className="text-neutral-600">{label}</span>
      <input
        type="number"
        step={step}
        value={Number.isFinite(value) ? value : ''}
        onChange={(e) => set(e.currentTarget.valueAsNumber)}
        className="w-28 rounded border border-neutral-300 bg-white px-2 py-1 text-right tabular-nums"
        id={`${id}-${label}`}
      />
    </label>
  );

  const ready = [intercept, slope, level].every(Number.isFinite) && level !== 0;
  return (
    <div className="rounded-lg border border-neutral-200 bg-white p-4" data-testid="line-at-level">
      <div className="flex flex-wrap items-end gap-4">
        {field('Intercept a', intercept, setIntercept, 'any')}
        {field('Slope b', slope, setSlope, 'any')}
        {field('Decision level', level, setLevel, 'any')}
        <button
          type="button"
          disabled={!ready}
          onClick={() => {
            const { bias, percentBias } = lineBias(intercept, slope, level);
            setShown({ bias, percent: percentBias });
          }}
          className="rounded bg-brand-700 px-3 py-1.5 text-sm font-medium text-white hover:bg-brand-800 disabled:opacity-50"
        >
          Show the bias
        </button>
      </div>
      <p className="mt-3 text-sm" aria-live="polite" data-testid="line-at-level-result">
        {shown
          ? `At ${level}, the candidate reads ${shown.bias >= 0 ? 'higher' : 'lower'} by ${Math.abs(shown.bias).toPrecision(3)} (${shown.percent.toFixed(1)} %). A verdict also needs the confidence interval of this bias.`
          : 'Enter a line and a decision level.'}
      </p>
    </div>
  );
}
