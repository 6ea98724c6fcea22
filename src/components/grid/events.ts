/**
 * The window event the study page's islands use to tell each other that results changed (islands do not share a
 * React tree): the grid after a save, the CSV import after a commit. `detail.source` names who sent it.
 *
 * @example
 * window.dispatchEvent(new CustomEvent(RESULTS_CHANGED, { detail: { source: 'grid' } }));
 */
export const RESULTS_CHANGED = 'biaswise:results-changed';
