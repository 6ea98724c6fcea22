/** The icon beside each study state's word (states are never shown by colour alone). */
import type { StudyState } from '../../../../db/schema';

export const STATE_ICONS: Record<StudyState, string> = { draft: '✎', collecting: '◔', in_review: '⧗', signed: '✔' };
