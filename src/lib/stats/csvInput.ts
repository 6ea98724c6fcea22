import Papa from 'papaparse';
import type { ComparisonInput } from './analysis';
import { StatsInputError } from './errors';

/** The sample columns a comparison CSV is read from. */
export type ComparisonCsvInput = Pick<ComparisonInput, 'sampleIds' | 'comparative' | 'candidate' | 'replicates'>;

const SINGLE_COLUMNS = ['comparative', 'candidate'] as const;
const REPLICATE_COLUMNS = ['comparative_1', 'comparative_2', 'candidate_1', 'candidate_2'] as const;
/** A plain decimal number: no thousands separators, no decimal comma, no hexadecimal. */
const DECIMAL = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/**
 * Reads a method-comparison CSV (text, not a file) into the sample part of an analysis input.
 * Header `sample_id,comparative,candidate`, or `sample_id,comparative_1,comparative_2,candidate_1,candidate_2`
 * whose duplicates are averaged and also returned as `replicates` (they feed λ). With both sets of columns the
 * single columns give the values and the duplicates give λ. Blank lines are skipped; line numbers in errors count
 * the header as line 1 (a quoted cell spanning lines is not supported). Throws StatsInputError naming the line
 * and column of the first problem; at least 3 samples are needed.
 *
 * @example
 * parseComparisonCsv('sample_id,comparative,candidate\nA1,5.1,5.3\nA2,7.0,7.2\nA3,9.8,10.1\n').candidate; // [5.3, 7.2, 10.1]
 */
export function parseComparisonCsv(text: string): ComparisonCsvInput {
  const parsed = Papa.parse<string[]>(text.replace(/^\uFEFF/, ''), { header: false, skipEmptyLines: false });
  const rows = parsed.data;
  if (rows.length === 0 || rows[0].every((cell) => cell.trim() === '')) {
    throw new StatsInputError('line 1: the file is empty; expected a header sample_id,comparative,candidate', { field: 'header' });
  }
  const header = rows[0].map((cell) => cell.trim());
  const column = (name: string) => header.indexOf(name);
  if (column('sample_id') < 0) throw missingColumn('sample_id', header);

  const hasSingles = SINGLE_COLUMNS.every((name) => column(name) >= 0);
  const replicatePresent = REPLICATE_COLUMNS.filter((name) => column(name) >= 0);
  if (replicatePresent.length > 0 && replicatePresent.length < REPLICATE_COLUMNS.length) {
    const missing = REPLICATE_COLUMNS.find((name) => column(name) < 0) as string;
    throw missingColumn(missing, header, 'replicate columns come as a set of four');
  }
  const hasReplicates = replicatePresent.length === REPLICATE_COLUMNS.length;
  if (!hasSingles && !hasReplicates) {
    throw missingColumn(SINGLE_COLUMNS.find((name) => column(name) < 0) as string, header);
  }

  const sampleIds: string[] = [];
  const comparative: number[] = [];
  const candidate: number[] = [];
  const replicates: NonNullable<ComparisonInput['replicates']> = { comparative: [], candidate: [] };
  const lineOfId = new Map<string, number>();
  let lastLine = 1;
  for (let r = 1; r < rows.length; r++) {
    const row = rows[r];
    const line = r + 1;
    if (row.every((cell) => cell.trim() === '')) continue;
    lastLine = line;
    const id = (row[column('sample_id')] ?? '').trim();
    if (id === '') throw new StatsInputError(`line ${line}: sample_id is empty`, { field: 'sample_id', index: sampleIds.length });
    const earlier = lineOfId.get(id);
    if (earlier !== undefined) {
      throw new StatsInputError(`line ${line}: sample_id '${id}' already appears on line ${earlier}`, { field: 'sample_id', index: sampleIds.length });
    }
    lineOfId.set(id, line);
    const value = (name: string) => readNumber(row[column(name)], name, line, sampleIds.length);
    if (hasReplicates) {
      const pairX: [number, number] = [value('comparative_1'), value('comparative_2')];
      const pairY: [number, number] = [value('candidate_1'), value('candidate_2')];
      replicates.comparative.push(pairX);
      replicates.candidate.push(pairY);
      comparative.push(hasSingles ? value('comparative') : (pairX[0] + pairX[1]) / 2);
      candidate.push(hasSingles ? value('candidate') : (pairY[0] + pairY[1]) / 2);
    } else {
      comparative.push(value('comparative'));
      candidate.push(value('candidate'));
    }
    sampleIds.push(id);
  }
  if (sampleIds.length < 3) {
    throw new StatsInputError(
      `line ${lastLine}: only ${sampleIds.length} data ${sampleIds.length === 1 ? 'row' : 'rows'} after the header; at least 3 pairs are needed`,
      { field: 'rows' },
    );
  }
  return hasReplicates ? { sampleIds, comparative, candidate, replicates } : { sampleIds, comparative, candidate };
}

function missingColumn(name: string, header: string[], why?: string): StatsInputError {
  return new StatsInputError(
    `line 1: column '${name}' is missing${why ? ` (${why})` : ''}; the header has ${header.map((h) => `'${h}'`).join(', ')}`,
    { field: name },
  );
}

function readNumber(cell: string | undefined, name: string, line: number, index: number): number {
  const text = (cell ?? '').trim();
  if (text === '') throw new StatsInputError(`line ${line}: ${name} is empty`, { field: name, index });
  if (!DECIMAL.test(text)) {
    throw new StatsInputError(`line ${line}: ${name} '${text}' is not a number (use a point as decimal separator)`, { field: name, index });
  }
  return Number(text);
}
