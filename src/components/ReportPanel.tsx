import { useMutation, useQuery } from '@tanstack/react-query';
import { useState } from 'react';
import { api, ApiError } from '../lib/apiClient';
import { QueryRoot } from './QueryRoot';

interface JobView {
  id: string;
  status: 'queued' | 'running' | 'done' | 'failed';
  progress: number;
  message: string | null;
  error?: string | null;
}

export interface ReportPanelProps {
  slug: string;
  studyId: string;
  canExport: boolean;
  /** The latest stored report, and whether it still shows the study as it stands. */
  latest: { createdAt: string; current: boolean; size: number } | null;
  /** A report job still queued or running when the page was made. */
  pendingJobId: string | null;
  /** Why no report or dossier can be made now (no current analysis), or null. */
  blocked: string | null;
}

const POLL_MS = 700;

function Panel({ slug, studyId, canExport, latest, pendingJobId, blocked }: ReportPanelProps) {
  const base = `/api/labs/${slug}/studies/${studyId}`;
  const [jobId, setJobId] = useState<string | null>(pendingJobId);
  const [error, setError] = useState<string | null>(null);
  const job = useQuery({
    queryKey: ['report-job', jobId],
    enabled: !!jobId,
    queryFn: () => api<{ job: JobView }>('GET', `${base}/report/jobs/${jobId}`),
    refetchInterval: (query) => {
      const status = query.state.data?.job.status;
      return status === 'done' || status === 'failed' ? false : POLL_MS;
    },
  });
  const start = useMutation({
    mutationFn: () => api<{ job: JobView }>('POST', `${base}/report`),
    onMutate: () => setError(null),
    onSuccess: (answer) => setJobId(answer.job.id),
    onError: (e) => setError(e instanceof ApiError ? e.problem.detail : String(e)),
  });

  const current = job.data?.job;
  const running = !!jobId && (!current || current.status === 'queued' || current.status === 'running');
  const done = current?.status === 'done';
  const hasReport = done || !!latest;
  const percent = Math.round((current?.progress ?? 0) * 100);

  return (
    <section aria-labelledby="report-heading" className="rounded border border-neutral-200 bg-white p-4">
      <h2 id="report-heading" className="text-lg font-semibold text-brand-900">
        Report and dossier
      </h2>
      <p className="mt-1 max-w-prose text-sm text-neutral-700">
        The report is a PDF of the analysis, the verdicts at each decision level, the cautions, the exclusions, the signatures and the audit summary. The dossier is one zip file
        for inspectors: the report, the raw results, the analysis, the protocol, the audit trail and a manifest of sha256 hashes.
      </p>

      <p className="mt-3 text-sm" data-testid="report-state">
        {latest && !done ? (
          latest.current ? (
            <span>✔ A stored report shows the study as it stands ({new Date(latest.createdAt).toISOString().slice(0, 16).replace('T', ' ')} UTC).</span>
          ) : (
            <span className="text-attention-800">⚠ The stored report is out of date: something it shows has changed since.</span>
          )
        ) : null}
        {!latest && !done ? <span className="text-neutral-600">○ No report stored yet.</span> : null}
        {done ? <span>✔ Report ready.</span> : null}
      </p>

      {blocked ? (
        <p className="mt-2 rounded border border-attention-200 bg-attention-50 px-3 py-2 text-sm text-attention-800" role="status">
          ⚠ {blocked}
        </p>
      ) : null}

      {running ? (
        <div className="mt-3" role="status" aria-live="polite">
          <label htmlFor="report-progress" className="text-sm text-neutral-700">
            Making the report: {current?.message ?? 'Waiting to start'} ({percent} %)
          </label>
          <progress id="report-progress" className="mt-1 block h-2 w-full max-w-md accent-brand-700" max={100} value={percent}>
            {percent} %
          </progress>
        </div>
      ) : null}
      {current?.status === 'failed' ? (
        <p className="mt-2 text-sm text-attention-800" role="alert">
          ✖ The report could not be made: {current.error ?? 'unknown error'}
        </p>
      ) : null}
      {error ? (
        <p className="mt-2 text-sm text-attention-800" role="alert">
          ✖ {error}
        </p>
      ) : null}

      <div className="mt-4 flex flex-wrap gap-3">
        {canExport ? (
          <button
            type="button"
            className="rounded bg-brand-700 px-3 py-1.5 text-sm font-medium text-white hover:bg-brand-800 focus-visible:outline-2 focus-visible:outline-offset-2 focus-visible:outline-brand-700 disabled:opacity-50"
            onClick={() => start.mutate()}
            disabled={running || start.isPending || !!blocked}
          >
            {hasReport ? 'Make the report again' : 'Make the report'}
          </button>
        ) : null}
        {hasReport ? (
          <a
            className="rounded border border-brand-700 px-3 py-1.5 text-sm font-medium text-brand-800 hover:bg-brand-50 focus-visible:outline-2 focus-visible:outline-offset-2 focus-visible:outline-brand-700"
            href={`${base}/report`}
            download
          >
            Download the report (PDF)
          </a>
        ) : null}
        {canExport && !blocked ? (
          <a
            className="rounded border border-brand-700 px-3 py-1.5 text-sm font-medium text-brand-800 hover:bg-brand-50 focus-visible:outline-2 focus-visible:outline-offset-2 focus-visible:outline-brand-700"
            href={`${base}/dossier`}
            download
          >
            Download the dossier (zip)
          </a>
        ) : null}
      </div>
    </section>
  );
}

/**
 * Makes the report with a progress bar, and offers the report and the dossier for download.
 *
 * @example
 * <ReportPanel client:load slug="eastmere" studyId={study.id} canExport latest={null} pendingJobId={null} blocked={null} />
 */
export default function ReportPanel(props: ReportPanelProps) {
  return (
    <QueryRoot>
      <Panel {...props} />
    </QueryRoot>
  );
}
