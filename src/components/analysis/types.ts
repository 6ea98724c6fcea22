/** The analysis view as the API answers it (src/server/analysis.ts, analysisView), for the workspace islands. */
import type { StoredResults } from '../../server/analysis';

export type { StoredResults };

export interface AnalysisViewBody {
  study: { id: string; title: string; state: string };
  run: { id: string; inputsHash: string; engineVersion: string; createdAt: string; stale: boolean; results: StoredResults } | null;
  current: boolean;
  bootstrapDone: boolean;
  job: { id: string; status: 'queued' | 'running' | 'done' | 'failed'; progress: number; message: string | null; error: string | null } | null;
}

export interface SampleDetailBody {
  sample: { id: string; code: string; flags: string[]; flagNote: string | null };
  values: { procedure: 'comparative' | 'candidate'; replicate: number; value: number; censored: '<' | '>' | null; unit: string; runDate: string | null }[];
  excluded: boolean;
  exclusions: { reason: string; excludedAt: string; revokedAt: string | null; revokeReason: string | null }[];
  history: { id: number; action: string; occurredAt: string; data: Record<string, unknown>; actor: string | null }[];
}

/** Highlight shared by every plot and table of the workspace. */
export interface Highlight {
  selected: string | null;
  hovered: string | null;
  onHover: (code: string | null) => void;
  onSelect: (code: string) => void;
}

/** A calm palette with a dash pattern per estimator, so lines differ without relying on colour. */
export const METHOD_STYLE: Record<string, { stroke: string; dash?: string }> = {
  ols: { stroke: '#6b7280', dash: '2 3' },
  deming: { stroke: '#0f5a56' },
  weightedDeming: { stroke: '#2f7f9f', dash: '8 3' },
  passingBablok: { stroke: '#7a4506', dash: '6 3' },
  huber: { stroke: '#5b5fa8', dash: '4 2 1 2' },
  tukey: { stroke: '#a2476b', dash: '1 2' },
  hampel: { stroke: '#4f7d2a', dash: '10 2 2 2' },
  mm: { stroke: '#b86b0b', dash: '3 3' },
  lad: { stroke: '#374151', dash: '12 4' },
};
