import { describe, expect, it } from 'vitest';
import { parseComparisonCsv } from '../../../../src/lib/stats/csvInput';
import { StatsInputError } from '../../../../src/lib/stats/errors';

describe('parseComparisonCsv', () => {
  it('reads single columns, skipping blank lines, a byte-order mark and surrounding spaces', () => {
    const parsed = parseComparisonCsv('\uFEFFsample_id, comparative ,candidate\r\nA1, 5.1 ,5.3\r\n\r\n"A 2",7,7.2\r\nA3,9.8e0,10.1\r\n');
    expect(parsed).toEqual({ sampleIds: ['A1', 'A 2', 'A3'], comparative: [5.1, 7, 9.8], candidate: [5.3, 7.2, 10.1] });
  });

  it('averages duplicate columns and returns them as replicates', () => {
    const parsed = parseComparisonCsv(
      'sample_id,comparative_1,comparative_2,candidate_1,candidate_2\nA,1,3,2,2\nB,4,6,5,7\nC,7,9,8,8\n',
    );
    expect(parsed.comparative).toEqual([2, 5, 8]);
    expect(parsed.candidate).toEqual([2, 6, 8]);
    expect(parsed.replicates).toEqual({ comparative: [[1, 3], [4, 6], [7, 9]], candidate: [[2, 2], [5, 7], [8, 8]] });
  });

  it('names the line, counting the header as line 1 and blank lines too', () => {
    const text = 'sample_id,comparative,candidate\nA,1,1\n\nB,2,2,5\nC,3,\n';
    expect(() => parseComparisonCsv(text)).toThrow('line 5: candidate is empty');
    expect(() => parseComparisonCsv('sample_id,comparative,candidate\nA,1,1\nB,2,"2,5"\nC,3,3\n')).toThrow(
      "line 3: candidate '2,5' is not a number (use a point as decimal separator)",
    );
  });

  it('wants the replicate columns as a set of four', () => {
    expect(() => parseComparisonCsv('sample_id,comparative,candidate,comparative_1\nA,1,1,1\n')).toThrow(
      "line 1: column 'comparative_2' is missing (replicate columns come as a set of four)",
    );
  });

  it('throws StatsInputError for an empty file', () => {
    expect(() => parseComparisonCsv('')).toThrow(StatsInputError);
  });
});
