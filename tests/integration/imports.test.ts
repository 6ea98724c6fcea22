import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { and, eq } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { attachments, importLogs } from '../../src/db/schema';
import type { HttpClient } from './helpers';
import { collectingStudy, problemOf, rowCounts, type CollectingStudy } from './studySetup';

afterAll(() => getDb().$client.end());

const corpus = (name: string) => readFileSync(new URL(`../fixtures/csv/${name}`, import.meta.url));
const MAPPING = { sampleCode: 'Sample', comparative: ['Comparative 1', 'Comparative 2'], candidate: ['Candidate 1', 'Candidate 2'] };

function postCsv(client: HttpClient, base: string, name: string, bytes: Uint8Array, settings: Record<string, unknown> = { mapping: MAPPING }) {
  const form = new FormData();
  form.set('file', new Blob([new Uint8Array(bytes)], { type: 'text/csv' }), name);
  form.set('settings', JSON.stringify(settings));
  return client.request('POST', `${base}/imports`, form);
}

let setup: CollectingStudy;
beforeAll(async () => {
  setup = await collectingStudy('imports');
});

describe('a good CSV', () => {
  it('imports a semicolon file with decimal commas all at once, keeps the file and logs the import', async () => {
    const { base, technician, studyId, lab } = setup;
    const file = corpus('good-semicolon-decimal-comma.csv');
    const response = await postCsv(technician, base, 'day1.csv', file, { mapping: { ...MAPPING, runDate: 'Run date' } });
    expect(response.status).toBe(201);
    const summary = await response.json();
    expect(summary).toMatchObject({ rows: 4, samplesCreated: 4, samplesUpdated: 0, resultsWritten: 16, delimiter: ';' });
    expect(summary.warnings.map((w: { line: number; field: string }) => `${w.line} ${w.field}`)).toEqual([
      '3 comparative.1',
      '3 comparative.2',
      '5 comparative.1',
      '5 comparative.2',
      '5 candidate.1',
      '5 candidate.2',
    ]);
    const rows = (await (await technician.get(`${base}/samples`)).json()).rows;
    expect(rows.map((r: { code: string }) => r.code)).toEqual(['G-001', 'G-002', 'G-003', 'G-004']);
    expect(rows[0].comparative.map((c: { value: number }) => c.value)).toEqual([54.2, 54.8]);
    expect(rows[1].comparative[0]).toEqual({ value: 10, censored: '<', text: '<10' });
    expect(rows[2].runDate).toBe('2026-11-18');

    // Placed by the comparative mean (G-002's comparative results are censored, so its candidate mean 11.75 places it):
    // G-001 54.5, G-002 11.75 and G-003 125.6 in the low third (10–173), G-004 510.75 above the interval.
    const coverage = (await (await technician.get(`${base}/coverage`)).json()).coverage;
    expect(coverage.parts.map((p: { count: number }) => p.count)).toEqual([3, 0, 0]);
    expect(coverage.outside).toEqual({ below: 0, above: 1 });
    expect(coverage.samples).toMatchObject({ entered: 4, paired: 3, replicatesComplete: 4 });
    expect(coverage.days).toMatchObject({ covered: 2, dates: ['2026-11-17', '2026-11-18'] });
    expect(coverage.notes).toHaveLength(2);

    const [log] = await getDb().select().from(importLogs).where(eq(importLogs.id, summary.importLogId));
    expect(log).toMatchObject({ source: 'csv', importedBy: lab.people.technician.id, rowCount: 4, samplesCreated: 4, studyId });
    const [kept] = await getDb().select().from(attachments).where(and(eq(attachments.id, summary.attachmentId), eq(attachments.laboratoryId, lab.id)));
    expect(Buffer.compare(kept.content, file)).toBe(0);
    expect(kept.fileName).toBe('day1.csv');
    const download = await technician.get(`${base}/imports/${summary.importLogId}`);
    expect(download.status).toBe(200);
    expect(Buffer.compare(Buffer.from(await download.arrayBuffer()), file)).toBe(0);
    const page = await (await technician.get(`/labs/${lab.slug}/studies/${studyId}`)).text();
    expect(page).toContain('day1.csv');
  });

  it('refuses codes the study already has unless "update existing" is chosen with a reason', async () => {
    const { base, technician } = setup;
    const file = corpus('duplicate-codes.csv').toString('utf8').split('\n').slice(0, 3).join('\n');
    const before = await rowCounts();
    const refused = await postCsv(technician, base, 'again.csv', Buffer.from(file));
    expect(refused.status).toBe(422);
    const problem = await problemOf(refused);
    expect(problem.errors?.map((e) => e.field)).toEqual(['line 2: code', 'line 3: code']);
    expect(problem.errors?.[0].message).toContain('already in this study');
    expect(await rowCounts()).toEqual(before);

    const noReason = await postCsv(technician, base, 'again.csv', Buffer.from(file), { mapping: MAPPING, existing: 'update' });
    expect(noReason.status).toBe(422);
    const updated = await postCsv(technician, base, 'again.csv', Buffer.from(file), { mapping: MAPPING, existing: 'update', reason: 'Re-run after calibration' });
    expect(updated.status).toBe(201);
    expect(await updated.json()).toMatchObject({ samplesCreated: 0, samplesUpdated: 2 });
  });

  it('reads a comma file with unit, flags and a note', async () => {
    const { base, technician } = setup;
    const response = await postCsv(technician, base, 'day2.csv', corpus('good-comma.csv'), { mapping: { ...MAPPING, runDate: 'Run date', unit: 'Unit', flags: 'Flags', flagNote: 'Note' } });
    expect(response.status).toBe(201);
    const rows = (await (await technician.get(`${base}/samples`)).json()).rows;
    const last = rows.find((r: { code: string }) => r.code === 'G-103');
    expect(last).toMatchObject({ flags: ['other'], flagNote: 'sample tube cracked' });
  });
});

describe('the bad-file corpus: each refused with a clear problem and nothing written', () => {
  const cases: [string, Record<string, unknown> | undefined, number, string, RegExp][] = [
    ['wrong-delimiter.csv', undefined, 422, 'line 1: file', /single column/],
    ['missing-column.csv', undefined, 422, 'line 1: candidate.2', /no column "Candidate 2"/],
    ['text-in-number.csv', undefined, 422, 'line 4: comparative.2', /"n\/a" is not one/],
    ['duplicate-codes.csv', undefined, 422, 'line 5: code', /appears again \(first on line 3\)/],
    ['unit-mismatch.csv', { mapping: { ...MAPPING, unit: 'Unit' } }, 422, 'line 3: unit', /mmol\/L.*mg\/dL/],
    ['latin1.csv', undefined, 422, 'line 3: file', /not UTF-8.*Latin-1/],
    ['utf16.csv', undefined, 422, 'line 1: file', /UTF-16/],
  ];

  it.each(cases)('%s', async (name, settings, status, field, message) => {
    const { base, technician } = setup;
    const before = await rowCounts();
    const response = await postCsv(technician, base, name, corpus(name), settings);
    expect(response.status).toBe(status);
    const problem = await problemOf(response);
    expect(problem.errors?.[0].field).toBe(field);
    expect(problem.errors?.[0].message).toMatch(message);
    expect(problem.detail).toContain('Nothing was saved');
    expect(await rowCounts()).toEqual(before);
  });

  it('a 10 MB file is refused with 413 before it is read', async () => {
    const { base, technician } = setup;
    const line = 'G-9999,100.1,100.2,101.1,101.2\n';
    const big = Buffer.from(`Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2\n${line.repeat(Math.ceil((10 * 1024 * 1024) / line.length))}`);
    expect(big.byteLength).toBeGreaterThan(10 * 1024 * 1024);
    const before = await rowCounts();
    const response = await postCsv(technician, base, 'huge.csv', big);
    expect(response.status).toBe(413);
    expect((await problemOf(response)).detail).toMatch(/at most 5 MB/);
    expect(await rowCounts()).toEqual(before);
  });

  it('more than 5000 rows is refused with 422 naming the limit', async () => {
    const { base, technician } = setup;
    const rows = Array.from({ length: 5001 }, (_, i) => `R-${i},100,100,101,101`).join('\n');
    const before = await rowCounts();
    const response = await postCsv(technician, base, 'many.csv', Buffer.from(`Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2\n${rows}\n`));
    expect(response.status).toBe(422);
    expect((await problemOf(response)).errors?.[0].message).toMatch(/5001 data rows.*at most 5000/);
    expect(await rowCounts()).toEqual(before);
  });

  it('a late error (last row) rolls back every row before it', async () => {
    const { base, technician } = setup;
    const rows = Array.from({ length: 300 }, (_, i) => `L-${i},100,100,101,101`);
    rows.push('L-300,100,100,101,oops');
    const before = await rowCounts();
    const response = await postCsv(technician, base, 'late.csv', Buffer.from(`Sample,Comparative 1,Comparative 2,Candidate 1,Candidate 2\n${rows.join('\n')}\n`));
    expect(response.status).toBe(422);
    expect((await problemOf(response)).errors?.[0].field).toBe('line 302: candidate.2');
    expect(await rowCounts()).toEqual(before);
  });

  it('only technicians import', async () => {
    const { base, scientist } = setup;
    const response = await postCsv(scientist, base, 'x.csv', corpus('good-comma.csv'));
    expect(response.status).toBe(403);
  });
});
