import { useQuery } from '@tanstack/react-query';
import { useEffect } from 'react';
import { api } from '../lib/apiClient';
import type { Coverage } from '../server/coverage';
import { QueryRoot } from './QueryRoot';
import { RESULTS_CHANGED } from './grid/events';

const fmt = (value: number) => Number(value.toPrecision(4)).toString();

function Bar({ value, target, label }: { value: number; target: number; label: string }) {
  const share = target > 0 ? Math.min(1, value / target) : 1;
  return (
    <div className="h-2 w-full rounded bg-neutral-100" role="img" aria-label={label}>
      <div className={`h-2 rounded ${share >= 1 ? 'bg-brand-600' : 'bg-attention-600'}`} style={{ width: `${Math.round(share * 100)}%` }} />
    </div>
  );
}

/** Met or how many to go, always as an icon and words. */
function Progress({ value, target }: { value: number; target: number }) {
  return value >= target ? <span className="text-brand-700">✔ met</span> : <span className="text-attention-800">◌ {target - value} to go</span>;
}

function Panel({ slug, studyId }: { slug: string; studyId: string }) {
  const query = useQuery({ queryKey: ['coverage', studyId], queryFn: () => api<{ coverage: Coverage }>('GET', `/api/labs/${slug}/studies/${studyId}/coverage`) });
  useEffect(() => {
    const refresh = () => query.refetch();
    window.addEventListener(RESULTS_CHANGED, refresh);
    return () => window.removeEventListener(RESULTS_CHANGED, refresh);
  }, [query.refetch]);
  const c = query.data?.coverage;
  if (query.isError) return <p role="alert" className="text-sm text-attention-800">⚠ Coverage could not be loaded.</p>;
  if (!c) return <p className="text-sm text-neutral-500">Loading coverage…</p>;
  const s = c.samples;
  return (
    <section className="grid gap-4 rounded border border-neutral-200 bg-white p-4 text-sm" aria-labelledby="coverage-heading" data-testid="coverage">
      <h2 id="coverage-heading" className="font-semibold">Coverage of the sample plan</h2>
      <table className="w-full border-collapse">
        <caption className="sr-only">Samples, replicates and days against the plan</caption>
        <thead>
          <tr className="border-b border-neutral-200 text-left text-neutral-500">
            <th className="py-1 font-medium">What</th>
            <th className="num py-1 font-medium">Have</th>
            <th className="num py-1 font-medium">Plan</th>
            <th className="w-1/3 py-1 pl-3 font-medium"><span className="sr-only">Progress</span></th>
            <th className="py-1 pl-3 font-medium">State</th>
          </tr>
        </thead>
        <tbody>
          {[
            ['Samples entered', s.entered, s.planned],
            ['Pairs usable for the regression', s.paired, s.planned],
            [`All ${s.replicates} replicate${s.replicates === 1 ? '' : 's'} of both procedures`, s.replicatesComplete, s.planned],
            ['Days with results', c.days.covered, c.days.planned],
          ].map(([label, have, plan]) => (
            <tr key={label as string} className="border-b border-neutral-100" data-testid={`coverage-${(label as string).split(' ')[0].toLowerCase()}`}>
              <td className="py-1">{label}</td>
              <td className="num py-1">{have}</td>
              <td className="num py-1">{plan}</td>
              <td className="py-1 pl-3"><Bar value={have as number} target={plan as number} label={`${have} of ${plan}`} /></td>
              <td className="py-1 pl-3"><Progress value={have as number} target={plan as number} /></td>
            </tr>
          ))}
        </tbody>
      </table>
      <table className="w-full border-collapse" data-testid="coverage-parts">
        <caption className="mb-1 text-left font-medium">Spread over the measuring interval ({fmt(c.measuringInterval.low)}–{fmt(c.measuringInterval.high)} {c.units}, by the comparative mean)</caption>
        <thead>
          <tr className="border-b border-neutral-200 text-left text-neutral-500">
            <th className="py-1 font-medium">Part</th>
            <th className="num py-1 font-medium">From</th>
            <th className="num py-1 font-medium">To</th>
            <th className="num py-1 font-medium">Target share</th>
            <th className="num py-1 font-medium">Samples</th>
            <th className="num py-1 font-medium">Target</th>
            <th className="w-1/4 py-1 pl-3 font-medium"><span className="sr-only">Progress</span></th>
            <th className="py-1 pl-3 font-medium">State</th>
          </tr>
        </thead>
        <tbody>
          {c.parts.map((part) => (
            <tr key={part.label} className="border-b border-neutral-100">
              <td className="py-1">{part.label}</td>
              <td className="num py-1">{fmt(part.low)}</td>
              <td className="num py-1">{fmt(part.high)}</td>
              <td className="num py-1">{Math.round(part.share * 100)} %</td>
              <td className="num py-1">{part.count}</td>
              <td className="num py-1">{part.target}</td>
              <td className="py-1 pl-3"><Bar value={part.count} target={part.target} label={`${part.count} of ${part.target}`} /></td>
              <td className="py-1 pl-3"><Progress value={part.count} target={part.target} /></td>
            </tr>
          ))}
        </tbody>
      </table>
      {(c.outside.below > 0 || c.outside.above > 0) && (
        <p className="text-attention-800">⚠ Outside the measuring interval: {c.outside.below} below, {c.outside.above} above (kept; the analysis will point them out).</p>
      )}
      {c.days.dates.length > 0 && <p className="text-neutral-600">Run dates: {c.days.dates.join(', ')}</p>}
      {c.notes.length > 0 && (
        <div>
          <h3 className="font-medium">Censored results (automatic notes)</h3>
          <ul className="mt-1 list-disc pl-5 text-neutral-700">
            {c.notes.map((note) => <li key={note}>{note}</li>)}
          </ul>
        </div>
      )}
    </section>
  );
}

/** Coverage of the sample plan; refreshes whenever the grid or an import changes results. */
export default function CoveragePanel(props: { slug: string; studyId: string }) {
  return (
    <QueryRoot>
      <Panel {...props} />
    </QueryRoot>
  );
}
