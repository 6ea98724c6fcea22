import { describe, expect, it } from 'vitest';
import {
  checkRows,
  checkSampleRow,
  decodeCsvBytes,
  detectDecimalComma,
  guessMapping,
  missingColumns,
  parseFlags,
  parseResultValue,
  parseRunDate,
  tableToRows,
} from '../../../src/lib/resultParsing';

const rules = { units: 'mg/dL', measuringInterval: { low: 10, high: 600 }, replicates: 2 };

describe('parseResultValue', () => {
  it.each([
    ['12.5', 12.5],
    ['12,5', 12.5],
    [' 7 ', 7],
    ['-3.2', -3.2],
    ['.5', 0.5],
    ['1e2', 100],
  ])('reads %j as %d', (text, value) => {
    expect(parseResultValue(text)).toEqual({ kind: 'value', value, censored: null });
  });

  it('keeps "<x" and ">x" as censored values', () => {
    expect(parseResultValue('<5')).toEqual({ kind: 'value', value: 5, censored: '<' });
    expect(parseResultValue('> 600')).toEqual({ kind: 'value', value: 600, censored: '>' });
    expect(parseResultValue('<0,5')).toEqual({ kind: 'value', value: 0.5, censored: '<' });
  });

  it('treats blank as empty', () => {
    expect(parseResultValue('   ')).toEqual({ kind: 'empty' });
  });

  it.each(['high', '12.5.1', '1.234,5', '<', '12 mg', 'NaN', 'Infinity', '--1'])('refuses %j with a message', (text) => {
    const parsed = parseResultValue(text);
    expect(parsed.kind).toBe('error');
    if (parsed.kind === 'error') expect(parsed.message).toContain(text.trim());
  });
});

describe('parseRunDate', () => {
  it('reads ISO and day.month.year dates', () => {
    expect(parseRunDate('2026-11-17')).toEqual({ ok: true, date: '2026-11-17' });
    expect(parseRunDate('7.3.2026')).toEqual({ ok: true, date: '2026-03-07' });
    expect(parseRunDate('')).toEqual({ ok: true, date: null });
  });
  it('refuses slashed, impossible and malformed dates', () => {
    for (const text of ['11/17/2026', '2026-02-30', '2026-13-01', 'yesterday']) expect(parseRunDate(text).ok).toBe(false);
  });
});

describe('parseFlags', () => {
  it('reads words, US spellings and first letters, once each', () => {
    expect(parseFlags('H; lipemic, h')).toEqual({ ok: true, flags: ['haemolysed', 'lipaemic'] });
    expect(parseFlags('')).toEqual({ ok: true, flags: [] });
  });
  it('names an unknown flag', () => {
    const parsed = parseFlags('cloudy');
    expect(parsed.ok).toBe(false);
    if (!parsed.ok) expect(parsed.message).toContain('cloudy');
  });
});

describe('checkSampleRow', () => {
  it('accepts a row, warning about censored and out-of-interval values without refusing them', () => {
    const { row, errors, warnings } = checkSampleRow({ line: 4, code: ' S-1 ', comparative: ['5', '12,5'], candidate: ['<5', ''], runDate: '2026-11-17' }, rules);
    expect(errors).toEqual([]);
    expect(row?.code).toBe('S-1');
    expect(row?.results).toEqual([
      { procedure: 'comparative', replicate: 1, result: { value: 5, censored: null } },
      { procedure: 'comparative', replicate: 2, result: { value: 12.5, censored: null } },
      { procedure: 'candidate', replicate: 1, result: { value: 5, censored: '<' } },
      { procedure: 'candidate', replicate: 2, result: null },
    ]);
    expect(warnings.map((w) => [w.line, w.field])).toEqual([
      [4, 'comparative.1'],
      [4, 'candidate.1'],
    ]);
    expect(warnings[0].message).toContain('below the measuring interval');
    expect(warnings[1].message).toContain('left out of the regression');
  });

  it('names each bad field: code, number, unit, date, flags and the note "other" needs', () => {
    const { row, errors } = checkSampleRow(
      { line: 9, code: '', comparative: ['abc'], candidate: ['1'], unit: 'mmol/L', runDate: '31/12/2026', flags: 'other', flagNote: ' ' },
      rules,
    );
    expect(row).toBeNull();
    expect(errors.map((e) => e.field)).toEqual(['code', 'unit', 'comparative.1', 'runDate', 'flagNote']);
    expect(errors.every((e) => e.line === 9)).toBe(true);
    expect(errors[1].message).toContain('mg/dL');
  });

  it('refuses more replicates than the protocol plans', () => {
    const { errors } = checkSampleRow({ code: 'S', comparative: ['1'], candidate: ['1', '2'] }, { ...rules, replicates: 1 });
    expect(errors.map((e) => e.field)).toEqual(['candidate.2']);
  });
});

describe('files', () => {
  const headers = ['Sample', 'Comparative 1', 'Comparative 2', 'Candidate 1', 'Candidate 2', 'Run date', 'Unit'];

  it('guesses a mapping from header names', () => {
    expect(guessMapping(headers, 2)).toEqual({
      sampleCode: 'Sample',
      comparative: ['Comparative 1', 'Comparative 2'],
      candidate: ['Candidate 1', 'Candidate 2'],
      runDate: 'Run date',
      unit: 'Unit',
      flags: null,
      flagNote: null,
    });
  });

  it('names mapped columns the file lacks, on line 1', () => {
    const problems = missingColumns(['Sample', 'X'], { sampleCode: 'Sample', comparative: ['X'], candidate: ['Y'] });
    expect(problems).toEqual([{ line: 1, field: 'candidate.1', message: expect.stringContaining('"Y"') }]);
  });

  it('keeps line numbers (header is line 1, blank lines counted) and refuses repeated codes', () => {
    const mapping = { sampleCode: 'Sample', comparative: ['X'], candidate: ['Y'] };
    const rows = tableToRows(['Sample', 'X', 'Y'], [['A', '10', '11'], ['', '', ''], ['a', '12', '13'], ['B', '14', '15']], mapping);
    expect(rows.map((r) => r.line)).toEqual([2, 4, 5]);
    const checked = checkRows(rows, { ...rules, replicates: 1 });
    expect(checked.rows.map((r) => r.code)).toEqual(['A', 'B']);
    expect(checked.errors).toEqual([{ line: 4, field: 'code', message: expect.stringContaining('first on line 2') }]);
  });

  it('detects a decimal comma only when commas do not separate fields', () => {
    expect(detectDecimalComma([['S-1', '12,5']], ';')).toBe(true);
    expect(detectDecimalComma([['S-1', '12.5']], ';')).toBe(false);
    expect(detectDecimalComma([['S-1', '12,5']], ',')).toBe(false);
  });
});

describe('decodeCsvBytes', () => {
  it('drops a UTF-8 byte-order mark and keeps non-ASCII text', () => {
    const bytes = new Uint8Array([0xef, 0xbb, 0xbf, ...new TextEncoder().encode('Note\nhémolysé\n')]);
    expect(decodeCsvBytes(bytes)).toEqual({ ok: true, text: 'Note\nhémolysé\n' });
  });
  it('refuses UTF-16 and Latin-1 with the line of the first bad byte', () => {
    expect(decodeCsvBytes(new Uint8Array([0xff, 0xfe, 0x53, 0x00]))).toMatchObject({ ok: false, problem: { line: 1, field: 'file', message: expect.stringContaining('UTF-16') } });
    const latin1 = new Uint8Array([...new TextEncoder().encode('a\nb\nh'), 0xe9, 0x0a]);
    expect(decodeCsvBytes(latin1)).toMatchObject({ ok: false, problem: { line: 3, message: expect.stringContaining('Byte 6 (0xE9)') } });
  });
});
