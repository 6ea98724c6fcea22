import { eq } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { laboratories, studies, user, protocols, protocolVersions, samples, results } from '../../src/db/schema';

const db = getDb();
afterAll(() => db.$client.end());

async function makeStudy() {
  const suffix = crypto.randomUUID().slice(0, 8);
  const [lab] = await db.insert(laboratories).values({ name: `Lab ${suffix}`, slug: `lab-${suffix}` }).returning();
  const [person] = await db
    .insert(user)
    .values({ id: `u-${suffix}`, name: 'Test Scientist', email: `s-${suffix}@example.test` })
    .returning();
  const [protocol] = await db
    .insert(protocols)
    .values({ laboratoryId: lab.id, title: 'Glucose', analyte: 'Glucose', createdBy: person.id })
    .returning();
  const [pv] = await db
    .insert(protocolVersions)
    .values({ protocolId: protocol.id, laboratoryId: lab.id, versionNumber: 1, settings: {}, createdBy: person.id })
    .returning();
  const [study] = await db
    .insert(studies)
    .values({
      laboratoryId: lab.id,
      protocolVersionId: pv.id,
      title: 'New bench analyser',
      candidateProcedure: {},
      comparativeProcedure: {},
      createdBy: person.id,
    })
    .returning();
  const [sample] = await db
    .insert(samples)
    .values({ laboratoryId: lab.id, studyId: study.id, code: 'S-001', position: 1 })
    .returning();
  return { lab, study, sample };
}

/** The PostgreSQL error code for a CHECK violation (PostgreSQL docs, Appendix A). */
const CHECK_VIOLATION = '23514';

function pgCode(error: unknown): string | undefined {
  const cause = (error as { cause?: { code?: string } }).cause;
  return cause?.code ?? (error as { code?: string }).code;
}

describe('database through Drizzle', () => {
  it('writes and reads a result', async () => {
    const { lab, study, sample } = await makeStudy();
    await db.insert(results).values({
      laboratoryId: lab.id,
      studyId: study.id,
      sampleId: sample.id,
      procedure: 'candidate',
      replicate: 1,
      value: 101.5,
      unit: 'mg/dL',
      runDate: '2026-11-30',
    });
    const rows = await db.select().from(results).where(eq(results.sampleId, sample.id));
    expect(rows).toHaveLength(1);
    expect(rows[0]).toMatchObject({ procedure: 'candidate', replicate: 1, value: 101.5, runDate: '2026-11-30' });
    expect(rows[0].version).toBe(1);
  });

  it.each([
    ['a replicate number below 1', { replicate: 0, value: 5 }, 'results_replicate_ck'],
    ['a value that is not finite', { replicate: 1, value: Number.POSITIVE_INFINITY }, 'results_value_finite_ck'],
    ['a value that is NaN', { replicate: 1, value: Number.NaN }, 'results_value_finite_ck'],
  ])('refuses %s with a CHECK constraint', async (_label, bad, constraint) => {
    const { lab, study, sample } = await makeStudy();
    const error = await db
      .insert(results)
      .values({ laboratoryId: lab.id, studyId: study.id, sampleId: sample.id, procedure: 'comparative', unit: 'mg/dL', ...bad })
      .then(() => null, (e: unknown) => e);
    expect(pgCode(error)).toBe(CHECK_VIOLATION);
    expect(String((error as { cause?: Error }).cause?.message ?? error)).toContain(constraint);
    const rows = await db.select().from(results).where(eq(results.sampleId, sample.id));
    expect(rows).toHaveLength(0);
  });

  it('refuses a study state that is not one of the known states', async () => {
    const { study } = await makeStudy();
    const error = await db
      .execute(`update studies set state = 'finished' where id = '${study.id}'`)
      .then(() => null, (e: unknown) => e);
    expect(pgCode(error)).toBe(CHECK_VIOLATION);
  });
});
