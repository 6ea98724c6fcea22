/**
 * Everything the report and the dossier say about one study, read from the database in one place: the study and
 * its laboratory, the pinned protocol version with its approver, the analysis run the report is about, the results
 * with their flags and exclusions, the signatures, and the study's audit events with the chain's status.
 * Dates travel as ISO strings taken from stored rows, never from the clock, so equal data gives equal reports.
 */
import { createHash } from 'node:crypto';
import { and, asc, desc, eq, inArray, isNull, or, sql } from 'drizzle-orm';
import { canonicalJson } from '../../lib/canonicalJson';
import type { ProtocolSettings } from '../../lib/protocolSchema';
import type { ComparisonAnalysis } from '../../lib/stats/analysis';
import { getCurrentAnalysis, type AnalysisRunRow, type StoredResults } from '../analysis';
import { analysisRuns, auditEvents, exclusions, laboratories, protocolVersions, protocols, results, samples, signatures, studies, user, type Role, type StudyState, type Verdict } from '../../db/schema';
import { verifyChain, type ChainReport } from '../audit';
import { getDb } from '../db';
import { notFound, Problem } from '../problem';
import { isUuid } from '../studies';

export interface ProcedureText {
  instrument?: string;
  reagentLot?: string;
  softwareVersion?: string;
}

export interface ReportResultRow {
  sampleCode: string;
  position: number;
  procedure: 'comparative' | 'candidate';
  replicate: number;
  value: number;
  censored: '<' | '>' | null;
  unit: string;
  runDate: string | null;
  flags: string[];
  flagNote: string | null;
  excluded: boolean;
  exclusionReason: string | null;
}

export interface ReportExclusion {
  sampleCode: string;
  reason: string;
  excludedBy: string;
  excludedAt: string;
}

export interface ReportSignature {
  printedName: string;
  role: Role;
  signedAt: string;
  meaning: string;
  verdict: Verdict;
  comment: string | null;
  inputsHash: string;
}

export interface ReportAuditEvent {
  id: number;
  occurredAt: string;
  action: string;
  entityType: string;
  entityId: string | null;
  actor: string | null;
  data: unknown;
  prevHash: string;
  hash: string;
}

export interface ReportData {
  laboratory: { name: string };
  study: {
    id: string;
    title: string;
    state: StudyState;
    verdict: Verdict | null;
    revision: number;
    candidate: ProcedureText;
    comparative: ProcedureText;
  };
  protocol: {
    title: string;
    versionId: string;
    versionNumber: number;
    settings: ProtocolSettings;
    approvedBy: string | null;
    approvedAt: string | null;
  };
  run: {
    id: string;
    inputsHash: string;
    engineVersion: string;
    createdAt: string;
    stale: boolean;
    settings: unknown;
    results: StoredResults;
  };
  summary: {
    samples: number;
    analysed: number;
    excluded: number;
    /** Samples the analysis could not use (a censored or missing result), with the note why. */
    leftOut: { code: string; note: string }[];
    censoredResults: number;
    comparativeRange: [number, number] | null;
    runDays: number;
    firstRunDate: string | null;
    lastRunDate: string | null;
  };
  results: ReportResultRow[];
  exclusions: ReportExclusion[];
  signatures: ReportSignature[];
  audit: {
    events: ReportAuditEvent[];
    counts: { action: string; count: number }[];
    /**
     * The laboratory's whole chain, checked when the data was read. Only its verdict is kept: the lab's event
     * count grows with unrelated work and would change a report whose study did not change.
     */
    chain: { intact: true } | { intact: false; brokenAt: { id: number; problem: string } };
    /** Hash of the study's latest event: what an inspector compares with the live chain. */
    lastStudyHash: string | null;
  };
}

/**
 * The analysis run a report is about: the run the study was signed on once it is signed, otherwise the latest run
 * while it is current; 409 when there is none or it no longer matches the study's data.
 *
 * @example
 * const run = await reportRun(lab.id, study.id);
 */
export async function reportRun(laboratoryId: string, studyId: string): Promise<AnalysisRunRow> {
  const [signed] = await getDb()
    .select({ run: analysisRuns })
    .from(signatures)
    .innerJoin(analysisRuns, eq(analysisRuns.id, signatures.analysisRunId))
    .where(and(eq(signatures.studyId, studyId), eq(signatures.laboratoryId, laboratoryId)))
    .orderBy(desc(signatures.signedAt))
    .limit(1);
  if (signed) return signed.run;
  const { run, current } = await getCurrentAnalysis(laboratoryId, studyId);
  if (!run) throw new Problem(409, 'No analysis yet', 'Run the analysis of this study first: the report and the dossier are made from its analysis run.');
  if (!current) throw new Problem(409, 'Analysis not current', 'The data changed since the last analysis run: run the analysis again before making the report.');
  return run;
}

/**
 * The study's audit events in chain order: events about the study itself, and those about its samples and results
 * (which name the study in their data).
 *
 * @example
 * const events = await studyAuditEvents(lab.id, study.id);
 */
export async function studyAuditEvents(laboratoryId: string, studyId: string): Promise<ReportAuditEvent[]> {
  const db = getDb();
  const rows = await db
    .select({ event: auditEvents, actor: user.name })
    .from(auditEvents)
    .leftJoin(user, eq(user.id, auditEvents.actorUserId))
    .where(
      and(
        eq(auditEvents.laboratoryId, laboratoryId),
        or(
          eq(auditEvents.entityId, studyId),
          sql`${auditEvents.data}->>'studyId' = ${studyId}`,
          inArray(auditEvents.entityId, db.select({ id: sql<string>`${samples.id}::text` }).from(samples).where(eq(samples.studyId, studyId))),
        ),
      ),
    )
    .orderBy(asc(auditEvents.id));
  return rows.map(({ event, actor }) => ({
    id: event.id,
    occurredAt: event.occurredAt.toISOString(),
    action: event.action,
    entityType: event.entityType,
    entityId: event.entityId,
    actor,
    data: event.data,
    prevHash: event.prevHash,
    hash: event.hash,
  }));
}

/**
 * Reads everything the report and dossier show for one study of the laboratory (404 for another lab's study).
 *
 * @example
 * const data = await loadReportData(lab.id, params.id);
 * data.run.inputsHash; // '3f…'
 */
export async function loadReportData(laboratoryId: string, studyId: string | undefined): Promise<ReportData> {
  if (!isUuid(studyId)) throw notFound('study');
  const db = getDb();
  const approver = db.select({ id: user.id, name: user.name }).from(user).as('approver');
  const [row] = await db
    .select({ study: studies, lab: laboratories.name, version: protocolVersions, protocolTitle: protocols.title, approverName: approver.name })
    .from(studies)
    .innerJoin(laboratories, eq(laboratories.id, studies.laboratoryId))
    .innerJoin(protocolVersions, eq(protocolVersions.id, studies.protocolVersionId))
    .innerJoin(protocols, eq(protocols.id, protocolVersions.protocolId))
    .leftJoin(approver, eq(approver.id, protocolVersions.approvedBy))
    .where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId)));
  if (!row) throw notFound('study');
  const run = await reportRun(laboratoryId, studyId);

  const sampleRows = await db.select().from(samples).where(eq(samples.studyId, studyId)).orderBy(asc(samples.position));
  const resultRows = await db.select().from(results).where(eq(results.studyId, studyId));
  const exclusionRows = await db
    .select({ exclusion: exclusions, by: user.name })
    .from(exclusions)
    .innerJoin(user, eq(user.id, exclusions.excludedBy))
    .where(and(eq(exclusions.studyId, studyId), isNull(exclusions.revokedAt)))
    .orderBy(asc(exclusions.excludedAt));
  const signatureRows = await db
    .select()
    .from(signatures)
    .where(and(eq(signatures.studyId, studyId), eq(signatures.laboratoryId, laboratoryId)))
    .orderBy(asc(signatures.signedAt));

  const sampleById = new Map(sampleRows.map((s) => [s.id, s]));
  const exclusionBySample = new Map(exclusionRows.map((e) => [e.exclusion.sampleId, e.exclusion]));
  const procedureOrder = { comparative: 0, candidate: 1 } as const;
  const reportResults: ReportResultRow[] = resultRows
    .map((r) => {
      const sample = sampleById.get(r.sampleId);
      if (!sample) throw new Error(`result ${r.id} names a sample outside its study`);
      const exclusion = exclusionBySample.get(sample.id);
      return {
        sampleCode: sample.code,
        position: sample.position,
        procedure: r.procedure,
        replicate: r.replicate,
        value: r.value,
        censored: r.censored,
        unit: r.unit,
        runDate: r.runDate,
        flags: sample.flags,
        flagNote: sample.flagNote,
        excluded: !!exclusion,
        exclusionReason: exclusion?.reason ?? null,
      };
    })
    .sort((a, b) => a.position - b.position || procedureOrder[a.procedure] - procedureOrder[b.procedure] || a.replicate - b.replicate);

  const stored = run.results as StoredResults;
  const analysis: ComparisonAnalysis = stored.analysis;
  const runDates = [...new Set(resultRows.map((r) => r.runDate).filter((d): d is string => !!d))].sort();
  const events = await studyAuditEvents(laboratoryId, studyId);
  const counts = new Map<string, number>();
  for (const event of events) counts.set(event.action, (counts.get(event.action) ?? 0) + 1);

  return {
    laboratory: { name: row.lab },
    study: {
      id: row.study.id,
      title: row.study.title,
      state: row.study.state,
      verdict: row.study.verdict,
      revision: row.study.revision,
      candidate: row.study.candidateProcedure as ProcedureText,
      comparative: row.study.comparativeProcedure as ProcedureText,
    },
    protocol: {
      title: row.protocolTitle,
      versionId: row.version.id,
      versionNumber: row.version.versionNumber,
      settings: row.version.settings as ProtocolSettings,
      approvedBy: row.approverName,
      approvedAt: row.version.approvedAt?.toISOString() ?? null,
    },
    run: {
      id: run.id,
      inputsHash: run.inputsHash,
      engineVersion: run.engineVersion,
      createdAt: run.createdAt.toISOString(),
      stale: run.stale,
      settings: run.settings,
      results: stored,
    },
    summary: {
      samples: sampleRows.length,
      analysed: analysis.n,
      excluded: stored.inputs.excluded.length,
      leftOut: stored.inputs.leftOut.map(({ code, note }) => ({ code, note })),
      censoredResults: resultRows.filter((r) => r.censored).length,
      comparativeRange: analysis.n > 0 ? [Math.min(...analysis.comparative), Math.max(...analysis.comparative)] : null,
      runDays: runDates.length,
      firstRunDate: runDates[0] ?? null,
      lastRunDate: runDates.at(-1) ?? null,
    },
    results: reportResults,
    exclusions: exclusionRows.map(({ exclusion, by }) => ({
      sampleCode: sampleById.get(exclusion.sampleId)?.code ?? exclusion.sampleId,
      reason: exclusion.reason,
      excludedBy: by,
      excludedAt: exclusion.excludedAt.toISOString(),
    })),
    signatures: signatureRows.map((s) => ({
      printedName: s.printedName,
      role: s.role,
      signedAt: s.signedAt.toISOString(),
      meaning: s.meaning,
      verdict: s.verdict,
      comment: s.comment,
      inputsHash: s.inputsHash,
    })),
    audit: {
      events,
      counts: [...counts].map(([action, count]) => ({ action, count })).sort((a, b) => a.action.localeCompare(b.action)),
      chain: chainVerdict(await verifyChain(db, laboratoryId)),
      lastStudyHash: events.at(-1)?.hash ?? null,
    },
  };
}

function chainVerdict(report: ChainReport): ReportData['audit']['chain'] {
  return report.intact ? { intact: true } : { intact: false, brokenAt: report.brokenAt };
}

/**
 * sha256 of the report's data in canonical JSON: equal keys mean equal report content, so a stored report is
 * reused only while nothing it shows has changed.
 *
 * @example
 * reportKey(data); // '9c0e…' (64 hex digits)
 */
export function reportKey(data: ReportData): string {
  return createHash('sha256').update(canonicalJson(data)).digest('hex');
}
