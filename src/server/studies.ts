/**
 * Studies: opened by a lab scientist from an approved protocol version (candidate and comparative procedure,
 * assigned technicians), and moved between states only through the transition table below, so the sign-off
 * work adds its transitions in one place.
 */
import { and, asc, desc, eq, inArray, sql } from 'drizzle-orm';
import { getDb } from './db';
import { memberships, protocolVersions, protocols, samples, studies, studyAssignments, user, type StudyState } from '../db/schema';
import { recordAudit, type Executor } from './audit';
import { can, type Action } from './permissions';
import { conflict, forbidden, invalid, notFound, Problem } from './problem';
import { getApprovedVersion } from './protocols';
import type { Role } from '../db/schema';
import type { ProtocolSettings } from '../lib/protocolSchema';
import type { Procedure, StudyOpen } from '../lib/resultSchemas';
import type { ResultRules } from '../lib/resultParsing';
import type { Database } from '../db/client';

const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;

/**
 * Whether an id can name a row (a malformed id names nothing, and never reaches PostgreSQL's uuid parser).
 *
 * @example
 * isUuid('not-an-id'); // false
 */
export const isUuid = (id: string | undefined): id is string => !!id && UUID.test(id);

/**
 * Every state change a study can make: from which state, to which, who may do it and what the audit trail says.
 *
 * @example
 * STUDY_TRANSITIONS.start_collecting.to; // 'collecting'
 */
export const STUDY_TRANSITIONS = {
  start_collecting: { from: 'draft', to: 'collecting', action: 'study.open', audit: 'study.collecting_started', label: 'Start collecting results' },
  // Taken only through the sign-off service (src/server/signoff.ts), which checks the analysis and the signature.
  submit_for_sign_off: { from: 'collecting', to: 'in_review', action: 'study.submit', audit: 'study.submitted_for_sign_off', label: 'Submit for sign-off' },
  sign: { from: 'in_review', to: 'signed', action: 'study.sign', audit: 'study.signed', label: 'Sign the study' },
  return_for_changes: { from: 'in_review', to: 'collecting', action: 'study.sign', audit: 'study.returned_for_changes', label: 'Return for changes' },
} as const satisfies Record<string, { from: StudyState; to: StudyState; action: Action; audit: string; label: string }>;
/**
 * The name of a study transition.
 *
 * @example
 * const transition: StudyTransition = 'start_collecting';
 */
export type StudyTransition = keyof typeof STUDY_TRANSITIONS;

/**
 * The transitions a role may take from a state (what the study page offers).
 *
 * @example
 * availableTransitions('draft', 'lab_scientist'); // ['start_collecting']
 */
export function availableTransitions(state: StudyState, role: Role | null): StudyTransition[] {
  return (Object.keys(STUDY_TRANSITIONS) as StudyTransition[]).filter((key) => STUDY_TRANSITIONS[key].from === state && can(role, STUDY_TRANSITIONS[key].action));
}

/** What a protocol version's settings say about the results a study takes. */
export function resultRulesOf(settings: ProtocolSettings): ResultRules {
  return { units: settings.analyte.units, measuringInterval: settings.analyte.measuringInterval, replicates: settings.samplePlan.replicates };
}

/**
 * Opens a study in Draft from an approved protocol version, with the technicians who will enter results.
 *
 * @example
 * const study = await openStudy(user.id, lab.id, studyOpenSchema.parse(body));
 */
export async function openStudy(actorId: string, laboratoryId: string, body: StudyOpen) {
  const version = await getApprovedVersion(laboratoryId, body.protocolVersionId);
  const technicianIds = [...new Set(body.technicianIds)];
  return getDb().transaction(async (tx) => {
    if (technicianIds.length > 0) {
      const found = await tx
        .select({ userId: memberships.userId })
        .from(memberships)
        .where(and(eq(memberships.laboratoryId, laboratoryId), eq(memberships.role, 'technician'), inArray(memberships.userId, technicianIds)));
      const known = new Set(found.map((f) => f.userId));
      const errors = technicianIds
        .map((id, index) => ({ id, index }))
        .filter(({ id }) => !known.has(id))
        .map(({ index }) => ({ field: `technicianIds.${index}`, message: 'This person is not a technician of this laboratory.' }));
      if (errors.length > 0) throw invalid('Only technicians of this laboratory can be assigned.', errors);
    }
    const [study] = await tx
      .insert(studies)
      .values({
        laboratoryId,
        protocolVersionId: version.id,
        title: body.title,
        candidateProcedure: body.candidate,
        comparativeProcedure: body.comparative,
        createdBy: actorId,
      })
      .returning();
    if (technicianIds.length > 0) await tx.insert(studyAssignments).values(technicianIds.map((userId) => ({ studyId: study.id, userId })));
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actorId,
      action: 'study.opened',
      entityType: 'study',
      entityId: study.id,
      data: { title: body.title, protocolVersionId: version.id, protocolVersionNumber: version.versionNumber, candidate: body.candidate, comparative: body.comparative, technicianIds },
    });
    return study;
  });
}

/**
 * The laboratory's studies, newest first, with their protocol and sample count.
 *
 * @example
 * const rows = await listStudies(lab.id); // [{ id, title, state, protocolTitle, versionNumber, samples, updatedAt }]
 */
export async function listStudies(laboratoryId: string) {
  return getDb()
    .select({
      id: studies.id,
      title: studies.title,
      state: studies.state,
      verdict: studies.verdict,
      revision: studies.revision,
      updatedAt: studies.updatedAt,
      protocolTitle: protocols.title,
      analyte: protocols.analyte,
      versionNumber: protocolVersions.versionNumber,
      // Correlated subquery with explicit table names: inside sql`` Drizzle renders bare column names.
      samples: sql<number>`(select count(*)::int from samples s where s.study_id = studies.id)`,
    })
    .from(studies)
    .innerJoin(protocolVersions, eq(protocolVersions.id, studies.protocolVersionId))
    .innerJoin(protocols, eq(protocols.id, protocolVersions.protocolId))
    .where(eq(studies.laboratoryId, laboratoryId))
    .orderBy(desc(studies.updatedAt));
}

/**
 * The study for a page: like getStudy, but null when it does not exist in this laboratory, so the page can show
 * the 404 page.
 *
 * @example
 * const found = await findStudy(lab.id, Astro.params.id);
 * if (!found) return Astro.rewrite('/404');
 */
export async function findStudy(laboratoryId: string, studyId: string | undefined) {
  try {
    return await getStudy(laboratoryId, studyId);
  } catch (error) {
    if (error instanceof Problem && error.status === 404) return null;
    throw error;
  }
}

/**
 * One study of the laboratory with its protocol version's settings and assigned technicians, or a 404 Problem.
 *
 * @example
 * const { study, settings, technicians } = await getStudy(lab.id, params.id);
 */
export async function getStudy(laboratoryId: string, studyId: string | undefined) {
  if (!isUuid(studyId)) throw notFound('study');
  const db = getDb();
  const [row] = await db
    .select({ study: studies, settings: protocolVersions.settings, versionNumber: protocolVersions.versionNumber, protocolId: protocols.id, protocolTitle: protocols.title })
    .from(studies)
    .innerJoin(protocolVersions, eq(protocolVersions.id, studies.protocolVersionId))
    .innerJoin(protocols, eq(protocols.id, protocolVersions.protocolId))
    .where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId)));
  if (!row) throw notFound('study');
  const technicians = await db
    .select({ id: user.id, name: user.name })
    .from(studyAssignments)
    .innerJoin(user, eq(user.id, studyAssignments.userId))
    .where(eq(studyAssignments.studyId, studyId))
    .orderBy(asc(user.name));
  const settings = row.settings as ProtocolSettings;
  return {
    study: { ...row.study, candidateProcedure: row.study.candidateProcedure as Procedure, comparativeProcedure: row.study.comparativeProcedure as Procedure },
    settings,
    rules: resultRulesOf(settings),
    protocol: { id: row.protocolId, title: row.protocolTitle, versionNumber: row.versionNumber },
    technicians,
  };
}

/**
 * The laboratory's technicians (whom a new study may be assigned to).
 *
 * @example
 * const people = await labTechnicians(lab.id); // [{ id, name }]
 */
export async function labTechnicians(laboratoryId: string) {
  return getDb()
    .select({ id: user.id, name: user.name })
    .from(memberships)
    .innerJoin(user, eq(user.id, memberships.userId))
    .where(and(eq(memberships.laboratoryId, laboratoryId), eq(memberships.role, 'technician')))
    .orderBy(asc(user.name));
}

/**
 * Moves a study through one transition from the version the person saw (409 on a stale version or a state the
 * transition does not start from; 403 when the role may not take it).
 *
 * @example
 * await transitionStudy({ id: user.id, role: 'lab_scientist' }, lab.id, studyId, 'start_collecting', 1);
 */
export async function transitionStudy(actor: { id: string; role: Role | null }, laboratoryId: string, studyId: string | undefined, transition: StudyTransition, expectedVersion: number) {
  if (!isUuid(studyId)) throw notFound('study');
  const step = STUDY_TRANSITIONS[transition];
  if (!can(actor.role, step.action)) throw forbidden(step.label.toLowerCase());
  return getDb().transaction(async (tx) => {
    const [current] = await tx.select().from(studies).where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId))).for('update');
    if (!current) throw notFound('study');
    if (current.version !== expectedVersion) throw conflict('This study was changed by someone else; reload to see its state.', { current: { state: current.state, version: current.version } });
    if (current.state !== step.from) {
      throw new Problem(409, 'Not possible in this state', `"${step.label}" starts from ${step.from}; this study is ${current.state}.`, undefined, { current: { state: current.state, version: current.version } });
    }
    const [updated] = await tx
      .update(studies)
      .set({ state: step.to, version: current.version + 1, updatedAt: new Date() })
      .where(eq(studies.id, studyId))
      .returning();
    await recordAudit(tx, { laboratoryId, actorUserId: actor.id, action: step.audit, entityType: 'study', entityId: studyId, data: { from: step.from, to: step.to } });
    return updated;
  });
}

type Tx = Parameters<Parameters<Database['transaction']>[0]>[0];

/**
 * Locks a study for a change to its results and returns it with its rules; results change only while the study
 * is collecting (409 otherwise). Every results write takes this lock first. 'update' (imports and uploads of
 * many rows) makes writes to one study serial; 'share' (one grid row, whose sample row is locked too, and whose
 * code is kept unique by the database: a racing duplicate answers 409) lets rows be saved side by side, while a
 * state change (submit, sign), which takes the study row for update, still waits for them and they for it.
 *
 * @example
 * const { study, rules } = await lockCollectingStudy(tx, lab.id, studyId);
 */
export async function lockCollectingStudy(tx: Tx & Executor, laboratoryId: string, studyId: string | undefined, mode: 'update' | 'share' = 'update') {
  if (!isUuid(studyId)) throw notFound('study');
  const [row] = await tx
    .select({ study: studies, settings: protocolVersions.settings })
    .from(studies)
    .innerJoin(protocolVersions, eq(protocolVersions.id, studies.protocolVersionId))
    .where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId)))
    .for(mode, { of: studies });
  if (!row) throw notFound('study');
  refuseUnlessCollecting(row.study.state);
  return { study: row.study, rules: resultRulesOf(row.settings as ProtocolSettings) };
}

/**
 * Refuses a person's results write to a study that names its technicians when that person is not one of them (403);
 * a study opened without any is open to every technician of the laboratory, and API tokens (no person) are not
 * asked. The names are read once per study and remembered: they are set when the study opens and never change.
 *
 * @example
 * await refuseUnlessAssigned(lab.id, study.id, writer.userId);
 */
export async function refuseUnlessAssigned(laboratoryId: string, studyId: string, userId: string | null): Promise<void> {
  if (userId === null) return;
  const key = `${laboratoryId}:${studyId.toLowerCase()}`;
  let assigned = assignedByStudy.get(key);
  if (!assigned) {
    const rows = await getDb()
      .select({ userId: studyAssignments.userId })
      .from(studyAssignments)
      .innerJoin(studies, eq(studies.id, studyAssignments.studyId))
      .where(and(eq(studyAssignments.studyId, studyId), eq(studies.laboratoryId, laboratoryId)));
    assigned = new Set(rows.map((r) => r.userId));
    if (assignedByStudy.size >= REMEMBERED_STUDIES) assignedByStudy.delete(assignedByStudy.keys().next().value!);
    assignedByStudy.set(key, assigned);
  }
  if (assigned.size > 0 && !assigned.has(userId)) {
    throw new Problem(403, 'Not assigned', 'Only the technicians named when this study was opened enter its results.');
  }
}
const assignedByStudy = new Map<string, Set<string>>();

function refuseUnlessCollecting(state: StudyState) {
  if (state !== 'collecting') {
    throw new Problem(409, 'Study not collecting results', `Results can be entered only while the study is collecting results; this study is ${state.replace('_', ' ')}.`);
  }
}

/** A study's state and its protocol version's settings, by study and laboratory: one prepared statement. */
let studyStateAndSettings: ReturnType<typeof prepareStudyStateAndSettings> | undefined;
function prepareStudyStateAndSettings() {
  return getDb()
    .select({ state: studies.state, settings: protocolVersions.settings })
    .from(studies)
    .innerJoin(protocolVersions, eq(protocolVersions.id, studies.protocolVersionId))
    .where(and(eq(studies.id, sql.placeholder('studyId')), eq(studies.laboratoryId, sql.placeholder('laboratoryId'))))
    .prepare('study_state_and_settings');
}

/**
 * Result rules by laboratory and study, as last read while the study was collecting. Nothing here goes out of date,
 * in this process or another: a study keeps its protocol version for good (a new revision is a new study) and an
 * approved version is frozen by the database (drizzle/0002_protocol_version_freeze.sql). The state, which does
 * change, is not kept: the write that uses these rules checks it in its own statement.
 */
const rulesByStudy = new Map<string, ResultRules>();
const REMEMBERED_STUDIES = 1000;

/**
 * The result rules of a study that is collecting results (404 and 409 as lockCollectingStudy), read without a lock,
 * for a write that takes the study's lock in its own statement and checks the state again there (a new grid row).
 *
 * @example
 * const rules = await collectingStudyRules(lab.id, studyId);
 */
export async function collectingStudyRules(laboratoryId: string, studyId: string | undefined): Promise<ResultRules> {
  if (!isUuid(studyId)) throw notFound('study');
  studyStateAndSettings ??= prepareStudyStateAndSettings();
  const [row] = await studyStateAndSettings.execute({ studyId, laboratoryId });
  if (!row) throw notFound('study');
  refuseUnlessCollecting(row.state);
  const rules = resultRulesOf(row.settings as ProtocolSettings);
  if (rulesByStudy.size >= REMEMBERED_STUDIES) rulesByStudy.delete(rulesByStudy.keys().next().value!);
  rulesByStudy.set(`${laboratoryId}:${studyId.toLowerCase()}`, rules);
  return rules;
}

/**
 * The rules collectingStudyRules last read for this study of this laboratory, without asking the database (and so
 * without checking the state), or undefined when it has not read them.
 *
 * @example
 * const rules = knownStudyRules(lab.id, studyId) ?? (await collectingStudyRules(lab.id, studyId));
 */
export function knownStudyRules(laboratoryId: string, studyId: string | undefined): ResultRules | undefined {
  return isUuid(studyId) ? rulesByStudy.get(`${laboratoryId}:${studyId.toLowerCase()}`) : undefined;
}
