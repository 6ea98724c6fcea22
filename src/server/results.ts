/**
 * Paired results: the entry grid's rows (one sample, its results per procedure and replicate, run date, flags),
 * saved one row at a time with optimistic concurrency, and the bulk path shared by CSV imports and the results
 * API (all rows or none). A change to a saved value needs a reason and is audited with old and new values.
 */
import { randomUUID } from 'node:crypto';
import { and, asc, eq, inArray, isNull, sql } from 'drizzle-orm';
import { getDb } from './db';
import { apiTokens, importLogs, results, samples, type ImportSource } from '../db/schema';
import { auditArguments, recordAudit } from './audit';
import { conflict, invalid, notFound, Problem, type FieldError } from './problem';
import { collectingStudyRules, isUuid, knownStudyRules, lockCollectingStudy, refuseUnlessAssigned } from './studies';
import { sha256 } from './laboratories';
import {
  checkSampleRow,
  formatResultValue,
  type CheckedResult,
  type CheckedRow,
  type ResultRules,
  type RowMessage,
  type SampleRowText,
} from '../lib/resultParsing';
import type { ApiUpload, RowSave, RowRemove } from '../lib/resultSchemas';
import type { Database } from '../db/client';

type Tx = Parameters<Parameters<Database['transaction']>[0]>[0];
type Procedure = 'comparative' | 'candidate';
type ResultRow = typeof results.$inferSelect;
type SampleRow = typeof samples.$inferSelect;

/** Who writes: a signed-in person, or a lab-scoped API token (named in the audit trail). */
export interface Writer {
  userId: string | null;
  tokenName: string | null;
}

/** A stored result as the grid shows it. */
export interface GridCell {
  value: number;
  censored: '<' | '>' | null;
  text: string;
}

/** One row of the entry grid. */
export interface GridRow {
  id: string;
  code: string;
  position: number;
  version: number;
  runDate: string | null;
  flags: string[];
  flagNote: string | null;
  comparative: (GridCell | null)[];
  candidate: (GridCell | null)[];
}

function toGridRow(sample: SampleRow, sampleResults: ResultRow[], replicates: number): GridRow {
  const cells = (procedure: Procedure) =>
    Array.from({ length: replicates }, (_, i) => {
      const found = sampleResults.find((r) => r.procedure === procedure && r.replicate === i + 1);
      return found ? { value: found.value, censored: found.censored, text: formatResultValue(found) } : null;
    });
  const dated = [...sampleResults].sort((a, b) => (a.procedure === b.procedure ? a.replicate - b.replicate : a.procedure === 'comparative' ? -1 : 1)).find((r) => r.runDate);
  return {
    id: sample.id,
    code: sample.code,
    position: sample.position,
    version: sample.version,
    runDate: dated?.runDate ?? null,
    flags: sample.flags,
    flagNote: sample.flagNote,
    comparative: cells('comparative'),
    candidate: cells('candidate'),
  };
}

/**
 * Results grouped by their sample (Node 20 has no Map.groupBy).
 *
 * @example
 * groupBySample([{ sampleId: 'a' }, { sampleId: 'a' }]).get('a')?.length; // 2
 */
export function groupBySample<T extends { sampleId: string }>(rows: T[]): Map<string, T[]> {
  const groups = new Map<string, T[]>();
  for (const row of rows) {
    const group = groups.get(row.sampleId);
    if (group) group.push(row);
    else groups.set(row.sampleId, [row]);
  }
  return groups;
}

async function loadRows(db: Pick<Database, 'select'>, studyId: string, replicates: number, sampleIds?: string[]): Promise<GridRow[]> {
  const sampleRows = await db
    .select()
    .from(samples)
    .where(and(eq(samples.studyId, studyId), sampleIds ? inArray(samples.id, sampleIds) : undefined))
    .orderBy(asc(samples.position));
  if (sampleRows.length === 0) return [];
  const resultRows = await db.select().from(results).where(and(eq(results.studyId, studyId), sampleIds ? inArray(results.sampleId, sampleIds) : undefined));
  const bySample = groupBySample(resultRows);
  return sampleRows.map((s) => toGridRow(s, bySample.get(s.id) ?? [], replicates));
}

/**
 * The entry grid's rows of a study (by position), for a study already checked to be in the laboratory.
 *
 * @example
 * const rows = await gridRows(study.id, rules.replicates);
 */
export async function gridRows(studyId: string, replicates: number): Promise<GridRow[]> {
  return loadRows(getDb(), studyId, replicates);
}

/** A stored result's text, or '' for none: what audit events record as old and new values. */
const resultText = (r: { value: number; censored: '<' | '>' | null } | null | undefined) => (r ? formatResultValue(r) : '');

interface Change {
  field: string;
  from: string;
  to: string;
}

interface ResultPlan {
  inserts: CheckedResult[];
  updates: { existing: ResultRow; next: CheckedResult }[];
  deletes: ResultRow[];
  /** Changes to values that were saved (these need a reason). */
  changed: Change[];
  /** Values written where there was none. */
  added: Change[];
}

/** What to write for one sample: `emptyMeans` says whether an empty cell removes a saved result (grid) or is skipped (bulk). */
function planResults(existing: ResultRow[], checked: CheckedResult[], emptyMeans: 'remove' | 'skip'): ResultPlan {
  const plan: ResultPlan = { inserts: [], updates: [], deletes: [], changed: [], added: [] };
  for (const next of checked) {
    const field = `${next.procedure}.${next.replicate}`;
    const saved = existing.find((r) => r.procedure === next.procedure && r.replicate === next.replicate);
    if (!next.result) {
      if (saved && emptyMeans === 'remove') {
        plan.deletes.push(saved);
        plan.changed.push({ field, from: resultText(saved), to: '' });
      }
      continue;
    }
    if (!saved) {
      plan.inserts.push(next);
      plan.added.push({ field, from: '', to: resultText(next.result) });
    } else if (saved.value !== next.result.value || saved.censored !== next.result.censored) {
      plan.updates.push({ existing: saved, next });
      plan.changed.push({ field, from: resultText(saved), to: resultText(next.result) });
    }
  }
  return plan;
}

async function applyPlan(tx: Tx, context: { laboratoryId: string; studyId: string; sampleId: string; units: string; writer: Writer }, plan: ResultPlan, runDate: string | null | undefined) {
  const now = new Date();
  if (plan.inserts.length > 0) {
    await tx.insert(results).values(
      plan.inserts.map((r) => ({
        laboratoryId: context.laboratoryId,
        studyId: context.studyId,
        sampleId: context.sampleId,
        procedure: r.procedure,
        replicate: r.replicate,
        value: r.result!.value,
        censored: r.result!.censored,
        unit: context.units,
        runDate: runDate ?? null,
        enteredBy: context.writer.userId,
      })),
    );
  }
  for (const { existing, next } of plan.updates) {
    await tx
      .update(results)
      .set({ value: next.result!.value, censored: next.result!.censored, version: existing.version + 1, updatedAt: now, enteredBy: context.writer.userId, ...(runDate === undefined ? {} : { runDate }) })
      .where(eq(results.id, existing.id));
  }
  if (plan.deletes.length > 0) await tx.delete(results).where(inArray(results.id, plan.deletes.map((r) => r.id)));
}

const sameFlags = (a: readonly string[], b: readonly string[]) => a.length === b.length && a.every((f) => b.includes(f));

function rowText(body: RowSave): SampleRowText {
  return { code: body.code, comparative: body.comparative, candidate: body.candidate, runDate: body.runDate, flags: body.flags.join(','), flagNote: body.flagNote };
}

function invalidRow(errors: RowMessage[]) {
  return invalid(`${errors.length} cell${errors.length === 1 ? '' : 's'} need attention: ${errors.map((e) => e.field).join(', ')}.`, errors.map(({ field, message }) => ({ field, message })));
}

/**
 * Saves one grid row: creates the sample when `sampleId` is null, otherwise updates it from the version the
 * person started from (409 with the saved row when someone saved it since). A change to a saved value (or the
 * code) needs `reason`; the audit event records every old and new value. Values outside the measuring interval
 * are saved and come back as warnings.
 *
 * @example
 * const { row, warnings } = await saveRow({ userId: user.id, tokenName: null }, lab.id, studyId, null, body);
 */
export async function saveRow(writer: Writer, laboratoryId: string, studyId: string | undefined, sampleId: string | null, body: RowSave) {
  if (sampleId === null) return createRow(writer, laboratoryId, studyId, body);
  if (!isUuid(sampleId)) throw notFound('sample');
  return getDb().transaction(async (tx) => {
    const { study, rules } = await lockCollectingStudy(tx, laboratoryId, studyId, 'share');
    await refuseUnlessAssigned(laboratoryId, study.id, writer.userId);
    const checked = checkSampleRow(rowText(body), rules);
    if (!checked.row) throw invalidRow(checked.errors);
    const row = checked.row;
    const current = async (id: string) => (await loadRows(tx, study.id, rules.replicates, [id]))[0];

    const [sameCode] = await tx
      .select({ id: samples.id })
      .from(samples)
      .where(and(eq(samples.studyId, study.id), sql`lower(${samples.code}) = lower(${row.code})`));

    const [sample] = await tx.select().from(samples).where(and(eq(samples.id, sampleId), eq(samples.studyId, study.id), eq(samples.laboratoryId, laboratoryId))).for('update');
    if (!sample) throw notFound('sample');
    if (body.version !== sample.version) {
      throw conflict(`Sample ${sample.code} was saved by someone else since you started; compare the saved values with yours and choose.`, { current: await current(sample.id) });
    }
    if (sameCode && sameCode.id !== sample.id) throw invalidRow([{ field: 'code', message: `Sample code ${row.code} is already used by another row of this study.` }]);

    const existing = await tx.select().from(results).where(eq(results.sampleId, sample.id));
    const before = toGridRow(sample, existing, rules.replicates);
    const plan = planResults(existing, row.results, 'remove');
    const changed = [...plan.changed];
    if (sample.code !== row.code) changed.push({ field: 'code', from: sample.code, to: row.code });
    const metaChanges: Change[] = [];
    if ((row.runDate ?? null) !== before.runDate) metaChanges.push({ field: 'runDate', from: before.runDate ?? '', to: row.runDate ?? '' });
    if (!sameFlags(sample.flags, row.flags ?? [])) metaChanges.push({ field: 'flags', from: sample.flags.join(', '), to: (row.flags ?? []).join(', ') });
    if ((sample.flagNote ?? null) !== (row.flagNote ?? null)) metaChanges.push({ field: 'flagNote', from: sample.flagNote ?? '', to: row.flagNote ?? '' });

    if (changed.length > 0 && !body.reason) {
      throw invalid('A saved value changes: say why.', [{ field: 'reason', message: `Give a reason for changing ${changed.map((c) => c.field).join(', ')}.` }]);
    }
    if (changed.length + plan.added.length + metaChanges.length === 0) return { row: before, warnings: checked.warnings };

    await applyPlan(tx, { laboratoryId, studyId: study.id, sampleId: sample.id, units: rules.units, writer }, plan, row.runDate);
    // The grid has one run date per row: a new date applies to every result of the sample.
    if (metaChanges.some((c) => c.field === 'runDate')) await tx.update(results).set({ runDate: row.runDate ?? null }).where(eq(results.sampleId, sample.id));
    await tx
      .update(samples)
      .set({ code: row.code, flags: row.flags ?? [], flagNote: row.flagNote ?? null, version: sample.version + 1, updatedAt: new Date() })
      .where(eq(samples.id, sample.id));
    const saved = await current(sample.id);
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: writer.userId,
      action: changed.length > 0 ? 'results.changed' : 'results.entered',
      entityType: 'sample',
      entityId: sample.id,
      data: { studyId: study.id, code: row.code, changes: [...changed, ...plan.added, ...metaChanges], ...(changed.length > 0 ? { reason: body.reason } : {}) },
    });
    return { row: saved, warnings: checked.warnings };
  });
}

/**
 * A new grid row as one statement (so one round trip, and its own transaction): the study row taken FOR SHARE while
 * it is collecting, as lockCollectingStudy does for every results write; the sample, unless its code is already in
 * the study (compared case-blind; the same code racing in answers 409 through the unique index); its results; and
 * its audit event, appended by append_audit_event ($14…$21), whose chain lock is then held only until this statement
 * commits. Named, so each connection plans it once. It answers whether the study was collecting, the sample that
 * already has the code, and the new sample's position and version (and the event's id, so that the audit part,
 * a plain SELECT, runs at all).
 */
const NEW_ROW_STATEMENT = {
  name: 'save_new_grid_row',
  text: `
with study as (
  select id from studies where id = $2::uuid and laboratory_id = $1::uuid and state = 'collecting' for share
), same_code as (
  select id from samples where study_id = $2::uuid and lower(code) = lower($4::text) limit 1
), sample as (
  insert into samples (id, laboratory_id, study_id, code, position, flags, flag_note)
  select $3::uuid, $1::uuid, study.id, $4::text, (select coalesce(max(position), 0) + 1 from samples where study_id = $2::uuid), $5::text[], $6::text
  from study where not exists (select 1 from same_code)
  returning id, position, version
), stored as (
  insert into results (laboratory_id, study_id, sample_id, procedure, replicate, value, censored, unit, run_date, entered_by)
  select $1::uuid, $2::uuid, sample.id, given.procedure, given.replicate, given.value, given.censored, $11::text, $12::date, $13::text
  from sample, unnest($7::text[], $8::int[], $9::float8[], $10::text[]) as given(procedure, replicate, value, censored)
  returning id
), audit as (
  select event.id from sample, append_audit_event($14::uuid, $15::text, $16::text, $17::text, $18::text, $19::jsonb, $20::timestamptz, $21::text) as event
)
select exists (select 1 from study) as collecting, (select id from same_code) as same_code_id, sample.position, sample.version,
  (select count(*) from stored)::int as results, (select id from audit) as audit_id
from (values (1)) as one (x) left join sample on true`,
};

interface NewRowOutcome {
  collecting: boolean;
  same_code_id: string | null;
  position: number | null;
  version: number | null;
}

/**
 * Removes one grid row, a sample with its results, from a study that is collecting: only at the version the person
 * read (else 409 with the saved row), with a reason; the audit event keeps the code and every value, so the row
 * can be told apart in the trail. A signed study's data cannot be removed (its database triggers refuse it too).
 *
 * @example
 * await removeRow({ userId: user.id, tokenName: null }, lab.id, studyId, sampleId, { version: 2, reason: 'Wrong study' });
 */
export async function removeRow(writer: Writer, laboratoryId: string, studyId: string | undefined, sampleId: string, body: RowRemove) {
  if (!isUuid(sampleId)) throw notFound('sample');
  return getDb().transaction(async (tx) => {
    const { study, rules } = await lockCollectingStudy(tx, laboratoryId, studyId, 'share');
    await refuseUnlessAssigned(laboratoryId, study.id, writer.userId);
    const [sample] = await tx.select().from(samples).where(and(eq(samples.id, sampleId), eq(samples.studyId, study.id), eq(samples.laboratoryId, laboratoryId))).for('update');
    if (!sample) throw notFound('sample');
    const [before] = await loadRows(tx, study.id, rules.replicates, [sample.id]);
    if (body.version !== sample.version) {
      throw conflict(`Sample ${sample.code} was saved by someone else since you read it; look at the saved values before removing it.`, { current: before });
    }
    // results and any exclusion go with the sample (ON DELETE CASCADE)
    await tx.delete(samples).where(eq(samples.id, sample.id));
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: writer.userId,
      action: 'sample.removed',
      entityType: 'sample',
      entityId: sample.id,
      data: { studyId: study.id, code: sample.code, reason: body.reason, removed: { comparative: before.comparative, candidate: before.candidate, runDate: before.runDate, flags: before.flags } },
    });
    return { removed: sample.id };
  });
}

/** saveRow for a new sample (see NEW_ROW_STATEMENT). */
async function createRow(writer: Writer, laboratoryId: string, studyIdInPath: string | undefined, body: RowSave) {
  // The statement checks the state; a study that is not collecting is refused before its row is checked, as always.
  const known = knownStudyRules(laboratoryId, studyIdInPath);
  const rules = known ?? (await collectingStudyRules(laboratoryId, studyIdInPath));
  // The id as the database writes it (the path may spell it in capitals): it goes into the audit event.
  const studyId = studyIdInPath!.toLowerCase();
  await refuseUnlessAssigned(laboratoryId, studyId, writer.userId);
  const checked = checkSampleRow(rowText(body), rules);
  if (!checked.row) {
    if (known) await collectingStudyRules(laboratoryId, studyId);
    throw invalidRow(checked.errors);
  }
  const row = checked.row;
  const sampleId = randomUUID();
  const plan = planResults([], row.results, 'remove');
  const runDate = row.runDate ?? null;
  const flags = row.flags ?? [];
  const flagNote = row.flagNote ?? null;
  const { args: audit } = auditArguments({
    laboratoryId,
    actorUserId: writer.userId,
    action: 'sample.created',
    entityType: 'sample',
    entityId: sampleId,
    data: { studyId, code: row.code, results: plan.added, runDate, flags, flagNote },
  });
  const given = plan.inserts.map((r) => ({ procedure: r.procedure, replicate: r.replicate, value: r.result!.value, censored: r.result!.censored }));
  const { rows } = await getDb().$client.query<NewRowOutcome>({
    ...NEW_ROW_STATEMENT,
    values: [
      laboratoryId, studyId, sampleId, row.code, flags, flagNote,
      given.map((r) => r.procedure), given.map((r) => r.replicate), given.map((r) => r.value), given.map((r) => r.censored),
      rules.units, runDate, writer.userId,
      ...audit,
    ],
  });
  const [outcome] = rows;
  if (!outcome.collecting) {
    // The study left collection (or was removed) since its rules were read: the same refusal, read again.
    await collectingStudyRules(laboratoryId, studyId);
    throw new Problem(409, 'Study changed', 'The study changed while the row was being saved; nothing was saved. Reload and try again.');
  }
  if (outcome.same_code_id) {
    const [current] = await loadRows(getDb(), studyId, rules.replicates, [outcome.same_code_id]);
    throw conflict(`Sample ${row.code} is already in this study (someone may have just saved it); here is the saved row.`, { current });
  }
  const cells = (procedure: Procedure) =>
    Array.from({ length: rules.replicates }, (_, i) => {
      const found = given.find((r) => r.procedure === procedure && r.replicate === i + 1);
      return found ? { value: found.value, censored: found.censored, text: formatResultValue(found) } : null;
    });
  // The row as stored, from what the statement wrote and answered: no second read.
  const saved: GridRow = { id: sampleId, code: row.code, position: outcome.position!, version: outcome.version!, runDate: given.length > 0 ? runDate : null, flags, flagNote, comparative: cells('comparative'), candidate: cells('candidate') };
  return { row: saved, warnings: checked.warnings };
}

/** The most per-row errors a refusal lists (the detail says how many there were). */
const MAX_LISTED_ERRORS = 200;

/**
 * A 422 for a file or upload, naming the line and field of each problem (line 1 is a CSV's header).
 *
 * @example
 * throw refusal('The file was not imported', [{ line: 3, field: 'comparative.1', message: 'Enter a number…' }]);
 */
export function refusal(what: string, messages: RowMessage[]) {
  const errors: (FieldError & { line?: number })[] = messages.slice(0, MAX_LISTED_ERRORS).map((m) => ({
    field: m.line === undefined ? m.field : `line ${m.line}: ${m.field}`,
    message: m.message,
    ...(m.line === undefined ? {} : { line: m.line }),
  }));
  const first = errors[0];
  const more = messages.length > MAX_LISTED_ERRORS ? ` (the first ${MAX_LISTED_ERRORS} are listed)` : '';
  return invalid(`${what}: ${messages.length} problem${messages.length === 1 ? '' : 's'}${more}, the first on ${first.field}: ${first.message} Nothing was saved.`, errors);
}

export interface BulkOutcome {
  samplesCreated: number;
  samplesUpdated: number;
  resultsWritten: number;
  changes: (Change & { code: string })[];
}

const INSERT_CHUNK = 1000;

/**
 * Stores checked rows of a file or an upload in the caller's transaction, or throws (and the caller's transaction
 * rolls back): a code the study already has is refused unless `existing` is 'update'; a row without any result is
 * refused. New samples are inserted in chunks; an update changes only the results the row gives.
 *
 * @example
 * const outcome = await storeRows(tx, { laboratoryId, studyId, rules, writer }, rows, { existing: 'refuse' });
 */
export async function storeRows(
  tx: Tx,
  context: { laboratoryId: string; studyId: string; rules: ResultRules; writer: Writer },
  rows: CheckedRow[],
  options: { existing: 'refuse' | 'update'; what: string },
): Promise<BulkOutcome> {
  const { laboratoryId, studyId, rules, writer } = context;
  const savedSamples = await tx.select().from(samples).where(eq(samples.studyId, studyId));
  const byCode = new Map(savedSamples.map((s) => [s.code.toLowerCase(), s]));
  const problems: RowMessage[] = [];
  for (const row of rows) {
    const line = row.line === undefined ? {} : { line: row.line };
    if (!row.results.some((r) => r.result)) problems.push({ ...line, field: 'code', message: `Sample ${row.code} has no result.` });
    if (byCode.has(row.code.toLowerCase()) && options.existing === 'refuse') {
      problems.push({ ...line, field: 'code', message: `Sample ${row.code} is already in this study; choose "update existing samples" to change its results.` });
    }
  }
  if (problems.length > 0) throw refusal(options.what, problems);

  const outcome: BulkOutcome = { samplesCreated: 0, samplesUpdated: 0, resultsWritten: 0, changes: [] };
  const fresh = rows.filter((row) => !byCode.has(row.code.toLowerCase()));
  const updates = rows.filter((row) => byCode.has(row.code.toLowerCase()));

  let position = savedSamples.reduce((max, s) => Math.max(max, s.position), 0);
  for (let start = 0; start < fresh.length; start += INSERT_CHUNK) {
    const chunk = fresh.slice(start, start + INSERT_CHUNK);
    const inserted = await tx
      .insert(samples)
      .values(chunk.map((row) => ({ laboratoryId, studyId, code: row.code, position: ++position, flags: row.flags ?? [], flagNote: row.flagNote ?? null })))
      .returning({ id: samples.id, code: samples.code });
    const idOf = new Map(inserted.map((s) => [s.code, s.id]));
    const values = chunk.flatMap((row) =>
      row.results
        .filter((r) => r.result)
        .map((r) => ({
          laboratoryId,
          studyId,
          sampleId: idOf.get(row.code)!,
          procedure: r.procedure,
          replicate: r.replicate,
          value: r.result!.value,
          censored: r.result!.censored,
          unit: rules.units,
          runDate: row.runDate ?? null,
          enteredBy: writer.userId,
        })),
    );
    for (let at = 0; at < values.length; at += INSERT_CHUNK) await tx.insert(results).values(values.slice(at, at + INSERT_CHUNK));
    outcome.samplesCreated += chunk.length;
    outcome.resultsWritten += values.length;
  }

  for (const row of updates) {
    const sample = byCode.get(row.code.toLowerCase())!;
    const existing = await tx.select().from(results).where(eq(results.sampleId, sample.id));
    const plan = planResults(existing, row.results, 'skip');
    const flagsChange = row.flags !== undefined && !sameFlags(sample.flags, row.flags);
    const noteChange = row.flagNote !== undefined && (sample.flagNote ?? null) !== row.flagNote;
    if (plan.inserts.length + plan.updates.length === 0 && !flagsChange && !noteChange) continue;
    await applyPlan(tx, { laboratoryId, studyId, sampleId: sample.id, units: rules.units, writer }, plan, row.runDate);
    await tx
      .update(samples)
      .set({
        version: sample.version + 1,
        updatedAt: new Date(),
        ...(flagsChange ? { flags: row.flags } : {}),
        ...(noteChange ? { flagNote: row.flagNote } : {}),
      })
      .where(eq(samples.id, sample.id));
    outcome.samplesUpdated += 1;
    outcome.resultsWritten += plan.inserts.length + plan.updates.length;
    outcome.changes.push(...[...plan.changed, ...plan.added].map((c) => ({ ...c, code: sample.code })));
  }
  return outcome;
}

/**
 * Writes the import log and its audit event for a committed bulk write (CSV file or API upload).
 *
 * @example
 * await logImport(tx, { laboratoryId, studyId, writer, source: 'api', rowCount, outcome, settings: {}, warnings, reason });
 */
export async function logImport(
  tx: Tx,
  input: { laboratoryId: string; studyId: string; writer: Writer; source: ImportSource; rowCount: number; outcome: BulkOutcome; settings: Record<string, unknown>; warnings: RowMessage[]; attachmentId?: string; reason?: string },
) {
  const [log] = await tx
    .insert(importLogs)
    .values({
      laboratoryId: input.laboratoryId,
      studyId: input.studyId,
      source: input.source,
      attachmentId: input.attachmentId ?? null,
      importedBy: input.writer.userId,
      tokenName: input.writer.tokenName,
      rowCount: input.rowCount,
      samplesCreated: input.outcome.samplesCreated,
      samplesUpdated: input.outcome.samplesUpdated,
      resultsWritten: input.outcome.resultsWritten,
      settings: input.settings,
      warnings: input.warnings,
    })
    .returning();
  await recordAudit(tx, {
    laboratoryId: input.laboratoryId,
    actorUserId: input.writer.userId,
    action: 'results.imported',
    entityType: 'study',
    entityId: input.studyId,
    data: {
      importLogId: log.id,
      source: input.source,
      ...(input.writer.tokenName ? { tokenName: input.writer.tokenName } : {}),
      rows: input.rowCount,
      samplesCreated: input.outcome.samplesCreated,
      samplesUpdated: input.outcome.samplesUpdated,
      resultsWritten: input.outcome.resultsWritten,
      ...(input.attachmentId ? { attachmentId: input.attachmentId } : {}),
      ...(input.outcome.changes.length > 0 ? { changes: input.outcome.changes, reason: input.reason } : {}),
    },
  });
  return log;
}

/**
 * The name of the API token on a request (for the audit trail), or null without one. The middleware has already
 * refused unknown and revoked tokens.
 *
 * @example
 * const tokenName = await tokenNameOf(request, lab.id); // 'LIS bridge'
 */
export async function tokenNameOf(request: Request, laboratoryId: string): Promise<string | null> {
  const bearer = request.headers.get('authorization')?.match(/^Bearer\s+(\S+)$/i)?.[1];
  if (!bearer) return null;
  const [token] = await getDb()
    .select({ name: apiTokens.name })
    .from(apiTokens)
    .where(and(eq(apiTokens.tokenHash, sha256(bearer)), eq(apiTokens.laboratoryId, laboratoryId), isNull(apiTokens.revokedAt)));
  return token?.name ?? null;
}

/**
 * A results-API upload (one result per entry: sample code, procedure, replicate, value, unit, run date, flags),
 * checked like a CSV file and stored all or nothing. Entries of one sample must agree on run date and flags.
 *
 * @example
 * const summary = await uploadResults({ userId: null, tokenName: 'LIS bridge' }, lab.id, studyId, upload);
 */
export async function uploadResults(writer: Writer, laboratoryId: string, studyId: string | undefined, upload: ApiUpload) {
  return getDb().transaction(async (tx) => {
    const { study, rules } = await lockCollectingStudy(tx, laboratoryId, studyId);
    await refuseUnlessAssigned(laboratoryId, study.id, writer.userId);
    const problems: RowMessage[] = [];
    const grouped = new Map<string, { text: SampleRowText; seen: Set<string> }>();
    upload.results.forEach((entry, index) => {
      const field = (name: string) => `results.${index}.${name}`;
      const code = entry.sampleCode.trim();
      if (entry.replicate > rules.replicates) {
        problems.push({ field: field('replicate'), message: `The protocol plans ${rules.replicates} replicate${rules.replicates === 1 ? '' : 's'} per procedure.` });
        return;
      }
      if (entry.unit.trim() !== rules.units) {
        problems.push({ field: field('unit'), message: `The unit is "${entry.unit}" but this study's protocol reports in ${rules.units}; convert the results first.` });
      }
      const key = code.toLowerCase();
      let group = grouped.get(key);
      if (!group) {
        group = { text: { code, comparative: [], candidate: [] }, seen: new Set() };
        grouped.set(key, group);
      }
      const slot = `${entry.procedure}.${entry.replicate}`;
      if (group.seen.has(slot)) {
        problems.push({ field: field('replicate'), message: `Sample ${code} ${entry.procedure} replicate ${entry.replicate} is sent twice.` });
        return;
      }
      group.seen.add(slot);
      group.text[entry.procedure][entry.replicate - 1] = String(entry.value);
      const agree = (name: 'runDate' | 'flags' | 'flagNote', value: string | undefined) => {
        if (value === undefined) return;
        if (group.text[name] !== undefined && group.text[name] !== value) {
          problems.push({ field: field(name), message: `Results of sample ${code} disagree on ${name}.` });
        }
        group.text[name] = value;
      };
      agree('runDate', entry.runDate);
      agree('flags', entry.flags?.join(','));
      agree('flagNote', entry.flagNote);
    });
    const texts = [...grouped.values()].map((g) => g.text);
    // Replicates not sent stay undefined (not given), not empty.
    for (const text of texts) {
      text.comparative = Array.from({ length: rules.replicates }, (_, i) => text.comparative[i]);
      text.candidate = Array.from({ length: rules.replicates }, (_, i) => text.candidate[i]);
    }
    const rows: CheckedRow[] = [];
    const warnings: RowMessage[] = [];
    const named = (code: string) => (m: RowMessage) => ({ field: `sample ${code || '(no code)'}.${m.field}`, message: m.message });
    for (const text of texts) {
      const checked = checkSampleRow(text, rules);
      problems.push(...checked.errors.map(named(text.code)));
      warnings.push(...checked.warnings.map(named(text.code)));
      if (checked.row) rows.push(checked.row);
    }
    if (problems.length > 0) throw refusal('The upload was not stored', problems);
    const outcome = await storeRows(tx, { laboratoryId, studyId: study.id, rules, writer }, rows, { existing: upload.existing, what: 'The upload was not stored' });
    const log = await logImport(tx, {
      laboratoryId,
      studyId: study.id,
      writer,
      source: 'api',
      rowCount: upload.results.length,
      outcome,
      settings: { existing: upload.existing },
      warnings,
      reason: upload.reason,
    });
    return { importLogId: log.id, ...outcome, warnings };
  });
}
