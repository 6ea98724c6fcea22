import Papa from 'papaparse';
import { describe, expect, it } from 'vitest';
import { csvCell, toCsv } from '../../../src/lib/csv';

describe('csvCell', () => {
  it.each([
    ['=HYPERLINK("http://example.test","x")', `"'=HYPERLINK(""http://example.test"",""x"")"`],
    ['+1+1', "'+1+1"],
    ['-2+3', "'-2+3"],
    ['@SUM(A1)', "'@SUM(A1)"],
    ['\tcmd', "'\tcmd"],
    ['\rcmd', `"'\rcmd"`],
  ])('prefixes the formula start of %j with a single quote', (input, expected) => {
    expect(csvCell(input)).toBe(expected);
  });

  it('leaves ordinary text, numbers (also negative) and empty cells alone', () => {
    expect(csvCell('EM-0017')).toBe('EM-0017');
    expect(csvCell('a = b')).toBe('a = b');
    expect(csvCell(-3.5)).toBe('-3.5');
    expect(csvCell(0)).toBe('0');
    expect(csvCell(true)).toBe('true');
    expect(csvCell(null)).toBe('');
    expect(csvCell(undefined)).toBe('');
  });

  it('quotes commas, quotes and line breaks (RFC 4180 §2.6–2.7)', () => {
    expect(csvCell('a,b')).toBe('"a,b"');
    expect(csvCell('say "hi"')).toBe('"say ""hi"""');
    expect(csvCell('two\nlines')).toBe('"two\nlines"');
  });

  it('refuses a number that is not finite rather than writing NaN', () => {
    expect(() => csvCell(Number.NaN)).toThrow(/finite/);
  });
});

describe('toCsv', () => {
  it('reads back cell for cell with papaparse, the escaped cells keeping their quote prefix', () => {
    const rows = [
      ['S1', 12.5, 'haemolysed;other', ''],
      ['=HYPERLINK("http://evil.test")', -1, 'note, with comma', 'line\nbreak'],
    ];
    const text = toCsv(['code', 'value', 'flags', 'note'], rows);
    expect(text.endsWith('\r\n')).toBe(true);
    const parsed = Papa.parse<string[]>(text.trimEnd(), { newline: '\r\n' });
    expect(parsed.errors).toEqual([]);
    expect(parsed.data).toEqual([
      ['code', 'value', 'flags', 'note'],
      ['S1', '12.5', 'haemolysed;other', ''],
      [`'=HYPERLINK("http://evil.test")`, '-1', 'note, with comma', 'line\nbreak'],
    ]);
  });

  it('refuses a row whose length differs from the header', () => {
    expect(() => toCsv(['a', 'b'], [['only one']])).toThrow(/row 0 has 1 cells/);
  });
});
