import { useMutation, useQuery } from '@tanstack/react-query';
import { useState, type FormEvent } from 'react';
import { api, ApiError } from '../../lib/apiClient';
import { methodName } from '../../lib/stats/cautions';
import { regressionDiagnostics, type ComparisonAnalysis, type MethodKey } from '../../lib/stats/index';
import { decimalsFor, fixed } from './format';
import type { SampleDetailBody, StoredResults } from './types';

const ACTION_WORDS: Record<string, string> = {
  'sample.created': 'Sample created',
  'results.entered': 'Results entered',
  'results.changed': 'Results changed',
  'sample.excluded': 'Excluded from the analysis',
  'sample.included': 'Included again',
};

interface FitRow {
  method: MethodKey;
  residual: number;
  weight?: number;
  hat?: number;
  cooks?: number | null;
}

/** The sample's residual, weight, leverage and Cook's distance in each fit (leverage and D of least-squares steps only). */
function fitRows(analysis: ComparisonAnalysis, index: number): FitRow[] {
  const { comparative: x, candidate: y } = analysis;
  return analysis.methods.flatMap((method) => {
    const fit = analysis.fits[method];
    if (!fit) return [];
    const row: FitRow = { method, residual: y[index] - fit.intercept - fit.slope * x[index] };
    if (method === 'ols') {
      row.hat = analysis.diagnostics.hat[index];
      row.cooks = analysis.diagnostics.cooksDistance[index];
    } else if (fit.weights && fit.hat) {
      const diagnostics = regressionDiagnostics(x, y, fit);
      row.weight = fit.weights[index];
      row.hat = diagnostics.hat[index];
      row.cooks = diagnostics.cooksDistance[index];
    }
    return [row];
  });
}

/**
 * One sample in detail: its values (all replicates), specimen and diagnostic flags, its numbers in each fit,
 * its history, and — for lab scientists — exclude or include with a mandatory reason.
 *
 * @example
 * <SampleDetail slug="eastmere" studyId={id} code="EM-0042" results={results} canExclude locked={false} onChanged={rerun} onClose={close} />
 */
export function SampleDetail({
  slug,
  studyId,
  code,
  results,
  canExclude,
  locked,
  onChanged,
  onClose,
}: {
  slug: string;
  studyId: string;
  code: string;
  results: StoredResults;
  canExclude: boolean;
  locked: boolean;
  onChanged: (message: string) => Promise<void>;
  onClose: () => void;
}) {
  const { analysis, inputs } = results;
  const known = [...inputs.included, ...inputs.excluded, ...inputs.leftOut].find((s) => s.code === code);
  const detail = useQuery({
    queryKey: ['sample', studyId, known?.sampleId],
    queryFn: () => api<SampleDetailBody>('GET', `/api/labs/${slug}/studies/${studyId}/analysis/samples/${known!.sampleId}`),
    enabled: !!known,
  });
  const [reason, setReason] = useState('');
  const [error, setError] = useState<string | null>(null);
  const excluded = detail.data?.excluded ?? inputs.excluded.some((e) => e.code === code);
  const change = useMutation({
    mutationFn: () => api(excluded ? 'DELETE' : 'POST', `/api/labs/${slug}/studies/${studyId}/samples/${known!.sampleId}/exclusion`, { reason }),
    onSuccess: async () => {
      setReason('');
      setError(null);
      await onChanged(excluded ? `${code} is included again; the analysis was run again.` : `${code} is excluded; the analysis was run again.`);
      await detail.refetch();
    },
    onError: (e) => setError(e instanceof ApiError ? (e.fieldError('reason') ?? e.problem.detail) : String(e)),
  });

  const index = analysis.sampleIds.indexOf(code);
  const rows = index >= 0 ? fitRows(analysis, index) : [];
  const flags = index >= 0 ? [...(analysis.diagnostics.flags.find((f) => f.index === index)?.flags.map((f) => `OLS: ${f.message}`) ?? [])] : [];
  for (const [method, robust] of Object.entries(analysis.diagnostics.robust)) {
    for (const f of robust?.flags.find((g) => g.index === index)?.flags ?? []) flags.push(`${methodName(method as MethodKey)}: ${f.message}`);
  }
  if (analysis.esd.outlierSampleIds.includes(code)) flags.push('Generalized ESD: outlying difference');
  const dRes = decimalsFor(rows.map((r) => r.residual));

  function submit(event: FormEvent) {
    event.preventDefault();
    if (reason.trim() === '') {
      setError(`Give a reason to ${excluded ? 'include' : 'exclude'} ${code}; it goes in the audit trail.`);
      return;
    }
    change.mutate();
  }

  return (
    <section className="rounded border border-brand-100 bg-white p-3 text-sm" aria-labelledby="sample-heading" data-testid="sample-detail">
      <div className="flex items-baseline justify-between gap-2">
        <h2 id="sample-heading" className="text-base font-semibold text-brand-900">
          Sample {code}{' '}
          <span className="text-sm font-normal text-neutral-600">
            {excluded ? '✖ Excluded' : index >= 0 ? '✔ In the analysis' : '○ Not in the analysis'}
          </span>
        </h2>
        <button type="button" className="text-brand-700 underline" onClick={onClose}>Close</button>
      </div>

      {detail.data && (
        <table className="mt-2 w-full border-collapse">
          <caption className="sr-only">Results of {code}</caption>
          <thead>
            <tr className="border-b border-neutral-200 text-neutral-500">
              <th className="px-1 py-1 text-left font-medium">Procedure</th>
              <th className="num px-1 py-1 font-medium">Replicate</th>
              <th className="num px-1 py-1 font-medium">Value</th>
              <th className="px-1 py-1 text-left font-medium">Run date</th>
            </tr>
          </thead>
          <tbody>
            {detail.data.values.map((v) => (
              <tr key={`${v.procedure}-${v.replicate}`} className="border-b border-neutral-100">
                <td className="px-1 py-0.5">{v.procedure === 'candidate' ? 'Candidate' : 'Comparative'}</td>
                <td className="num px-1 py-0.5">{v.replicate}</td>
                <td className="num px-1 py-0.5">{v.censored ?? ''}{v.value} {v.unit}</td>
                <td className="px-1 py-0.5">{v.runDate ?? '—'}</td>
              </tr>
            ))}
          </tbody>
        </table>
      )}

      <h3 className="mt-3 font-medium text-neutral-800">Flags</h3>
      <ul className="mt-1 list-none text-neutral-800" data-testid="sample-flags">
        {detail.data?.sample.flags.map((f) => <li key={f}>⚑ Specimen: {f}{f === 'other' && detail.data?.sample.flagNote ? ` (${detail.data.sample.flagNote})` : ''}</li>)}
        {flags.map((f) => <li key={f}>⚑ {f}</li>)}
        {flags.length === 0 && (detail.data?.sample.flags.length ?? 0) === 0 && <li className="text-neutral-500">No flag.</li>}
      </ul>

      {rows.length > 0 && (
        <table className="mt-3 w-full border-collapse" data-testid="sample-fits">
          <caption className="text-left font-medium text-neutral-800">In each fit</caption>
          <thead>
            <tr className="border-b border-neutral-200 text-neutral-500">
              <th className="px-1 py-1 text-left font-medium">Fit</th>
              <th className="num px-1 py-1 font-medium">Residual</th>
              <th className="num px-1 py-1 font-medium">Weight</th>
              <th className="num px-1 py-1 font-medium">Leverage</th>
              <th className="num px-1 py-1 font-medium">Cook's D</th>
            </tr>
          </thead>
          <tbody>
            {rows.map((r) => (
              <tr key={r.method} className="border-b border-neutral-100">
                <td className="px-1 py-0.5">{methodName(r.method)}</td>
                <td className="num px-1 py-0.5">{fixed(r.residual, dRes)}</td>
                <td className="num px-1 py-0.5">{fixed(r.weight, 3)}</td>
                <td className="num px-1 py-0.5">{fixed(r.hat, 3)}</td>
                <td className="num px-1 py-0.5">{fixed(r.cooks, 3)}</td>
              </tr>
            ))}
          </tbody>
        </table>
      )}

      {canExclude && !locked && known && (
        <form onSubmit={submit} className="mt-3 grid gap-2 border-t border-neutral-200 pt-3" noValidate>
          <label htmlFor="exclusion-reason" className="font-medium text-neutral-800">
            Reason to {excluded ? 'include' : 'exclude'} {code} (goes in the audit trail)
          </label>
          <textarea
            id="exclusion-reason"
            value={reason}
            onChange={(e) => setReason(e.currentTarget.value)}
            rows={2}
            required
            aria-invalid={error ? true : undefined}
            aria-describedby={error ? 'exclusion-reason-error' : undefined}
            className="rounded border border-neutral-300 px-2 py-1 aria-[invalid]:border-attention-600"
          />
          {error && <p id="exclusion-reason-error" role="alert" className="text-xs text-attention-800">⚠ {error}</p>}
          <button type="submit" disabled={change.isPending} className="justify-self-start rounded bg-brand-700 px-3 py-1 font-medium text-white hover:bg-brand-800 disabled:opacity-60">
            {change.isPending ? 'Working…' : excluded ? 'Include in the analysis' : 'Exclude from the analysis'}
          </button>
        </form>
      )}

      <h3 className="mt-3 font-medium text-neutral-800">History</h3>
      <ol className="mt-1 grid gap-1 text-xs text-neutral-700" data-testid="sample-history">
        {detail.data?.history.map((h) => (
          <li key={h.id}>
            <span className="tabular-nums">{h.occurredAt.replace('T', ' ').slice(0, 16)}</span> · {ACTION_WORDS[h.action] ?? h.action}
            {h.actor ? ` by ${h.actor}` : ''}
            {typeof h.data.reason === 'string' ? ` — “${h.data.reason}”` : ''}
          </li>
        ))}
        {detail.data && detail.data.history.length === 0 && <li>No event recorded for this sample.</li>}
      </ol>
    </section>
  );
}
