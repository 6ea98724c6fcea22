/**
 * The lock of a signed study holds in the database itself: raw SQL inserts, updates and deletes of its samples,
 * results, exclusions, analysis runs and study row are refused by the triggers of drizzle/0004_signed_study_lock.sql,
 * and signatures and audit events are append-only. A study that is not signed stays writable.
 */
import { eq, sql, TransactionRollbackError, type SQL } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { recordAudit, verifyChain, type ChainReport } from '../../src/server/audit';
import { analysisRuns, auditEvents, exclusions, results, samples, signatures, studies } from '../../src/db/schema';
import { LOCK_TRIGGERS } from '../../src/server/signoff';
import { createLabWithMembers } from './helpers';
import { approvedGlucoseVersion } from './studySetup';

const db = getDb();
afterAll(() => db.$client.end());

/** PostgreSQL's SQLSTATE for a check violation (PostgreSQL docs, Appendix A), which the triggers raise. */
const CHECK_VIOLATION = '23514';
const HASH = 'a'.repeat(64);

/** The database error of a statement expected to fail (drizzle wraps the driver's error as its cause). */
async function refusal(statement: SQL) {
  const error = await db.execute(statement).then(
    () => null,
    (e: unknown) => e as { code?: string; message?: string; cause?: { code?: string; message?: string } },
  );
  expect(error, 'the statement was expected to be refused').not.toBeNull();
  return { code: error?.cause?.code ?? error?.code, message: error?.cause?.message ?? error?.message ?? '' };
}

/** A study with one sample, its results, an exclusion, an analysis run and a signature, written as rows. */
async function studyWithData(label: string) {
  const lab = await createLabWithMembers(label);
  const { version } = await approvedGlucoseVersion(lab);
  const scientist = lab.people.lab_scientist.id;
  const [study] = await db
    .insert(studies)
    .values({ laboratoryId: lab.id, protocolVersionId: version.id, title: 'Lock check', candidateProcedure: {}, comparativeProcedure: {}, state: 'in_review', createdBy: scientist })
    .returning();
  const [sample] = await db.insert(samples).values({ laboratoryId: lab.id, studyId: study.id, code: 'L-1', position: 1 }).returning();
  const [result] = await db
    .insert(results)
    .values({ laboratoryId: lab.id, studyId: study.id, sampleId: sample.id, procedure: 'comparative', replicate: 1, value: 100, unit: 'mg/dL' })
    .returning();
  const [exclusion] = await db.insert(exclusions).values({ laboratoryId: lab.id, studyId: study.id, sampleId: sample.id, reason: 'Clotted', excludedBy: scientist }).returning();
  const [run] = await db.insert(analysisRuns).values({ laboratoryId: lab.id, studyId: study.id, inputsHash: HASH, engineVersion: 'test', settings: {}, results: {} }).returning();
  const [signature] = await db
    .insert(signatures)
    .values({
      laboratoryId: lab.id,
      studyId: study.id,
      userId: lab.people.medical_director.id,
      printedName: lab.people.medical_director.name,
      role: 'medical_director',
      meaning: 'By signing I confirm that I reviewed the test study.',
      verdict: 'accepted',
      analysisRunId: run.id,
      inputsHash: HASH,
    })
    .returning();
  const audit = await recordAudit(db, { laboratoryId: lab.id, actorUserId: null, action: 'test.event', entityType: 'study', entityId: study.id });
  return { lab, study, sample, result, exclusion, run, signature, audit };
}

async function signedStudyWithData(label: string) {
  const data = await studyWithData(label);
  await db.execute(sql`update studies set state = 'signed', verdict = 'accepted' where id = ${data.study.id}`);
  return data;
}

describe('a signed study refuses every change through direct SQL', () => {
  it('refuses inserts, updates and deletes of its samples, results, exclusions and analysis runs', async () => {
    const { lab, study, sample, result, exclusion, run } = await signedStudyWithData('locked');
    const refusedStatements: [string, SQL][] = [
      ['update results', sql`update results set value = 101 where id = ${result.id}`],
      ['insert results', sql`insert into results (laboratory_id, study_id, sample_id, procedure, replicate, value, unit) values (${lab.id}, ${study.id}, ${sample.id}, 'candidate', 1, 99, 'mg/dL')`],
      ['delete results', sql`delete from results where id = ${result.id}`],
      ['update samples', sql`update samples set flags = '{haemolysed}' where id = ${sample.id}`],
      ['insert samples', sql`insert into samples (laboratory_id, study_id, code, position) values (${lab.id}, ${study.id}, 'L-2', 2)`],
      ['delete samples', sql`delete from samples where id = ${sample.id}`],
      ['update exclusions', sql`update exclusions set reason = 'changed' where id = ${exclusion.id}`],
      ['insert exclusions', sql`insert into exclusions (laboratory_id, study_id, sample_id, reason, excluded_by) values (${lab.id}, ${study.id}, ${sample.id}, 'again', ${lab.people.lab_scientist.id})`],
      ['delete exclusions', sql`delete from exclusions where id = ${exclusion.id}`],
      ['update analysis_runs', sql`update analysis_runs set stale = true where id = ${run.id}`],
      ['insert analysis_runs', sql`insert into analysis_runs (laboratory_id, study_id, inputs_hash, engine_version, settings, results) values (${lab.id}, ${study.id}, ${HASH}, 'x', '{}', '{}')`],
      ['delete analysis_runs', sql`delete from analysis_runs where id = ${run.id}`],
    ];
    for (const [label, statement] of refusedStatements) {
      const [operation, table] = label.split(' ');
      const { code, message } = await refusal(statement);
      expect(code, label).toBe(CHECK_VIOLATION);
      expect(message, label).toBe(`study ${study.id} is signed and locked: ${operation} of ${table} refused; open an amendment (a new revision) instead`);
    }
    const [kept] = (await db.execute(sql`select value from results where id = ${result.id}`)).rows as { value: number }[];
    expect(kept.value).toBe(100);
  });

  it('refuses moving a row out of a signed study or into one', async () => {
    const signed = await signedStudyWithData('from');
    const open = await studyWithData('into');
    expect((await refusal(sql`update results set study_id = ${open.study.id} where id = ${signed.result.id}`)).message).toContain(`study ${signed.study.id} is signed`);
    expect((await refusal(sql`update exclusions set study_id = ${signed.study.id} where id = ${open.exclusion.id}`)).message).toContain(`study ${signed.study.id} is signed`);
  });

  it('freezes the signed study row: no update (not even its state) and no delete', async () => {
    const { study } = await signedStudyWithData('frozen');
    for (const statement of [
      sql`update studies set title = 'Renamed' where id = ${study.id}`,
      sql`update studies set state = 'collecting', verdict = null where id = ${study.id}`,
      sql`delete from studies where id = ${study.id}`,
    ]) {
      const { code, message } = await refusal(statement);
      expect(code).toBe(CHECK_VIOLATION);
      expect(message).toMatch(new RegExp(`^study ${study.id} is signed and locked: (update|delete) refused`));
    }
    const [row] = (await db.execute(sql`select title, state from studies where id = ${study.id}`)).rows;
    expect(row).toEqual({ title: 'Lock check', state: 'signed' });
  });

  it('keeps signatures append-only and gives a signed study no further signature', async () => {
    const { lab, study, signature, run } = await signedStudyWithData('signatures');
    expect((await refusal(sql`update signatures set verdict = 'rejected', comment = 'x' where id = ${signature.id}`)).message).toBe('signatures is append-only: update refused');
    expect((await refusal(sql`delete from signatures where id = ${signature.id}`)).message).toBe('signatures is append-only: delete refused');
    expect((await refusal(sql`truncate signatures`)).message).toBe('signatures is append-only: truncate refused');
    const second = await refusal(
      sql`insert into signatures (laboratory_id, study_id, user_id, printed_name, role, meaning, verdict, analysis_run_id, inputs_hash)
          values (${lab.id}, ${study.id}, ${lab.people.medical_director.id}, 'Someone', 'medical_director', 'm', 'accepted', ${run.id}, ${HASH})`,
    );
    expect(second.message).toBe(`study ${study.id} is already signed: a further signature is refused`);
  });
});

describe('audit events are append-only', () => {
  it('refuses updating, deleting and truncating audit events; the chain stays intact', async () => {
    const { lab, audit } = await studyWithData('audit');
    expect((await refusal(sql`update audit_events set data = '{"tampered":true}' where id = ${audit.id}`)).message).toBe('audit_events is append-only: update refused');
    expect((await refusal(sql`delete from audit_events where id = ${audit.id}`)).message).toBe('audit_events is append-only: delete refused');
    expect((await refusal(sql`truncate audit_events`)).message).toBe('audit_events is append-only: truncate refused');
    expect(await verifyChain(db, lab.id)).toMatchObject({ intact: true });
  });

  it.each([
    ['the append-only trigger disabled by name (table owner)', sql.raw(`alter table audit_events disable trigger ${LOCK_TRIGGERS.auditAppendOnly}`)],
    ['replication role "replica" for the session (superuser)', sql`set local session_replication_role = replica`],
  ])('lets a test tamper on purpose with %s inside a transaction; the chain finds the changed row', async (_how, switchOff) => {
    const { lab, audit } = await studyWithData('tamper');
    let inside: ChainReport | undefined;
    const ended = await db
      .transaction(async (tx) => {
        await tx.execute(switchOff);
        await tx.execute(sql`update audit_events set data = '{"tampered":true}' where id = ${audit.id}`);
        inside = await verifyChain(tx, lab.id);
        tx.rollback();
      })
      .catch((error: unknown) => error);
    expect(ended).toBeInstanceOf(TransactionRollbackError);
    expect(inside).toMatchObject({ intact: false, brokenAt: { id: audit.id } });
    // Rolled back: the row and the trigger are as they were.
    const [row] = await db.select({ data: auditEvents.data }).from(auditEvents).where(eq(auditEvents.id, audit.id));
    expect(row.data).toEqual({});
    expect((await refusal(sql`update audit_events set data = '{}' where id = ${audit.id}`)).message).toBe('audit_events is append-only: update refused');
  });
});

describe('a study that is not signed stays writable', () => {
  it('accepts updates and deletes of the data of a study in review, and new audit events', async () => {
    const { lab, study, result, exclusion } = await studyWithData('writable');
    await db.execute(sql`update results set value = 102 where id = ${result.id}`);
    await db.execute(sql`delete from exclusions where id = ${exclusion.id}`);
    await db.execute(sql`update studies set title = 'Renamed while in review' where id = ${study.id}`);
    const [row] = (await db.execute(sql`select value from results where id = ${result.id}`)).rows as { value: number }[];
    expect(row.value).toBe(102);
    await recordAudit(db, { laboratoryId: lab.id, actorUserId: null, action: 'test.second', entityType: 'study', entityId: study.id });
    expect(await verifyChain(db, lab.id)).toMatchObject({ intact: true, events: 2 });
  });
});
