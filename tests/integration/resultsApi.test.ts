import { afterAll, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { auditTrail } from '../../src/server/audit';
import { importLogs } from '../../src/db/schema';
import { httpClient, signIn } from './helpers';
import { collectingStudy, problemOf, rowCounts } from './studySetup';

afterAll(() => getDb().$client.end());

const result = (sampleCode: string, procedure: 'comparative' | 'candidate', replicate: number, value: number | string) => ({
  sampleCode,
  procedure,
  replicate,
  value,
  unit: 'mg/dL',
  runDate: '2026-11-21',
});

describe('results API with a lab-scoped token', () => {
  it('uploads with a token (audited with its name), refuses bad uploads whole, and answers 401 once revoked', async () => {
    const { lab, base, studyId } = await collectingStudy('api');
    const admin = await signIn(lab.people.lab_admin.email);
    const created = await admin.post(`/api/labs/${lab.slug}/tokens`, { name: 'LIS bridge' });
    expect(created.status).toBe(201);
    const { token } = await created.json();
    const secret: string = token.secret;
    const lis = httpClient();
    const upload = (body: unknown) => lis.request('POST', `${base}/results`, body, { authorization: `Bearer ${secret}` });

    const ok = await upload({
      results: [result('L-1', 'comparative', 1, 90.5), result('L-1', 'comparative', 2, '90,9'), result('L-1', 'candidate', 1, 93.1), result('L-1', 'candidate', 2, '<95'), result('L-2', 'comparative', 1, 150)],
    });
    expect(ok.status).toBe(201);
    const summary = await ok.json();
    expect(summary).toMatchObject({ samplesCreated: 2, resultsWritten: 5 });
    const [log] = await getDb().select().from(importLogs).where(eq(importLogs.id, summary.importLogId));
    expect(log).toMatchObject({ source: 'api', tokenName: 'LIS bridge', importedBy: null });
    const event = (await auditTrail(getDb(), lab.id, { entityId: studyId })).find((e) => e.action === 'results.imported');
    expect(event).toMatchObject({ actorUserId: null, data: { tokenName: 'LIS bridge', source: 'api' } });

    const before = await rowCounts();
    const bad = await upload({ results: [result('L-3', 'comparative', 1, 80), result('L-3', 'candidate', 1, 'high'), { ...result('L-4', 'candidate', 1, 70), unit: 'mmol/L' }] });
    expect(bad.status).toBe(422);
    const problem = await problemOf(bad);
    expect(problem.errors?.map((e) => e.field)).toEqual(['results.2.unit', 'sample L-3.candidate.1']);
    const again = await upload({ results: [result('L-1', 'candidate', 2, 96)] });
    expect(again.status).toBe(422);
    expect((await problemOf(again)).errors?.[0].message).toContain('already in this study');
    expect(await rowCounts()).toEqual(before);

    const list = await (await admin.get(`/api/labs/${lab.slug}/tokens`)).json();
    const tokenId = list.tokens.find((t: { name: string }) => t.name === 'LIS bridge').id;
    expect((await admin.delete(`/api/labs/${lab.slug}/tokens/${tokenId}`)).status).toBe(204);
    const afterRevocation = await rowCounts();
    const revoked = await upload({ results: [result('L-9', 'comparative', 1, 80)] });
    expect(revoked.status).toBe(401);
    expect((await problemOf(revoked)).detail).toMatch(/revoked/);
    expect(await rowCounts()).toEqual(afterRevocation);
  });

  it('a token of one lab cannot write to another lab, and a token may not use the grid endpoints', async () => {
    const first = await collectingStudy('api-a');
    const second = await collectingStudy('api-b');
    const admin = await signIn(first.lab.people.lab_admin.email);
    const { token } = await (await admin.post(`/api/labs/${first.lab.slug}/tokens`, { name: 'bridge' })).json();
    const lis = httpClient();
    const headers = { authorization: `Bearer ${token.secret}` };
    const before = await rowCounts();
    const foreign = await lis.request('POST', `${second.base}/results`, { results: [result('X', 'comparative', 1, 80)] }, headers);
    expect(foreign.status).toBe(404);
    const wrongStudy = await lis.request('POST', `/api/labs/${first.lab.slug}/studies/${second.studyId}/results`, { results: [result('X', 'comparative', 1, 80)] }, headers);
    expect(wrongStudy.status).toBe(404);
    const grid = await lis.request('POST', `${first.base}/samples`, { code: 'X', comparative: ['1', '1'], candidate: ['1', '1'], runDate: '', flags: [], flagNote: '' }, headers);
    expect(grid.status).toBe(403);
    expect(await rowCounts()).toEqual(before);
  });
});
