import type { Caution } from '../../lib/stats/cautions';
import type { StoredResults } from './types';

/**
 * The cautions panel at the top of the workspace: the standing caution that the medical director decides, the
 * engine's data-driven cautions naming their samples, and the samples excluded or left out of this run.
 *
 * @example
 * <CautionsPanel results={results} standingCaution={STANDING_CAUTION} onSelect={setSelected} />
 */
export function CautionsPanel({ results, standingCaution, onSelect }: { results: StoredResults | null; standingCaution: string; onSelect: (code: string) => void }) {
  const cautions: Caution[] = results?.analysis.cautions ?? [];
  const inputs = results?.inputs;
  return (
    <section className="rounded border border-attention-200 bg-attention-50 p-3 text-sm" aria-labelledby="cautions-heading" data-testid="cautions-panel">
      <h2 id="cautions-heading" className="font-semibold text-attention-800">Cautions</h2>
      <p className="mt-1 text-neutral-800" data-testid="standing-caution">
        <span aria-hidden="true">⚖ </span>
        {standingCaution}
      </p>
      {results && (
        <ul className="mt-2 grid gap-1.5">
          {cautions.length === 0 && <li className="text-neutral-700">ℹ No caution from the data.</li>}
          {cautions.map((caution, k) => (
            <li key={`${caution.code}-${k}`} className="flex flex-wrap items-baseline gap-x-2" data-caution={caution.code}>
              <span className={caution.severity === 'warning' ? 'font-medium text-attention-800' : 'font-medium text-neutral-700'}>
                {caution.severity === 'warning' ? '⚠ Warning' : 'ℹ Note'}
              </span>
              <span className="text-neutral-900">{caution.message}</span>
              {caution.sampleIds && caution.sampleIds.length > 0 && (
                <span className="flex flex-wrap gap-1 text-xs">
                  {caution.sampleIds.map((code) => (
                    <button key={code} type="button" className="rounded border border-attention-200 bg-white px-1.5 text-brand-800 hover:bg-brand-50" onClick={() => onSelect(code)}>
                      Inspect {code}
                    </button>
                  ))}
                </span>
              )}
            </li>
          ))}
        </ul>
      )}
      {inputs && (inputs.excluded.length > 0 || inputs.leftOut.length > 0) && (
        <div className="mt-2 border-t border-attention-200 pt-2" data-testid="excluded-samples">
          <h3 className="font-medium text-neutral-800">Samples not in this analysis</h3>
          <ul className="mt-1 grid gap-0.5">
            {inputs.excluded.map((e) => (
              <li key={e.sampleId}>
                <button type="button" className="text-brand-800 underline-offset-2 hover:underline" onClick={() => onSelect(e.code)}>{e.code}</button>
                {' '}— ✖ Excluded: {e.reason}
              </li>
            ))}
            {inputs.leftOut.map((e) => (
              <li key={e.sampleId}>
                <button type="button" className="text-brand-800 underline-offset-2 hover:underline" onClick={() => onSelect(e.code)}>{e.code}</button>
                {' '}— ○ {e.note}
              </li>
            ))}
          </ul>
        </div>
      )}
    </section>
  );
}
