import { methodName } from '../../lib/stats/cautions';
import type { ComparisonAnalysis, FitBias, MethodKey } from '../../lib/stats/index';
import { decimalsFor, fixed, interval } from './format';
import type { StoredResults } from './types';

const th = 'px-2 py-1.5 font-medium';
const td = 'px-2 py-1';

/** ★ and a word, so the primary estimator is marked without colour. */
function PrimaryMark() {
  return <span className="ml-1 rounded bg-brand-50 px-1 text-xs text-brand-800">★ primary</span>;
}

/**
 * Every estimator side by side: intercept and slope with their CIs, scale, iterations, convergence and start.
 *
 * @example
 * <EstimatorTable analysis={results.analysis} />
 */
export function EstimatorTable({ analysis }: { analysis: ComparisonAnalysis }) {
  // Stored JSON does not keep key order, so the engine's method list gives the order.
  const methods = analysis.methods.filter((m) => analysis.fits[m]);
  const fits = methods.map((m) => analysis.fits[m]!);
  const dA = decimalsFor(fits.flatMap((f) => [f.intercept, ...f.interceptCI]));
  const dB = Math.max(3, decimalsFor(fits.flatMap((f) => [f.slope, ...f.slopeCI])));
  const dS = decimalsFor(fits.map((f) => f.scale));
  const percent = Math.round(100 * (fits[0]?.confidence ?? 0.95));
  return (
    <div className="overflow-x-auto">
      <table className="w-full border-collapse bg-white text-sm" data-testid="estimator-table">
        <caption className="px-2 py-1 text-left text-sm font-semibold text-brand-900">Estimators side by side (y = intercept + slope · x)</caption>
        <thead>
          <tr className="border-b border-neutral-200 text-neutral-500">
            <th className={`${th} text-left`}>Estimator</th>
            <th className={`num ${th}`}>Intercept</th>
            <th className={`num ${th}`}>{percent} % CI</th>
            <th className={`num ${th}`}>Slope</th>
            <th className={`num ${th}`}>{percent} % CI</th>
            <th className={`num ${th}`}>Scale</th>
            <th className={`num ${th}`}>Iterations</th>
            <th className={`${th} text-left`}>Converged</th>
            <th className={`${th} text-left`}>Start / notes</th>
          </tr>
        </thead>
        <tbody>
          {methods.map((m, k) => {
            const fit = fits[k];
            const notes = [fit.start ? `from ${fit.start}` : '', fit.lambda !== undefined ? `λ = ${fixed(fit.lambda, decimalsFor([fit.lambda]))}` : ''].filter(Boolean).join('; ');
            return (
              <tr key={m} className="border-b border-neutral-100" data-method={m}>
                <td className={td}>
                  {methodName(m)}
                  {m === analysis.primary && <PrimaryMark />}
                </td>
                <td className={`num ${td}`}>{fixed(fit.intercept, dA)}</td>
                <td className={`num ${td}`}>{interval(fit.interceptCI, dA)}</td>
                <td className={`num ${td}`}>{fixed(fit.slope, dB)}</td>
                <td className={`num ${td}`}>{interval(fit.slopeCI, dB)}</td>
                <td className={`num ${td}`}>{fixed(fit.scale, dS)}</td>
                <td className={`num ${td}`}>{fit.iterations ?? '—'}</td>
                <td className={td}>{fit.converged === undefined ? '—' : fit.converged ? '✔ Yes' : '✖ No'}</td>
                <td className={`${td} text-neutral-600`}>{notes || '—'}</td>
              </tr>
            );
          })}
          {(Object.keys(analysis.fitErrors) as MethodKey[]).map((m) => (
            <tr key={m} className="border-b border-neutral-100">
              <td className={td}>{methodName(m)}</td>
              <td className={`${td} text-attention-800`} colSpan={8}>⚠ Not computed: {analysis.fitErrors[m]}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </div>
  );
}

const VERDICT_WORDS = {
  within: { icon: '✔', word: 'Within', tone: 'text-brand-800' },
  beyond: { icon: '✖', word: 'Beyond', tone: 'text-attention-800' },
  inconclusive: { icon: '◐', word: 'Inconclusive', tone: 'text-neutral-800' },
} as const;

function Verdict({ entry, pending }: { entry: FitBias | undefined; pending: boolean }) {
  if (entry?.verdict) {
    const v = VERDICT_WORDS[entry.verdict];
    return (
      <span className={`whitespace-nowrap font-medium ${v.tone}`} data-verdict={entry.verdict}>
        <span aria-hidden="true">{v.icon}</span> {v.word}
      </span>
    );
  }
  return <span className="whitespace-nowrap text-neutral-500">{pending ? '⧗ Waiting for the bootstrap' : '— No CI'}</span>;
}

/**
 * Bias at each decision level for every estimator (absolute and percent, CI, allowable limit, verdict), the
 * protocol's primary estimator marked, and a note where the estimators disagree about the verdict.
 *
 * @example
 * <DecisionTable results={results} />
 */
export function DecisionTable({ results }: { results: StoredResults }) {
  const { analysis, inputs, bootstrap } = results;
  const pending = bootstrap.status !== 'done';
  const units = inputs.settings.units;
  const percent = Math.round(100 * (Object.values(analysis.fits)[0]?.confidence ?? 0.95));
  // Long sources of the allowable limits go under the table, numbered, so the level headers stay short.
  const sources = [...new Set(inputs.settings.decisionLevels.map((l) => l.allowableBias.source))];
  const sourceNumber = (source: string) => sources.indexOf(source) + 1;
  return (
    <div className="overflow-x-auto">
      <table className="w-full border-collapse bg-white text-sm" data-testid="decision-table">
        <caption className="px-2 py-1 text-left text-sm font-semibold text-brand-900">Bias at the medical decision levels</caption>
        <thead>
          <tr className="border-b border-neutral-200 text-neutral-500">
            <th className={`${th} text-left`}>Estimator</th>
            <th className={`num ${th}`}>Bias ({units})</th>
            <th className={`num ${th}`}>{percent} % CI</th>
            <th className={`num ${th}`}>Bias (%)</th>
            <th className={`num ${th}`}>{percent} % CI (%)</th>
            <th className={`num ${th}`}>Allowable (±{units})</th>
            <th className={`${th} text-left`}>Verdict</th>
            <th className={`${th} text-left`}>CI from</th>
          </tr>
        </thead>
        {analysis.biasAtDecisionLevels.map((row, k) => {
          const level = inputs.settings.decisionLevels[k];
          const methods = analysis.methods.filter((m) => row.fits[m]);
          const entries = methods.map((m) => row.fits[m]!);
          const dAbs = decimalsFor(entries.flatMap((e) => [e.bias, ...(e.ci ?? [])]), 3);
          const dPct = decimalsFor(entries.flatMap((e) => [e.percentBias, ...(e.percentCI ?? [])]), 3);
          const verdicts = new Map<string, MethodKey[]>();
          for (const m of methods) {
            const verdict = row.fits[m]?.verdict;
            if (verdict) verdicts.set(verdict, [...(verdicts.get(verdict) ?? []), m]);
          }
          const source = level?.allowableBias.source;
          return (
            <tbody key={row.level} data-level={row.level} className="border-b-2 border-neutral-200">
              <tr className="bg-neutral-50">
                <th colSpan={8} scope="rowgroup" className="px-2 py-1 text-left font-semibold text-neutral-800">
                  {row.level} {units}
                  {level?.meaning ? ` — ${level.meaning}` : ''}
                  {row.allowableLimit !== undefined && (
                    <span className="font-normal text-neutral-600">
                      {' '}· allowable bias ±{fixed(row.allowableLimit, dAbs)} {units}
                      {source && <sup><a href={`#limit-source-${sourceNumber(source)}`} className="text-brand-700" aria-label={`Source ${sourceNumber(source)} of the limit`}>[{sourceNumber(source)}]</a></sup>}
                    </span>
                  )}
                </th>
              </tr>
              {methods.map((m, i) => {
                const e = entries[i];
                return (
                  <tr key={m} className={`border-b border-neutral-100 ${m === analysis.primary ? 'bg-brand-50/50' : ''}`} data-method={m}>
                    <td className={td}>
                      {methodName(m)}
                      {m === analysis.primary && <PrimaryMark />}
                    </td>
                    <td className={`num ${td}`}>{fixed(e.bias, dAbs)}</td>
                    <td className={`num ${td}`}>{interval(e.ci, dAbs)}</td>
                    <td className={`num ${td}`}>{fixed(e.percentBias, dPct)}</td>
                    <td className={`num ${td}`}>{interval(e.percentCI, dPct)}</td>
                    <td className={`num ${td}`}>{row.allowableLimit === undefined ? '—' : fixed(row.allowableLimit, dAbs)}</td>
                    <td className={td}>
                      <Verdict entry={e} pending={pending} />
                    </td>
                    <td className={`${td} text-xs text-neutral-600`}>{e.ciMethod ? e.ciMethod.replace('bootstrap-', 'bootstrap ').replace('bca', 'BCa') : pending ? 'bootstrap (queued)' : '—'}</td>
                  </tr>
                );
              })}
              {verdicts.size > 1 && (
                <tr data-testid="verdict-disagreement">
                  <td colSpan={8} className="px-2 py-1 text-sm text-attention-800">
                    ⚠ The estimators disagree at {row.level} {units}:{' '}
                    {[...verdicts].map(([verdict, ms]) => `${VERDICT_WORDS[verdict as keyof typeof VERDICT_WORDS].word.toLowerCase()} for ${ms.map(methodName).join(', ')}`).join('; ')}.
                  </td>
                </tr>
              )}
            </tbody>
          );
        })}
      </table>
      <ol className="mt-1 grid gap-0.5 text-xs text-neutral-600">
        {sources.map((source, k) => (
          <li key={source} id={`limit-source-${k + 1}`}>[{k + 1}] Allowable limit: {source}</li>
        ))}
      </ol>
    </div>
  );
}
