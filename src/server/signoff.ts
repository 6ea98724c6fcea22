/**
 * Sign-off: a lab scientist submits a study whose analysis is current (Collecting → In review) and every medical
 * director of the laboratory is e-mailed; a medical director re-enters the password and signs a verdict
 * (In review → Signed), which locks the study in the database itself (triggers of drizzle/0004_signed_study_lock.sql),
 * or returns it with a reason (In review → Collecting); a lab scientist amends a signed study by opening its next
 * revision with a copy of its data.
 */
import { and, asc, desc, eq, isNull, sql } from 'drizzle-orm';
import { z } from 'zod';
import { getDb } from './db';
import { auditEvents, exclusions, memberships, rateLimit, results, samples, signatures, studies, studyAssignments, user, VERDICTS, type Role, type Verdict } from '../db/schema';
import { recordAudit } from './audit';
import { getCurrentAnalysis } from './analysis';
import { reauthenticate } from './auth';
import { sendMail } from './mail';
import { signOffRequestedMail, studyReturnedMail, studySignedMail } from './mailTemplates';
import { notFound, Problem, conflict } from './problem';
import { isUuid, STUDY_TRANSITIONS } from './studies';
import { VERDICT_LABELS } from '../lib/labels';
import type { Database } from '../db/client';

type Tx = Parameters<Parameters<Database['transaction']>[0]>[0];
type StudyRow = typeof studies.$inferSelect;

/**
 * Names of the lock triggers, for tests that must tamper on purpose (to show the audit chain catches it):
 * as the table owner, `ALTER TABLE audit_events DISABLE TRIGGER ${LOCK_TRIGGERS.auditAppendOnly}` (and ENABLE after),
 * or, per session as a superuser, `SET LOCAL session_replication_role = replica` inside the tampering transaction.
 *
 * @example
 * await db.execute(sql.raw(`alter table audit_events disable trigger ${LOCK_TRIGGERS.auditAppendOnly}`));
 */
export const LOCK_TRIGGERS = {
  auditAppendOnly: 'audit_events_append_only',
  auditNoTruncate: 'audit_events_no_truncate',
  signaturesAppendOnly: 'signatures_append_only',
  signaturesOnce: 'signatures_once',
  studyFrozen: 'studies_signed_frozen',
  samples: 'samples_signed_study_lock',
  results: 'results_signed_study_lock',
  exclusions: 'exclusions_signed_study_lock',
  analysisRuns: 'analysis_runs_signed_study_lock',
} as const;

/** Body of a submission: the study version the scientist saw. */
export const submitSchema = z.object({ version: z.number().int().min(1) });

const COMMENT_NEEDED: Record<Exclude<Verdict, 'accepted'>, string> = {
  accepted_with_conditions: 'State the conditions of the acceptance.',
  rejected: 'Give the reason for rejecting.',
};

/**
 * Body of a signature: verdict, comment (the conditions or the reason; required unless accepted), the password
 * re-entered, and the study version and analysis run the director reviewed.
 *
 * @example
 * signSchema.parse({ verdict: 'rejected', comment: 'Bias beyond the limit at 126 mg/dL', password: '…', version: 3, analysisRunId });
 */
export const signSchema = z
  .object({
    verdict: z.enum(VERDICTS),
    comment: z.string().trim().max(4000).default(''),
    password: z.string().min(1, 'Enter your password to sign.').max(1000),
    version: z.number().int().min(1),
    analysisRunId: z.uuid(),
  })
  .superRefine((body, ctx) => {
    if (body.verdict !== 'accepted' && body.comment === '') ctx.addIssue({ code: 'custom', path: ['comment'], message: COMMENT_NEEDED[body.verdict] });
  });
export type SignBody = z.output<typeof signSchema>;

/** Body of a return for changes: why the director sends the study back unsigned, and the version seen. */
export const returnSchema = z.object({
  reason: z.string().trim().min(1, 'Say what needs to change before you can sign.').max(2000),
  version: z.number().int().min(1),
});
export type ReturnBody = z.output<typeof returnSchema>;

/** Body of an amendment: why the signed study is reopened, and the version seen. */
export const amendSchema = z.object({
  reason: z.string().trim().min(1, 'Say why the signed study needs a new revision.').max(2000),
  version: z.number().int().min(1),
});
export type AmendBody = z.output<typeof amendSchema>;

/**
 * What a signature means, in the words shown to the signer before signing and stored with the signature.
 *
 * @example
 * signatureMeaning({ title: 'Kestrel against Heron', revision: 1 }, { id: run.id, inputsHash: run.inputsHash });
 * // 'By signing I confirm that I reviewed … revision 1 …'
 */
export function signatureMeaning(study: { title: string; revision: number }, run: { id: string; inputsHash: string }): string {
  return (
    `By signing I confirm that I reviewed the protocol, the paired results, the exclusions with their reasons and the analysis ` +
    `of the study "${study.title}" (revision ${study.revision}; analysis run ${run.id}, inputs ${run.inputsHash.slice(0, 16)}…), ` +
    `that the verdict and comment I give are my own professional judgement under local regulation and this laboratory's quality policy, ` +
    `and that this electronic signature binds me as my handwritten signature would.`
  );
}

const notInState = (label: string, from: string, current: StudyRow) =>
  new Problem(409, 'Not possible in this state', `"${label}" needs a study that is ${from.replace('_', ' ')}; this study is ${current.state.replace('_', ' ')}.`, undefined, {
    current: { state: current.state, version: current.version },
  });

async function lockStudy(tx: Tx, laboratoryId: string, studyId: string, expectedVersion: number) {
  const [current] = await tx.select().from(studies).where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId))).for('update');
  if (!current) throw notFound('study');
  if (current.version !== expectedVersion) {
    throw conflict('This study was changed by someone else; reload to see its state.', { current: { state: current.state, version: current.version } });
  }
  return current;
}

/** The analysis a sign-off can rest on: current for the data, with its bootstrap intervals done (409 otherwise). */
async function signableAnalysis(laboratoryId: string, studyId: string) {
  const { run, current, bootstrapDone } = await getCurrentAnalysis(laboratoryId, studyId);
  if (!run) throw new Problem(409, 'No analysis yet', 'Run the analysis before submitting the study for sign-off.');
  if (!current) throw new Problem(409, 'Analysis out of date', 'The data, exclusions or settings changed since the last analysis run; run the analysis again.');
  if (!bootstrapDone) throw new Problem(409, 'Analysis still running', 'The bootstrap confidence intervals are still being computed; wait until they are done.');
  return run;
}

async function labPeople(laboratoryId: string, role: Role) {
  return getDb()
    .select({ id: user.id, name: user.name, email: user.email })
    .from(memberships)
    .innerJoin(user, eq(user.id, memberships.userId))
    .where(and(eq(memberships.laboratoryId, laboratoryId), eq(memberships.role, role)))
    .orderBy(asc(user.name));
}

/** Sends one message per person; a failed message is recorded in outgoing_mail and reported, never undoes the change. */
async function notify(people: { email: string }[], content: Parameters<typeof sendMail>[1], laboratoryId: string) {
  const sent: string[] = [];
  const failed: string[] = [];
  for (const person of people) {
    try {
      await sendMail(person.email, content, laboratoryId);
      sent.push(person.email);
    } catch (error) {
      console.error(`sign-off mail to ${person.email} failed:`, error);
      failed.push(person.email);
    }
  }
  return { sent, failed };
}

export interface SignOffLab {
  id: string;
  slug: string;
  name: string;
}

const signPageUrl = (baseUrl: string, lab: SignOffLab, studyId: string) => `${baseUrl}/labs/${lab.slug}/studies/${studyId}/sign`;

/**
 * Submits a collecting study for sign-off: its analysis must be current with the bootstrap done, and the lab must
 * have a medical director. Audited with the analysis run and its inputs hash; each medical director is e-mailed a
 * link to the sign page.
 *
 * @example
 * const { study, notified } = await submitForSignOff({ id: user.id, name: user.name }, lab, studyId, 2, PUBLIC_BASE_URL);
 */
export async function submitForSignOff(actor: { id: string; name: string }, lab: SignOffLab, studyId: string | undefined, expectedVersion: number, baseUrl: string) {
  if (!isUuid(studyId)) throw notFound('study');
  const step = STUDY_TRANSITIONS.submit_for_sign_off;
  const directors = await labPeople(lab.id, 'medical_director');
  const study = await getDb().transaction(async (tx) => {
    const current = await lockStudy(tx, lab.id, studyId, expectedVersion);
    if (current.state !== step.from) throw notInState(step.label, step.from, current);
    if (directors.length === 0) throw new Problem(409, 'No one to sign', 'This laboratory has no medical director to sign the study; ask the administrator to add one.');
    const run = await signableAnalysis(lab.id, studyId);
    const [updated] = await tx.update(studies).set({ state: step.to, version: current.version + 1, updatedAt: new Date() }).where(eq(studies.id, studyId)).returning();
    await recordAudit(tx, {
      laboratoryId: lab.id,
      actorUserId: actor.id,
      action: step.audit,
      entityType: 'study',
      entityId: studyId,
      data: { from: step.from, to: step.to, analysisRunId: run.id, inputsHash: run.inputsHash, notified: directors.map((d) => d.id) },
    });
    return updated;
  });
  const mail = signOffRequestedMail({ laboratory: lab.name, study: study.title, submittedBy: actor.name, url: signPageUrl(baseUrl, lab, studyId) });
  const { sent, failed } = await notify(directors, mail, lab.id);
  return { study, notified: sent, mailFailed: failed };
}

/** Wrong passwords a person may give at signing within the window before signing is refused for the rest of it. */
export const SIGNATURE_PASSWORD_LIMIT = { attempts: 5, windowMs: 15 * 60_000 } as const;

const attemptKey = (userId: string) => `signature-password:${userId}`;

/**
 * Checks the password re-entered for a signature, counting wrong ones per person (in the shared rate-limit table,
 * so every app server sees the same count): 403 for a wrong password, 429 once the limit is reached.
 */
async function confirmSigner(userId: string, password: string) {
  const db = getDb();
  const now = Date.now();
  const [row] = await db.select().from(rateLimit).where(eq(rateLimit.key, attemptKey(userId)));
  const recent = row && now - row.lastRequest < SIGNATURE_PASSWORD_LIMIT.windowMs ? row.count : 0;
  if (recent >= SIGNATURE_PASSWORD_LIMIT.attempts) {
    throw new Problem(429, 'Too many wrong passwords', `Signing is paused for ${SIGNATURE_PASSWORD_LIMIT.windowMs / 60_000} minutes after ${SIGNATURE_PASSWORD_LIMIT.attempts} wrong passwords; nothing was signed.`);
  }
  if (await reauthenticate(userId, password)) {
    if (row) await db.delete(rateLimit).where(eq(rateLimit.key, attemptKey(userId)));
    return;
  }
  await db
    .insert(rateLimit)
    .values({ id: crypto.randomUUID(), key: attemptKey(userId), count: recent + 1, lastRequest: now })
    .onConflictDoUpdate({
      target: rateLimit.key,
      // Counted in the statement, so that wrong passwords sent at the same moment all count.
      set: { count: sql`case when ${now} - ${rateLimit.lastRequest} < ${SIGNATURE_PASSWORD_LIMIT.windowMs} then ${rateLimit.count} + 1 else 1 end`, lastRequest: now },
    });
  throw new Problem(403, 'Signature refused', 'The password is not right, so nothing was signed. Enter the password you sign in with.', [
    { field: 'password', message: 'The password is not right.' },
  ]);
}

/** The analysis run and inputs hash the study was submitted with (its latest submission). */
async function submittedRun(tx: Tx, laboratoryId: string, studyId: string) {
  const [event] = await tx
    .select({ data: auditEvents.data })
    .from(auditEvents)
    .where(and(eq(auditEvents.laboratoryId, laboratoryId), eq(auditEvents.entityType, 'study'), eq(auditEvents.entityId, studyId), eq(auditEvents.action, STUDY_TRANSITIONS.submit_for_sign_off.audit)))
    .orderBy(desc(auditEvents.id))
    .limit(1);
  return (event?.data ?? {}) as { analysisRunId?: string; inputsHash?: string };
}

/**
 * Signs a study in review. The password is checked again (403 when wrong, 429 after too many wrong ones; no
 * signature, state or audit event is written) and the analysis must be the one submitted and still current (409
 * otherwise). In one transaction the signature row (printed name, role, UTC time, meaning, verdict, comment,
 * analysis run and inputs hash) is written, the study becomes Signed with the verdict, and both are audited; then
 * the lab scientists are e-mailed.
 *
 * @example
 * await signStudy({ id: user.id, name: user.name, role: 'medical_director' }, lab, studyId, signSchema.parse(body), PUBLIC_BASE_URL);
 */
export async function signStudy(actor: { id: string; name: string; role: Role }, lab: SignOffLab, studyId: string | undefined, body: SignBody, baseUrl: string) {
  if (!isUuid(studyId)) throw notFound('study');
  const step = STUDY_TRANSITIONS.sign;
  await confirmSigner(actor.id, body.password);
  const signed = await getDb().transaction(async (tx) => {
    const current = await lockStudy(tx, lab.id, studyId, body.version);
    if (current.state !== step.from) throw notInState(step.label, step.from, current);
    const run = await signableAnalysis(lab.id, studyId);
    const submitted = await submittedRun(tx, lab.id, studyId);
    if (run.id !== body.analysisRunId || run.inputsHash !== submitted.inputsHash) {
      throw new Problem(409, 'Analysis changed', 'The analysis is not the one submitted for sign-off (it was run again or its inputs changed); reload and review the current analysis.', undefined, {
        current: { analysisRunId: run.id, inputsHash: run.inputsHash },
      });
    }
    const meaning = signatureMeaning(current, run);
    // The signature goes in first: once the study is signed, its trigger refuses any further signature.
    const [signature] = await tx
      .insert(signatures)
      .values({
        laboratoryId: lab.id,
        studyId,
        userId: actor.id,
        printedName: actor.name,
        role: actor.role,
        meaning,
        verdict: body.verdict,
        comment: body.comment || null,
        analysisRunId: run.id,
        inputsHash: run.inputsHash,
      })
      .returning();
    const [study] = await tx
      .update(studies)
      .set({ state: step.to, verdict: body.verdict, version: current.version + 1, updatedAt: new Date() })
      .where(eq(studies.id, studyId))
      .returning();
    await recordAudit(tx, {
      laboratoryId: lab.id,
      actorUserId: actor.id,
      action: step.audit,
      entityType: 'study',
      entityId: studyId,
      data: {
        from: step.from,
        to: step.to,
        signatureId: signature.id,
        printedName: actor.name,
        role: actor.role,
        verdict: body.verdict,
        comment: signature.comment,
        meaning,
        analysisRunId: run.id,
        inputsHash: run.inputsHash,
        signedAt: signature.signedAt.toISOString(),
      },
    });
    return { study, signature };
  });
  const scientists = await labPeople(lab.id, 'lab_scientist');
  const mail = studySignedMail({ laboratory: lab.name, study: signed.study.title, signer: actor.name, verdict: VERDICT_LABELS[body.verdict].word, url: signPageUrl(baseUrl, lab, studyId) });
  const { sent, failed } = await notify(scientists, mail, lab.id);
  return { ...signed, notified: sent, mailFailed: failed };
}

/**
 * Returns a study in review to Collecting without a signature, with the director's reason (audited); the lab
 * scientists are e-mailed. Its data and exclusions can change again, and it is submitted again after a new analysis.
 *
 * @example
 * await returnForChanges({ id: user.id, name: user.name }, lab, studyId, { reason: 'Add samples above 300 mg/dL', version: 3 }, PUBLIC_BASE_URL);
 */
export async function returnForChanges(actor: { id: string; name: string }, lab: SignOffLab, studyId: string | undefined, body: ReturnBody, baseUrl: string) {
  if (!isUuid(studyId)) throw notFound('study');
  const step = STUDY_TRANSITIONS.return_for_changes;
  const study = await getDb().transaction(async (tx) => {
    const current = await lockStudy(tx, lab.id, studyId, body.version);
    if (current.state !== step.from) throw notInState(step.label, step.from, current);
    const [updated] = await tx.update(studies).set({ state: step.to, version: current.version + 1, updatedAt: new Date() }).where(eq(studies.id, studyId)).returning();
    await recordAudit(tx, { laboratoryId: lab.id, actorUserId: actor.id, action: step.audit, entityType: 'study', entityId: studyId, data: { from: step.from, to: step.to, reason: body.reason } });
    return updated;
  });
  const scientists = await labPeople(lab.id, 'lab_scientist');
  const mail = studyReturnedMail({ laboratory: lab.name, study: study.title, returnedBy: actor.name, reason: body.reason, url: signPageUrl(baseUrl, lab, studyId) });
  const { sent, failed } = await notify(scientists, mail, lab.id);
  return { study, notified: sent, mailFailed: failed };
}

const COPY_BATCH = 1000;

async function insertInBatches<T>(rows: T[], insert: (batch: T[]) => Promise<unknown>) {
  for (let start = 0; start < rows.length; start += COPY_BATCH) await insert(rows.slice(start, start + COPY_BATCH));
}

/**
 * Amends a signed study: opens its next revision (revision + 1, linked to it) in Collecting with copies of its
 * samples, results, standing exclusions and technicians. The signed study stays locked; a study is amended once
 * (its successor is amended in turn). Audited on both studies.
 *
 * @example
 * const { study } = await amendStudy({ id: user.id }, lab.id, signedId, { reason: 'Two samples re-measured', version: 3 });
 */
export async function amendStudy(actor: { id: string }, laboratoryId: string, studyId: string | undefined, body: AmendBody) {
  if (!isUuid(studyId)) throw notFound('study');
  return getDb().transaction(async (tx) => {
    const signedStudy = await lockStudy(tx, laboratoryId, studyId, body.version);
    if (signedStudy.state !== 'signed') {
      throw new Problem(409, 'Not signed', `Only a signed study is amended; this study is ${signedStudy.state.replace('_', ' ')} and its data can still change.`);
    }
    const [successor] = await tx.select({ id: studies.id, revision: studies.revision }).from(studies).where(and(eq(studies.laboratoryId, laboratoryId), eq(studies.previousRevisionId, studyId)));
    if (successor) throw new Problem(409, 'Already amended', `This study was already amended: revision ${successor.revision} is its successor.`, undefined, { successor });

    const [study] = await tx
      .insert(studies)
      .values({
        laboratoryId,
        protocolVersionId: signedStudy.protocolVersionId,
        title: signedStudy.title,
        candidateProcedure: signedStudy.candidateProcedure,
        comparativeProcedure: signedStudy.comparativeProcedure,
        state: 'collecting',
        revision: signedStudy.revision + 1,
        previousRevisionId: signedStudy.id,
        createdBy: actor.id,
      })
      .returning();
    const assigned = await tx.select({ userId: studyAssignments.userId }).from(studyAssignments).where(eq(studyAssignments.studyId, studyId));
    if (assigned.length > 0) await tx.insert(studyAssignments).values(assigned.map((a) => ({ studyId: study.id, userId: a.userId })));

    const oldSamples = await tx.select().from(samples).where(eq(samples.studyId, studyId)).orderBy(asc(samples.position));
    const newSampleId = new Map(oldSamples.map((s) => [s.id, crypto.randomUUID()]));
    const copyOf = (sampleId: string) => newSampleId.get(sampleId) as string;
    await insertInBatches(oldSamples, (batch) =>
      tx.insert(samples).values(batch.map((s) => ({ id: copyOf(s.id), laboratoryId, studyId: study.id, code: s.code, position: s.position, flags: s.flags, flagNote: s.flagNote }))),
    );
    const oldResults = await tx.select().from(results).where(eq(results.studyId, studyId));
    await insertInBatches(oldResults, (batch) =>
      tx.insert(results).values(
        batch.map((r) => ({
          laboratoryId,
          studyId: study.id,
          sampleId: copyOf(r.sampleId),
          procedure: r.procedure,
          replicate: r.replicate,
          value: r.value,
          censored: r.censored,
          unit: r.unit,
          runDate: r.runDate,
          enteredBy: r.enteredBy,
        })),
      ),
    );
    const standing = await tx.select().from(exclusions).where(and(eq(exclusions.studyId, studyId), isNull(exclusions.revokedAt)));
    await insertInBatches(standing, (batch) =>
      tx.insert(exclusions).values(
        batch.map((e) => ({ laboratoryId, studyId: study.id, sampleId: copyOf(e.sampleId), reason: e.reason, excludedBy: e.excludedBy, excludedAt: e.excludedAt })),
      ),
    );

    const copied = { samples: oldSamples.length, results: oldResults.length, exclusions: standing.length };
    await recordAudit(tx, { laboratoryId, actorUserId: actor.id, action: 'study.amended', entityType: 'study', entityId: studyId, data: { successorId: study.id, revision: study.revision, reason: body.reason } });
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actor.id,
      action: 'study.revision_opened',
      entityType: 'study',
      entityId: study.id,
      data: { previousRevisionId: studyId, revision: study.revision, reason: body.reason, copied },
    });
    return { study, copied };
  });
}

/**
 * A study's signatures, oldest first (the signature manifest of the sign page, the report and the dossier).
 *
 * @example
 * const rows = await listSignatures(lab.id, study.id); // [{ printedName, role, verdict, comment, signedAt, … }]
 */
export async function listSignatures(laboratoryId: string, studyId: string) {
  return getDb()
    .select()
    .from(signatures)
    .where(and(eq(signatures.laboratoryId, laboratoryId), eq(signatures.studyId, studyId)))
    .orderBy(asc(signatures.signedAt));
}

/**
 * The revisions next to a study: the one it amends and the one that amends it (either may be null).
 *
 * @example
 * const { previous, next } = await revisionLinks(lab.id, study); // next: { id, revision, state } | null
 */
export async function revisionLinks(laboratoryId: string, study: { id: string; previousRevisionId: string | null }) {
  const columns = { id: studies.id, revision: studies.revision, state: studies.state };
  const db = getDb();
  const [next] = await db.select(columns).from(studies).where(and(eq(studies.laboratoryId, laboratoryId), eq(studies.previousRevisionId, study.id)));
  const [previous] = study.previousRevisionId
    ? await db.select(columns).from(studies).where(and(eq(studies.laboratoryId, laboratoryId), eq(studies.id, study.previousRevisionId)))
    : [];
  return { previous: previous ?? null, next: next ?? null };
}
