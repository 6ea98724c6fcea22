import { useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import { useState } from 'react';
import { api, ApiError } from '../../lib/apiClient';
import { methodName } from '../../lib/stats/cautions';
import { QueryRoot } from '../QueryRoot';
import { FormMessage } from '../ui/Field';
import { CautionsPanel } from './Cautions';
import { Plots } from './Plots';
import { SampleDetail } from './SampleDetail';
import { DecisionTable, EstimatorTable } from './Tables';
import type { AnalysisViewBody, Highlight } from './types';

interface Props {
  slug: string;
  studyId: string;
  canRun: boolean;
  canExclude: boolean;
  standingCaution: string;
}

function Workspace({ slug, studyId, canRun, canExclude, standingCaution }: Props) {
  const url = `/api/labs/${slug}/studies/${studyId}/analysis`;
  const queryClient = useQueryClient();
  const view = useQuery({
    queryKey: ['analysis', studyId],
    queryFn: () => api<AnalysisViewBody>('GET', url),
    // Poll while the bootstrap job works, so progress shows and the page refreshes when it is done.
    refetchInterval: (query) => {
      const job = query.state.data?.job;
      return job && (job.status === 'queued' || job.status === 'running') ? 1000 : false;
    },
  });
  const [message, setMessage] = useState<{ tone: 'error' | 'info'; text: string } | null>(null);
  const [selected, setSelected] = useState<string | null>(null);
  const [hovered, setHovered] = useState<string | null>(null);
  const highlight: Highlight = { selected, hovered, onHover: setHovered, onSelect: setSelected };

  const run = useMutation({
    mutationFn: () => api<AnalysisViewBody & { reused: boolean }>('POST', url),
    onSuccess: (data) => {
      queryClient.setQueryData(['analysis', studyId], data);
      setMessage({ tone: 'info', text: data.reused ? 'Nothing changed since the last run; it is shown as it was.' : 'Analysis run and stored; the bootstrap intervals follow (see their progress above).' });
    },
    onError: (error) => setMessage({ tone: 'error', text: error instanceof ApiError ? error.problem.detail : String(error) }),
  });

  const data = view.data;
  const results = data?.run?.results ?? null;
  const job = data?.job;
  const locked = data ? data.study.state === 'in_review' || data.study.state === 'signed' : true;

  async function afterExclusionChange(text: string) {
    if (canRun) {
      const next = await api<AnalysisViewBody>('POST', url);
      queryClient.setQueryData(['analysis', studyId], next);
    } else {
      await view.refetch();
    }
    setMessage({ tone: 'info', text });
  }

  return (
    <div className="grid gap-4" data-testid="analysis-workspace">
      <CautionsPanel results={results} standingCaution={standingCaution} onSelect={setSelected} />

      <div className="flex flex-wrap items-center gap-3 rounded border border-neutral-200 bg-white px-3 py-2 text-sm" data-testid="run-status">
        {!data && view.isLoading && <span>Loading the analysis…</span>}
        {data && !data.run && <span>○ Not analysed yet.</span>}
        {data?.run && (
          <>
            <span className={data.current ? 'text-brand-800' : 'font-medium text-attention-800'} data-testid="run-currency">
              {data.current ? '✔ Current' : '⚠ Out of date: data, exclusions or settings changed since this run'}
            </span>
            <span className="text-neutral-600">
              Run {new Date(data.run.createdAt).toISOString().replace('T', ' ').slice(0, 16)} UTC · engine {data.run.engineVersion} · inputs{' '}
              <code className="text-xs">{data.run.inputsHash.slice(0, 12)}</code> · {results?.analysis.n} samples · primary {results ? methodName(results.analysis.primary) : ''}
            </span>
            <span data-testid="bootstrap-status">
              {data.bootstrapDone ? (
                <span className="text-brand-800">✔ Bootstrap intervals done ({results?.bootstrap.resamples} resamples)</span>
              ) : job?.status === 'failed' || results?.bootstrap.status === 'failed' ? (
                <span className="text-attention-800">✖ Bootstrap failed: {job?.error ?? results?.bootstrap.error}</span>
              ) : (
                <span className="flex items-center gap-2">
                  ⧗ Bootstrap intervals: {job?.message ?? 'waiting'}
                  <progress max={1} value={job?.progress ?? 0} aria-label="Bootstrap progress" className="h-2 w-32" />
                </span>
              )}
            </span>
          </>
        )}
        {canRun && (
          <button type="button" onClick={() => run.mutate()} disabled={run.isPending} className="ml-auto rounded bg-brand-700 px-3 py-1 font-medium text-white hover:bg-brand-800 disabled:opacity-60">
            {run.isPending ? 'Running…' : data?.run ? 'Run the analysis again' : 'Run the analysis'}
          </button>
        )}
      </div>
      {message && <FormMessage tone={message.tone}>{message.text}</FormMessage>}
      {view.isError && <FormMessage tone="error">The analysis could not be loaded.</FormMessage>}

      {results && (
        <>
          <DecisionTable results={results} />
          <div className="grid gap-4 xl:grid-cols-[minmax(0,1fr)_26rem]">
            <div className="grid min-w-0 gap-4">
              <Plots results={results} units={results.inputs.settings.units} highlight={highlight} />
              <EstimatorTable analysis={results.analysis} />
            </div>
            <aside className="xl:sticky xl:top-2 xl:self-start">
              <label className="mb-2 flex items-center gap-2 text-sm">
                Inspect sample
                <select
                  className="rounded border border-neutral-300 bg-white px-2 py-1"
                  value={selected ?? ''}
                  onChange={(e) => setSelected(e.currentTarget.value || null)}
                  data-testid="sample-picker"
                >
                  <option value="">Choose…</option>
                  {[...results.inputs.included, ...results.inputs.excluded, ...results.inputs.leftOut]
                    .map((s) => s.code)
                    .sort()
                    .map((code) => (
                      <option key={code} value={code}>{code}</option>
                    ))}
                </select>
              </label>
              {selected ? (
                <SampleDetail
                  key={selected}
                  slug={slug}
                  studyId={studyId}
                  code={selected}
                  results={results}
                  canExclude={canExclude}
                  locked={locked}
                  onChanged={afterExclusionChange}
                  onClose={() => setSelected(null)}
                />
              ) : (
                <p className="rounded border border-dashed border-neutral-300 p-3 text-sm text-neutral-600">Select a point in any plot, a sample in a data table or a caution to see it here.</p>
              )}
            </aside>
          </div>
        </>
      )}
    </div>
  );
}

/**
 * The analysis workspace of a study (one island, so that hovering or selecting a sample reaches every plot).
 *
 * @example
 * <AnalysisWorkspace client:only="react" slug={lab.slug} studyId={study.id} canRun canExclude standingCaution={STANDING_CAUTION} />
 */
export default function AnalysisWorkspace(props: Props) {
  return (
    <QueryRoot>
      <Workspace {...props} />
    </QueryRoot>
  );
}
