/**
 * The entry grid's rows as the person edits them: the saved row (or none for a new one), the text of every cell,
 * and where the row stands (saved, not saved, saving, refused, changed by someone else). Pure, so the keyboard
 * and paste logic stay out of the component.
 */
import type { GridRow } from '../../server/results';
import { checkSampleRow, formatResultValue, parseFlags, parseResultValue, parseRunDate, type ResultRules, type RowMessage, type SpecimenFlag } from '../../lib/resultParsing';

/** Where a row stands. */
export type RowStatus = 'saved' | 'dirty' | 'saving' | 'invalid' | 'conflict' | 'failed';

/** One row of the grid while it is edited. */
export interface DraftRow {
  key: string;
  saved: GridRow | null;
  cells: Record<string, string>;
  status: RowStatus;
  /** Problems the server named (cleared on the next edit). */
  serverErrors: Record<string, string>;
  /** The row as someone else saved it meanwhile (after a 409), shown beside this person's values. */
  conflict: GridRow | null;
  message: string | null;
}

const FLAG_LETTERS: Record<SpecimenFlag, string> = { haemolysed: 'H', icteric: 'I', lipaemic: 'L', clotted: 'C', other: 'O' };

/**
 * The editable fields of a row, left to right (replicates are 1-based, as the server names them).
 *
 * @example
 * gridFields(2); // ['code', 'comparative.1', 'comparative.2', 'candidate.1', 'candidate.2', 'runDate', 'flags', 'flagNote']
 */
export function gridFields(replicates: number): string[] {
  const reps = Array.from({ length: replicates }, (_, i) => i + 1);
  return ['code', ...reps.map((r) => `comparative.${r}`), ...reps.map((r) => `candidate.${r}`), 'runDate', 'flags', 'flagNote'];
}

/**
 * The cell texts of a saved row (all empty for a new row).
 *
 * @example
 * cellsOf(null, 1); // { code: '', 'comparative.1': '', 'candidate.1': '', runDate: '', flags: '', flagNote: '' }
 */
export function cellsOf(row: GridRow | null, replicates: number): Record<string, string> {
  const cells: Record<string, string> = {};
  for (const field of gridFields(replicates)) cells[field] = '';
  if (!row) return cells;
  cells.code = row.code;
  row.comparative.forEach((c, i) => (cells[`comparative.${i + 1}`] = c?.text ?? ''));
  row.candidate.forEach((c, i) => (cells[`candidate.${i + 1}`] = c?.text ?? ''));
  cells.runDate = row.runDate ?? '';
  cells.flags = row.flags.map((f) => FLAG_LETTERS[f as SpecimenFlag] ?? f).join(' ');
  cells.flagNote = row.flagNote ?? '';
  return cells;
}

let counter = 0;
/** A new, empty row. */
export function blankRow(replicates: number): DraftRow {
  counter += 1;
  return { key: `new-${counter}`, saved: null, cells: cellsOf(null, replicates), status: 'saved', serverErrors: {}, conflict: null, message: null };
}

/** A row as loaded from the server. */
export function savedRow(row: GridRow, replicates: number): DraftRow {
  return { key: row.id, saved: row, cells: cellsOf(row, replicates), status: 'saved', serverErrors: {}, conflict: null, message: null };
}

export const isBlank = (row: DraftRow) => row.saved === null && Object.values(row.cells).every((v) => v.trim() === '');

/**
 * A cell's text in the form it is stored, so "12,5" and "12.5" (or "17.11.2026" and "2026-11-17") count as the same.
 *
 * @example
 * canonicalCell('comparative.1', ' 12,50 '); // '12.5'
 */
export function canonicalCell(field: string, text: string): string {
  const trimmed = text.trim();
  if (field.startsWith('comparative.') || field.startsWith('candidate.')) {
    const parsed = parseResultValue(trimmed);
    return parsed.kind === 'value' ? formatResultValue(parsed) : trimmed;
  }
  if (field === 'runDate') {
    const parsed = parseRunDate(trimmed);
    return parsed.ok ? (parsed.date ?? '') : trimmed;
  }
  if (field === 'flags') {
    const parsed = parseFlags(trimmed);
    return parsed.ok ? [...parsed.flags].sort().join(',') : trimmed;
  }
  return trimmed;
}

/** Whether the row's cells differ from what is saved. */
export function isDirty(row: DraftRow, replicates: number): boolean {
  const saved = cellsOf(row.saved, replicates);
  return Object.keys(row.cells).some((field) => canonicalCell(field, row.cells[field]) !== canonicalCell(field, saved[field]));
}

/**
 * Fields whose saved value would change or be removed (code and results): these need a reason.
 *
 * @example
 * changedSavedValues(row, 2); // ['comparative.2']
 */
export function changedSavedValues(row: DraftRow, replicates: number): string[] {
  if (!row.saved) return [];
  const saved = cellsOf(row.saved, replicates);
  return gridFields(replicates)
    .filter((f) => f === 'code' || f.startsWith('comparative.') || f.startsWith('candidate.'))
    .filter((f) => saved[f].trim() !== '' && canonicalCell(f, saved[f]) !== canonicalCell(f, row.cells[f]));
}

/**
 * The grid keeps exactly one empty new row at the bottom (where typing a new sample starts).
 *
 * @example
 * withTrailingBlank([], 2).length; // 1
 */
export function withTrailingBlank(rows: DraftRow[], replicates: number): DraftRow[] {
  const kept = rows.filter((row, i) => !(isBlank(row) && i < rows.length - 1 && row.status !== 'saving'));
  const last = kept[kept.length - 1];
  return last && isBlank(last) ? kept : [...kept, blankRow(replicates)];
}

/**
 * Rows after a reload: rows being edited keep their edits; the others take the saved version.
 *
 * @example
 * const next = mergeLoaded(current, response.rows, 2);
 */
export function mergeLoaded(current: DraftRow[], loaded: GridRow[], replicates: number): DraftRow[] {
  const editing = new Map(current.filter((r) => r.saved && r.status !== 'saved').map((r) => [r.saved!.id, r]));
  const merged = loaded.map((row) => editing.get(row.id) ?? savedRow(row, replicates));
  const unsavedNew = current.filter((r) => !r.saved && !isBlank(r));
  return withTrailingBlank([...merged, ...unsavedNew], replicates);
}

/**
 * Checks a row's cells as the server will, and builds the body to send.
 *
 * @example
 * const { body, errors, warnings } = rowBody(row, rules);
 */
export function rowBody(row: DraftRow, rules: ResultRules) {
  const reps = Array.from({ length: rules.replicates }, (_, i) => i + 1);
  const comparative = reps.map((r) => row.cells[`comparative.${r}`]);
  const candidate = reps.map((r) => row.cells[`candidate.${r}`]);
  const checked = checkSampleRow({ code: row.cells.code, comparative, candidate, runDate: row.cells.runDate, flags: row.cells.flags, flagNote: row.cells.flagNote }, rules);
  const flags = parseFlags(row.cells.flags);
  const body = { code: row.cells.code.trim(), comparative, candidate, runDate: row.cells.runDate.trim(), flags: flags.ok ? flags.flags : [], flagNote: row.cells.flagNote };
  const byField = (messages: RowMessage[]) => Object.fromEntries(messages.map((m) => [m.field, m.message]));
  return { body, errors: byField(checked.errors), warnings: byField(checked.warnings) };
}

/**
 * A block copied from a spreadsheet: lines of tab-separated cells (a trailing line break is dropped).
 *
 * @example
 * pastedBlock('S-1\t10,5\r\nS-2\t11\r\n'); // [['S-1', '10,5'], ['S-2', '11']]
 */
export function pastedBlock(text: string): string[][] {
  return text.replace(/\r\n?/g, '\n').replace(/\n$/, '').split('\n').map((line) => line.split('\t'));
}

const decimalsOf = (text: string) => {
  const match = text.trim().match(/[.,](\d+)$/);
  return match ? match[1].length : 0;
};

/**
 * The decimals the grid shows results with: the most any saved result has (at most 4), so a column reads evenly.
 *
 * @example
 * shownDecimals([savedRow({ ...row, comparative: [{ value: 40, censored: null, text: '40' }, { value: 40.6, censored: null, text: '40.6' }] }, 2)]); // 1
 */
export function shownDecimals(rows: DraftRow[]): number {
  let most = 0;
  for (const row of rows) {
    for (const cell of [...(row.saved?.comparative ?? []), ...(row.saved?.candidate ?? [])]) if (cell) most = Math.max(most, decimalsOf(cell.text));
  }
  return Math.min(most, 4);
}

/**
 * A saved result as shown: with the grid's decimals ("40" → "40.0" beside "40.6"), censored sign kept.
 *
 * @example
 * withDecimals('<5', 1); // '<5.0'
 */
export function withDecimals(text: string, decimals: number): string {
  const parsed = parseResultValue(text);
  if (parsed.kind !== 'value' || decimalsOf(text) > decimals) return text;
  return `${parsed.censored ?? ''}${parsed.value.toFixed(decimals)}`;
}
