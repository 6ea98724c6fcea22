/**
 * Reading what people type or paste into the entry grid and what CSV files and the results API carry:
 * result values ("12.5", "12,5" with a decimal comma, "<5" and ">600" reported beyond a limit), run dates,
 * specimen flags, and whole sample rows checked against the protocol (units, measuring interval, replicates).
 * Pure: the browser (grid, CSV worker) and the server run the same checks, and the server always re-runs them.
 */
import type { SPECIMEN_FLAGS as STORED_FLAGS } from '../db/schema';

/**
 * Specimen flags, as the database's check constraint allows them (kept here so the browser bundle does not load
 * the schema; `satisfies` keeps the two lists equal).
 *
 * @example
 * SPECIMEN_FLAGS.includes('icteric'); // true
 */
export const SPECIMEN_FLAGS = ['haemolysed', 'icteric', 'lipaemic', 'clotted', 'other'] as const satisfies typeof STORED_FLAGS;
/** A specimen flag stored on a sample. */
export type SpecimenFlag = (typeof SPECIMEN_FLAGS)[number];

/** A result value as read from text. `censored` is '<' or '>' for a value reported beyond a limit. */
export type ParsedValue =
  | { kind: 'empty' }
  | { kind: 'value'; value: number; censored: '<' | '>' | null }
  | { kind: 'error'; message: string };

const NUMBER = /^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$/;

/**
 * Reads one result value. A decimal comma is accepted ("12,5" = 12.5); a thousands separator is not, so a
 * value with both "." and "," is refused rather than guessed. "<5" and ">600" are kept as censored values.
 *
 * @example
 * parseResultValue('12,5'); // { kind: 'value', value: 12.5, censored: null }
 * parseResultValue('< 5');  // { kind: 'value', value: 5, censored: '<' }
 * parseResultValue('high'); // { kind: 'error', message: 'Enter a number, or <x / >x for a value beyond a limit ("high" is not one).' }
 */
export function parseResultValue(text: string): ParsedValue {
  const trimmed = text.trim();
  if (trimmed === '') return { kind: 'empty' };
  let censored: '<' | '>' | null = null;
  let rest = trimmed;
  if (rest[0] === '<' || rest[0] === '>') {
    censored = rest[0];
    rest = rest.slice(1).trim();
  }
  if (rest.includes('.') && rest.includes(',')) {
    return { kind: 'error', message: `Write the number without a thousands separator ("${trimmed}" has both "." and ",").` };
  }
  if (!NUMBER.test(rest)) {
    return { kind: 'error', message: `Enter a number, or <x / >x for a value beyond a limit ("${trimmed}" is not one).` };
  }
  const value = Number(rest.replace(',', '.'));
  if (!Number.isFinite(value)) return { kind: 'error', message: `"${trimmed}" is too large to be a result.` };
  return { kind: 'value', value, censored };
}

/**
 * A value as the grid shows it: censored values keep their sign ("<5").
 *
 * @example
 * formatResultValue({ value: 5, censored: '<' }); // '<5'
 */
export function formatResultValue(result: { value: number; censored: '<' | '>' | null }): string {
  return `${result.censored ?? ''}${result.value}`;
}

/**
 * A warning (not a refusal) for a value outside the protocol's measuring interval, or null.
 *
 * @example
 * intervalWarning(700, { low: 10, high: 600 }, 'mg/dL'); // '700 mg/dL is above the measuring interval (10–600 mg/dL).'
 */
export function intervalWarning(value: number, interval: { low: number; high: number }, units: string): string | null {
  if (value < interval.low) return `${value} ${units} is below the measuring interval (${interval.low}–${interval.high} ${units}).`;
  if (value > interval.high) return `${value} ${units} is above the measuring interval (${interval.low}–${interval.high} ${units}).`;
  return null;
}

const ISO_DATE = /^(\d{4})-(\d{2})-(\d{2})$/;
const DOTTED_DATE = /^(\d{1,2})\.(\d{1,2})\.(\d{4})$/;

/**
 * Reads a run date written YYYY-MM-DD or DD.MM.YYYY (slashed dates are refused: 03/04 could be either month).
 * Returns the ISO date, null for an empty cell, or an error message.
 *
 * @example
 * parseRunDate('17.11.2026'); // { ok: true, date: '2026-11-17' }
 * parseRunDate('11/17/2026'); // { ok: false, message: 'Write the run date as YYYY-MM-DD (or DD.MM.YYYY); "11/17/2026" is ambiguous or not a date.' }
 */
export function parseRunDate(text: string): { ok: true; date: string | null } | { ok: false; message: string } {
  const trimmed = text.trim();
  if (trimmed === '') return { ok: true, date: null };
  let parts: [number, number, number] | null = null;
  const iso = trimmed.match(ISO_DATE);
  const dotted = trimmed.match(DOTTED_DATE);
  if (iso) parts = [Number(iso[1]), Number(iso[2]), Number(iso[3])];
  else if (dotted) parts = [Number(dotted[3]), Number(dotted[2]), Number(dotted[1])];
  const refuse = { ok: false as const, message: `Write the run date as YYYY-MM-DD (or DD.MM.YYYY); "${trimmed}" is ambiguous or not a date.` };
  if (!parts) return refuse;
  const [year, month, day] = parts;
  const date = new Date(Date.UTC(year, month - 1, day));
  if (date.getUTCFullYear() !== year || date.getUTCMonth() !== month - 1 || date.getUTCDate() !== day || year < 1900) return refuse;
  return { ok: true, date: date.toISOString().slice(0, 10) };
}

const FLAG_WORDS: Record<string, SpecimenFlag> = {
  h: 'haemolysed', haemolysed: 'haemolysed', hemolyzed: 'haemolysed', hemolysed: 'haemolysed', haemolyzed: 'haemolysed',
  i: 'icteric', icteric: 'icteric',
  l: 'lipaemic', lipaemic: 'lipaemic', lipemic: 'lipaemic',
  c: 'clotted', clotted: 'clotted',
  o: 'other', other: 'other',
};

/**
 * Reads specimen flags from a cell: words or their first letters, separated by commas, semicolons, "|", "/" or spaces.
 *
 * @example
 * parseFlags('H; lipemic'); // { ok: true, flags: ['haemolysed', 'lipaemic'] }
 */
export function parseFlags(text: string): { ok: true; flags: SpecimenFlag[] } | { ok: false; message: string } {
  const words = text.toLowerCase().split(/[\s,;|/]+/).filter(Boolean);
  const flags: SpecimenFlag[] = [];
  for (const word of words) {
    const flag = FLAG_WORDS[word];
    if (!flag) return { ok: false, message: `"${word}" is not a specimen flag (haemolysed, icteric, lipaemic, clotted, other — or H, I, L, C, O).` };
    if (!flags.includes(flag)) flags.push(flag);
  }
  return { ok: true, flags };
}

/** What a protocol says about the results a study takes. */
export interface ResultRules {
  units: string;
  measuringInterval: { low: number; high: number };
  replicates: number;
}

/** A sample row as text, as typed, pasted, read from a CSV or sent to the API. `line` names it in messages. */
export interface SampleRowText {
  line?: number;
  code: string;
  /** One cell per replicate; undefined for a replicate not given (CSV column not mapped, API result not sent). */
  comparative: (string | undefined)[];
  candidate: (string | undefined)[];
  runDate?: string;
  unit?: string;
  flags?: string;
  flagNote?: string;
}

/** One result of a checked row; null means the cell was given and left empty. */
export interface CheckedResult {
  procedure: 'comparative' | 'candidate';
  replicate: number;
  result: { value: number; censored: '<' | '>' | null } | null;
}

/** A sample row after checking: ready to store. */
export interface CheckedRow {
  line?: number;
  code: string;
  runDate: string | null | undefined;
  flags: SpecimenFlag[] | undefined;
  flagNote: string | null | undefined;
  results: CheckedResult[];
}

/** A problem or a warning on one field of one row. */
export interface RowMessage {
  line?: number;
  field: string;
  message: string;
}

export const MAX_CODE_LENGTH = 64;
const PROCEDURE_WORDS = { comparative: 'Comparative', candidate: 'Candidate' } as const;

/**
 * Checks one sample row against the protocol: a code, numbers in the protocol's units (a unit given must equal
 * them), replicates the protocol has, a valid run date and flags; a flag "other" needs a note. Values outside the
 * measuring interval and censored values are warnings. Field names are stable ("comparative.1", "runDate").
 *
 * @example
 * checkSampleRow({ code: 'S-1', comparative: ['12,5'], candidate: ['<5'] }, { units: 'mg/dL', measuringInterval: { low: 10, high: 600 }, replicates: 1 });
 * // { row: { code: 'S-1', results: [...] }, errors: [], warnings: [{ field: 'candidate.1', message: 'Candidate replicate 1 "<5" is censored: … left out of the regression.' }] }
 */
export function checkSampleRow(input: SampleRowText, rules: ResultRules): { row: CheckedRow | null; errors: RowMessage[]; warnings: RowMessage[] } {
  const errors: RowMessage[] = [];
  const warnings: RowMessage[] = [];
  const at = (field: string, message: string) => ({ ...(input.line === undefined ? {} : { line: input.line }), field, message });
  const code = input.code.trim();
  if (code === '') errors.push(at('code', 'Give the sample code.'));
  else if (code.length > MAX_CODE_LENGTH) errors.push(at('code', `A sample code has at most ${MAX_CODE_LENGTH} characters.`));

  if (input.unit !== undefined && input.unit.trim() !== '' && input.unit.trim() !== rules.units) {
    errors.push(at('unit', `The unit is "${input.unit.trim()}" but this study's protocol reports in ${rules.units}; convert the results first.`));
  }

  const results: CheckedResult[] = [];
  for (const procedure of ['comparative', 'candidate'] as const) {
    const cells = input[procedure];
    if (cells.length > rules.replicates) {
      errors.push(at(`${procedure}.${cells.length}`, `The protocol plans ${rules.replicates} replicate${rules.replicates === 1 ? '' : 's'} per procedure.`));
      continue;
    }
    cells.forEach((cell, index) => {
      if (cell === undefined) return;
      const replicate = index + 1;
      const field = `${procedure}.${replicate}`;
      const parsed = parseResultValue(cell);
      if (parsed.kind === 'error') {
        errors.push(at(field, parsed.message));
        return;
      }
      if (parsed.kind === 'empty') {
        results.push({ procedure, replicate, result: null });
        return;
      }
      const label = `${PROCEDURE_WORDS[procedure]} replicate ${replicate}`;
      if (parsed.censored) {
        warnings.push(at(field, `${label} "${cell.trim()}" is censored: it is kept and shown, and left out of the regression.`));
      } else {
        const outside = intervalWarning(parsed.value, rules.measuringInterval, rules.units);
        if (outside) warnings.push(at(field, `${label}: ${outside}`));
      }
      results.push({ procedure, replicate, result: { value: parsed.value, censored: parsed.censored } });
    });
  }

  let runDate: string | null | undefined;
  if (input.runDate !== undefined) {
    const parsed = parseRunDate(input.runDate);
    if (parsed.ok) runDate = parsed.date;
    else errors.push(at('runDate', parsed.message));
  }
  let flags: SpecimenFlag[] | undefined;
  if (input.flags !== undefined) {
    const parsed = parseFlags(input.flags);
    if (parsed.ok) flags = parsed.flags;
    else errors.push(at('flags', parsed.message));
  }
  const flagNote = input.flagNote === undefined ? undefined : input.flagNote.trim() || null;
  if (flags?.includes('other') && !flagNote) errors.push(at('flagNote', 'Say what the "other" flag means in the note.'));

  if (errors.length > 0) return { row: null, errors, warnings };
  return { row: { ...(input.line === undefined ? {} : { line: input.line }), code, runDate, flags, flagNote, results }, errors, warnings };
}

/**
 * Whether a file uses a decimal comma: its delimiter is not a comma and some value cell reads like "12,5".
 *
 * @example
 * detectDecimalComma([['S-1', '12,5']], ';'); // true
 */
export function detectDecimalComma(rows: readonly (readonly string[])[], delimiter: string): boolean {
  if (delimiter === ',') return false;
  return rows.some((row) => row.some((cell) => /^\s*[<>]?\s*[+-]?\d*,\d+\s*$/.test(cell)));
}

/** Which CSV column holds which field (header names as they appear in the file). */
export interface ColumnMapping {
  sampleCode: string;
  comparative: (string | null)[];
  candidate: (string | null)[];
  runDate?: string | null;
  unit?: string | null;
  flags?: string | null;
  flagNote?: string | null;
}

const normalise = (header: string) => header.toLowerCase().replace(/[^a-z0-9]+/g, '');

/**
 * A first guess at the mapping from header names (the person confirms or changes it).
 *
 * @example
 * guessMapping(['Sample', 'Comparative 1', 'Candidate 1'], 1); // { sampleCode: 'Sample', comparative: ['Comparative 1'], candidate: ['Candidate 1'], … }
 */
export function guessMapping(headers: readonly string[], replicates: number): ColumnMapping {
  const find = (test: (h: string) => boolean) => headers.find((h) => test(normalise(h))) ?? null;
  const replicate = (words: string[], r: number) =>
    find((h) => words.some((w) => h.startsWith(w)) && (h.endsWith(String(r)) || (r === 1 && !/\d$/.test(h))));
  return {
    sampleCode: find((h) => h.includes('sample') || h.includes('specimen') || h === 'code' || h === 'id') ?? headers[0] ?? '',
    comparative: Array.from({ length: replicates }, (_, i) => replicate(['comparative', 'comp', 'reference', 'ref', 'x'], i + 1)),
    candidate: Array.from({ length: replicates }, (_, i) => replicate(['candidate', 'cand', 'new', 'test', 'y'], i + 1)),
    runDate: find((h) => h.includes('rundate') || h.startsWith('date') || h === 'day' || h === 'run'),
    unit: find((h) => h === 'unit' || h === 'units'),
    flags: find((h) => h.includes('flag')),
    flagNote: find((h) => h.includes('note') || h.includes('comment')),
  };
}

/** The header names a mapping uses that the file does not have, as messages naming the field. */
export function missingColumns(headers: readonly string[], mapping: ColumnMapping): RowMessage[] {
  const messages: RowMessage[] = [];
  const check = (field: string, header: string | null | undefined) => {
    if (header && !headers.includes(header)) {
      messages.push({ line: 1, field, message: `The file has no column "${header}" (its header is: ${headers.map((h) => `"${h}"`).join(', ')}).` });
    }
  };
  check('sampleCode', mapping.sampleCode);
  mapping.comparative.forEach((h, i) => check(`comparative.${i + 1}`, h));
  mapping.candidate.forEach((h, i) => check(`candidate.${i + 1}`, h));
  check('runDate', mapping.runDate);
  check('unit', mapping.unit);
  check('flags', mapping.flags);
  check('flagNote', mapping.flagNote);
  return messages;
}

/**
 * Turns the data rows of a CSV (header removed) into sample rows with their line numbers (line 1 is the header;
 * blank lines keep their number and are skipped).
 *
 * @example
 * tableToRows(['Sample', 'X', 'Y'], [['S-1', '10', '11']], { sampleCode: 'Sample', comparative: ['X'], candidate: ['Y'] });
 * // [{ line: 2, code: 'S-1', comparative: ['10'], candidate: ['11'] }]
 */
export function tableToRows(headers: readonly string[], data: readonly (readonly string[])[], mapping: ColumnMapping): SampleRowText[] {
  const index = (header: string | null | undefined) => (header ? headers.indexOf(header) : -1);
  const cell = (row: readonly string[], header: string | null | undefined) => {
    const i = index(header);
    return i < 0 ? undefined : (row[i] ?? '');
  };
  const rows: SampleRowText[] = [];
  data.forEach((row, i) => {
    if (row.every((c) => c.trim() === '')) return;
    rows.push({
      line: i + 2,
      code: cell(row, mapping.sampleCode) ?? '',
      comparative: mapping.comparative.map((h) => cell(row, h)),
      candidate: mapping.candidate.map((h) => cell(row, h)),
      runDate: cell(row, mapping.runDate),
      unit: cell(row, mapping.unit),
      flags: cell(row, mapping.flags),
      flagNote: cell(row, mapping.flagNote),
    });
  });
  return rows;
}

/**
 * Checks a whole file's rows: each row, then sample codes repeated within the file (refused: which line wins
 * would be a guess).
 *
 * @example
 * const { rows, errors, warnings } = checkRows(tableToRows(headers, data, mapping), rules);
 */
export function checkRows(inputs: readonly SampleRowText[], rules: ResultRules): { rows: CheckedRow[]; errors: RowMessage[]; warnings: RowMessage[] } {
  const rows: CheckedRow[] = [];
  const errors: RowMessage[] = [];
  const warnings: RowMessage[] = [];
  const firstLine = new Map<string, number | undefined>();
  inputs.forEach((input, position) => {
    const checked = checkSampleRow(input, rules);
    errors.push(...checked.errors);
    warnings.push(...checked.warnings);
    const code = input.code.trim();
    if (code !== '') {
      const key = code.toLowerCase();
      if (firstLine.has(key)) {
        const first = firstLine.get(key);
        errors.push({
          ...(input.line === undefined ? {} : { line: input.line }),
          field: 'code',
          message: `Sample code "${code}" appears again (first ${first === undefined ? `in row ${position}` : `on line ${first}`}); each sample is listed once.`,
        });
        return;
      }
      firstLine.set(key, input.line);
    }
    if (checked.row) rows.push(checked.row);
  });
  return { rows, errors, warnings };
}

/**
 * Delimiters a CSV may use, in the order they are tried when guessing.
 *
 * @example
 * Papa.parse(text, { delimiter: '', delimitersToGuess: [...CSV_DELIMITERS] });
 */
export const CSV_DELIMITERS = [',', ';', '\t', '|'] as const;

/**
 * Decodes a CSV file's bytes as UTF-8 (a UTF-8 byte-order mark is dropped). UTF-16 files and bytes that are not
 * UTF-8 (Latin-1, Windows-1252) are refused with the line they are on and how to save the file: guessing an
 * 8-bit code page could silently change a character of a sample code or a note.
 *
 * @example
 * decodeCsvBytes(new TextEncoder().encode('Sample,X\n')); // { ok: true, text: 'Sample,X\n' }
 * decodeCsvBytes(Uint8Array.from([0x53, 0xe9, 0x0a])); // { ok: false, problem: { line: 1, field: 'file', message: 'Byte 2 (0xE9) is not UTF-8; …' } }
 */
export function decodeCsvBytes(bytes: Uint8Array): { ok: true; text: string } | { ok: false; problem: RowMessage } {
  const refuse = (line: number, message: string) => ({ ok: false as const, problem: { line, field: 'file', message } });
  if ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff)) {
    return refuse(1, 'The file is encoded as UTF-16. Save it as "CSV UTF-8" and import it again.');
  }
  const start = bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf ? 3 : 0;
  const body = bytes.subarray(start);
  const zero = body.indexOf(0);
  if (zero >= 0) return refuse(lineAt(body, zero), 'The file contains zero bytes, as a UTF-16 file does. Save it as "CSV UTF-8" and import it again.');
  try {
    return { ok: true, text: new TextDecoder('utf-8', { fatal: true }).decode(body) };
  } catch {
    const offset = firstInvalidUtf8(body);
    return refuse(
      lineAt(body, offset),
      `Byte ${offset + start + 1} (0x${body[offset].toString(16).toUpperCase()}) is not UTF-8; the file looks like Latin-1 or Windows-1252. Save it as "CSV UTF-8" and import it again.`,
    );
  }
}

function lineAt(bytes: Uint8Array, offset: number): number {
  let line = 1;
  for (let i = 0; i < offset; i++) if (bytes[i] === 0x0a) line++;
  return line;
}

/** Offset of the first byte that does not start or continue a valid UTF-8 sequence. */
function firstInvalidUtf8(bytes: Uint8Array): number {
  let i = 0;
  while (i < bytes.length) {
    const b = bytes[i];
    const length = b < 0x80 ? 1 : b >= 0xc2 && b <= 0xdf ? 2 : b >= 0xe0 && b <= 0xef ? 3 : b >= 0xf0 && b <= 0xf4 ? 4 : 0;
    if (length === 0) return i;
    for (let k = 1; k < length; k++) if (i + k >= bytes.length || (bytes[i + k] & 0xc0) !== 0x80) return i;
    i += length;
  }
  return 0;
}
