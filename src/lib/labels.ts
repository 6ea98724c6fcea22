/** Words shown for stored codes. Verdicts always travel with an icon and a word, never colour alone. */
import type { StudyState, Verdict } from '../db/schema';

export const STATE_LABELS: Record<StudyState, string> = {
  draft: 'Draft',
  collecting: 'Collecting results',
  in_review: 'Awaiting sign-off',
  signed: 'Signed',
};

/** The icon beside each state's word; plain geometric shapes that the shipped font and its fallbacks all draw. */
export const STATE_ICONS: Record<StudyState, string> = { draft: '✎', collecting: '◔', in_review: '◷', signed: '✔' };

export const VERDICT_LABELS: Record<Verdict, { icon: string; word: string }> = {
  accepted: { icon: '✔', word: 'Accepted' },
  accepted_with_conditions: { icon: '◐', word: 'Accepted with conditions' },
  rejected: { icon: '✖', word: 'Rejected' },
};
