import { describe, expect, it } from 'vitest';
import {
  blankRow,
  canonicalCell,
  changedSavedValues,
  gridFields,
  isDirty,
  mergeLoaded,
  pastedBlock,
  savedRow,
  shownDecimals,
  withDecimals,
  withTrailingBlank,
} from '../../../../src/components/grid/gridModel';
import type { GridRow } from '../../../../src/server/results';

const stored: GridRow = {
  id: 's1',
  code: 'S-1',
  position: 1,
  version: 3,
  runDate: '2026-11-17',
  flags: ['haemolysed'],
  flagNote: null,
  comparative: [{ value: 40, censored: null, text: '40' }, { value: 40.6, censored: null, text: '40.6' }],
  candidate: [{ value: 5, censored: '<', text: '<5' }, null],
};

describe('grid rows', () => {
  it('lists fields left to right with 1-based replicates', () => {
    expect(gridFields(1)).toEqual(['code', 'comparative.1', 'candidate.1', 'runDate', 'flags', 'flagNote']);
  });

  it('compares cells as stored: decimal comma, spacing, dotted dates and flag letters are not changes', () => {
    const row = savedRow(stored, 2);
    expect(row.cells.flags).toBe('H');
    const same = { ...row, cells: { ...row.cells, 'comparative.2': '40,60', runDate: '17.11.2026', flags: 'haemolysed', 'candidate.1': '< 5' } };
    expect(isDirty(same, 2)).toBe(false);
    expect(canonicalCell('comparative.1', ' 12,50 ')).toBe('12.5');
  });

  it('asks for a reason only when a saved code or result changes or is removed', () => {
    const row = savedRow(stored, 2);
    expect(changedSavedValues({ ...row, cells: { ...row.cells, 'candidate.2': '6', runDate: '2026-11-18' } }, 2)).toEqual([]);
    expect(changedSavedValues({ ...row, cells: { ...row.cells, 'comparative.2': '41', 'candidate.1': '' } }, 2)).toEqual(['comparative.2', 'candidate.1']);
    expect(changedSavedValues(blankRow(2), 2)).toEqual([]);
  });

  it('keeps one blank row at the bottom and keeps edits across a reload', () => {
    const editing = { ...savedRow(stored, 2), status: 'dirty' as const, cells: { ...savedRow(stored, 2).cells, 'comparative.1': '41' } };
    const typedNew = { ...blankRow(2), cells: { ...blankRow(2).cells, code: 'S-9' }, status: 'dirty' as const };
    const merged = mergeLoaded([editing, typedNew], [{ ...stored, version: 4 }, { ...stored, id: 's2', code: 'S-2' }], 2);
    expect(merged.map((r) => r.cells.code)).toEqual(['S-1', 'S-2', 'S-9', '']);
    expect(merged[0].cells['comparative.1']).toBe('41');
    expect(withTrailingBlank([blankRow(2), blankRow(2)], 2)).toHaveLength(1);
  });

  it('reads a block copied from a spreadsheet', () => {
    expect(pastedBlock('A\t1,5\r\nB\t2\r\n')).toEqual([['A', '1,5'], ['B', '2']]);
    expect(pastedBlock('A\n\nB')).toEqual([['A'], [''], ['B']]);
  });

  it('shows saved results with even decimals, never dropping typed ones', () => {
    expect(shownDecimals([savedRow(stored, 2)])).toBe(1);
    expect(withDecimals('40', 1)).toBe('40.0');
    expect(withDecimals('<5', 1)).toBe('<5.0');
    expect(withDecimals('40.25', 1)).toBe('40.25');
  });
});
