/**
 * Writing CSV for exports (RFC 4180: comma-separated, CRLF line ends, fields holding a comma, quote or line break
 * quoted with inner quotes doubled), with text cells guarded against formula injection: a spreadsheet runs a cell
 * that starts with =, +, -, @, a tab or a carriage return as a formula, so such text gets a leading single quote.
 * Numbers are written as numbers (a negative value stays a number, not text).
 */

/** What one CSV cell may hold; null and undefined give an empty cell. */
export type CsvCell = string | number | boolean | null | undefined;

const FORMULA_START = /^[=+\-@\t\r]/;
const NEEDS_QUOTES = /[",\r\n]/;

/**
 * One cell as CSV text: text starting with a formula character is prefixed with a single quote
 * (OWASP "CSV injection" guidance), then quoted when it holds a comma, quote or line break (RFC 4180 §2).
 *
 * @example
 * csvCell('=HYPERLINK("http://x")'); // '"\'=HYPERLINK(""http://x"")"'
 * csvCell(-3.5);                      // '-3.5'
 * csvCell('a,b');                     // '"a,b"'
 */
export function csvCell(value: CsvCell): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) throw new RangeError(`A CSV number must be finite (got ${value}).`);
    return String(value);
  }
  let text = String(value);
  if (typeof value === 'string' && FORMULA_START.test(text)) text = `'${text}`;
  return NEEDS_QUOTES.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/**
 * A whole CSV document: a header row, then one line per row, each row's cells in header order, CRLF line ends.
 *
 * @example
 * toCsv(['code', 'value'], [['S1', 12.5], ['@S2', -1]]); // "code,value\r\nS1,12.5\r\n'@S2,-1\r\n"
 */
export function toCsv(header: readonly string[], rows: readonly (readonly CsvCell[])[]): string {
  rows.forEach((row, index) => {
    if (row.length !== header.length) throw new RangeError(`CSV row ${index} has ${row.length} cells; the header has ${header.length}.`);
  });
  return [header, ...rows].map((row) => `${row.map(csvCell).join(',')}\r\n`).join('');
}
