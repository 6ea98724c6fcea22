/**
 * Analysis runs: the statistics engine run on a study's included samples with its protocol's settings, stored
 * with the sha256 of the canonical inputs (data, exclusions, settings, engine version) so that a run is reused
 * while nothing changed and is marked stale once something does. The quick part (every fit, diagnostics,
 * Bland–Altman, cautions, closed-form CIs) is computed at once; the bootstrap CIs run as a queued job
 * (analysisJobs.ts). Exclusions of samples are audited with their reason and reversible until sign-off.
 */
import { and, asc, desc, eq, isNull, ne, sql } from 'drizzle-orm';
import { getDb } from './db';
import { analysisRuns, auditEvents, exclusions, protocolVersions, results, samples, studies, user, type StudyState } from '../db/schema';
import { recordAudit } from './audit';
import { enqueueJob, getJob, type JobRow } from './jobs';
import { invalid, notFound, Problem } from './problem';
import { sha256 } from './laboratories';
import { getStudy, isUuid } from './studies';
import { canonicalJson } from '../lib/canonicalJson';
import type { ProtocolSettings } from '../lib/protocolSchema';
import {
  ALL_METHODS,
  DEFAULT_METHODS,
  ENGINE_VERSION,
  StatsInputError,
  analyzeComparison,
  analyzeComparisonInSteps,
  type AllowableLimit,
  type AnalysisProgress,
  type ComparisonAnalysis,
  type ComparisonInput,
  type MethodKey,
} from '../lib/stats/index';

/** The kind of the queued job that computes the bootstrap CIs of a run. */
export const BOOTSTRAP_JOB_KIND = 'analysis-bootstrap';

/** One analysed sample: averaged values and, with duplicates, both replicates (they feed λ). */
export interface IncludedSample {
  sampleId: string;
  code: string;
  comparative: number;
  candidate: number;
  replicates?: { comparative: [number, number]; candidate: [number, number] };
}

/** The protocol settings an analysis depends on. */
export interface AnalysisSettings {
  methods: MethodKey[];
  primary: MethodKey;
  decisionLevels: { value: number; meaning: string; allowableBias: AllowableLimit & { source: string } }[];
  robust: ProtocolSettings['robust'];
  demingLambda: ProtocolSettings['demingLambda'];
  outlierPolicy: ProtocolSettings['outlierPolicy'];
  bootstrap: { resamples: number; seed: number; method: 'bca' };
  plan: { plannedCount: number; measuringInterval: [number, number]; targetShares?: [number, number, number] };
  units: string;
}

/** One stored result as the inputs hash sees it. */
export interface RawResult {
  procedure: 'comparative' | 'candidate';
  replicate: number;
  value: number;
  censored: '<' | '>' | null;
}

/** Everything an analysis is computed from; its canonical JSON is what the inputs hash covers. */
export interface StudyInputs {
  engineVersion: string;
  studyId: string;
  included: IncludedSample[];
  /** Excluded samples with their reasons and their results, so that the hash covers their values too. */
  excluded: { sampleId: string; code: string; reason: string; results: RawResult[] }[];
  /** Samples the analysis cannot use (a censored or missing result), each with the automatic note and its results. */
  leftOut: { sampleId: string; code: string; note: string; results: RawResult[] }[];
  settings: AnalysisSettings;
}

/** What a run stores as its results: the engine's analysis, the inputs it came from, the bootstrap's state. */
export interface StoredResults {
  analysis: ComparisonAnalysis;
  inputs: StudyInputs;
  bootstrap: { status: 'pending' | 'done' | 'failed'; jobId: string | null; resamples: number; error?: string };
}

export type AnalysisRunRow = typeof analysisRuns.$inferSelect;

const average = (values: number[]) => values.reduce((sum, v) => sum + v, 0) / values.length;

/**
 * The methods a study runs: the engine's default set, plus the protocol's primary estimator when it is not in it,
 * in the engine's reporting order.
 *
 * @example
 * methodsFor('weightedDeming'); // ['ols', 'deming', 'weightedDeming', 'passingBablok', 'huber', 'tukey', 'hampel', 'mm']
 */
export function methodsFor(primary: MethodKey): MethodKey[] {
  return ALL_METHODS.filter((m) => DEFAULT_METHODS.includes(m) || m === primary);
}

function settingsOf(settings: ProtocolSettings): AnalysisSettings {
  const parts = settings.samplePlan.intervalParts;
  const shares = parts.length === 3 ? (parts.map((p) => p.share) as [number, number, number]) : undefined;
  return {
    methods: methodsFor(settings.primaryEstimator.method),
    primary: settings.primaryEstimator.method,
    decisionLevels: settings.decisionLevels.map((level) => ({
      value: level.value,
      meaning: level.meaning,
      allowableBias: { ...level.allowableBias },
    })),
    robust: settings.robust,
    demingLambda: settings.demingLambda,
    outlierPolicy: settings.outlierPolicy,
    bootstrap: { resamples: settings.bootstrap.resamples, seed: settings.bootstrap.seed, method: 'bca' },
    plan: {
      plannedCount: settings.samplePlan.count,
      measuringInterval: [settings.analyte.measuringInterval.low, settings.analyte.measuringInterval.high],
      ...(shares ? { targetShares: shares } : {}),
    },
    units: settings.analyte.units,
  };
}

/**
 * The canonical inputs of a study's analysis: included pairs (replicates averaged per procedure; both duplicates
 * kept when there are exactly two of each, for λ), excluded samples with their reasons, samples left out because
 * a result is censored ("<5", ">600") or missing, the protocol settings and the engine version.
 *
 * @example
 * const inputs = await studyInputs(lab.id, studyId);
 * inputs.included.length; // samples the engine will see
 */
export async function studyInputs(laboratoryId: string, studyId: string): Promise<StudyInputs> {
  const { study, settings } = await getStudy(laboratoryId, studyId);
  return inputsOf(getDb(), laboratoryId, study.id, settings);
}

type Reader = ReturnType<typeof getDb> | Parameters<Parameters<ReturnType<typeof getDb>['transaction']>[0]>[0];

/** studyInputs of a study already found, read through `db` (a transaction's snapshot, or the pool). */
async function inputsOf(db: Reader, laboratoryId: string, studyId: string, settings: ProtocolSettings): Promise<StudyInputs> {
  const sampleRows = await db
    .select({ id: samples.id, code: samples.code })
    .from(samples)
    .where(and(eq(samples.laboratoryId, laboratoryId), eq(samples.studyId, studyId)))
    .orderBy(asc(samples.position), asc(samples.code));
  const resultRows = await db
    .select({ sampleId: results.sampleId, procedure: results.procedure, replicate: results.replicate, value: results.value, censored: results.censored })
    .from(results)
    .where(and(eq(results.laboratoryId, laboratoryId), eq(results.studyId, studyId)))
    .orderBy(asc(results.replicate));
  const standing = await db
    .select({ sampleId: exclusions.sampleId, reason: exclusions.reason })
    .from(exclusions)
    .where(and(eq(exclusions.laboratoryId, laboratoryId), eq(exclusions.studyId, studyId), isNull(exclusions.revokedAt)));
  const reasonOf = new Map(standing.map((e) => [e.sampleId, e.reason]));

  const inputs: StudyInputs = { engineVersion: ENGINE_VERSION, studyId, included: [], excluded: [], leftOut: [], settings: settingsOf(settings) };
  for (const sample of sampleRows) {
    const own = resultRows.filter((r) => r.sampleId === sample.id);
    const raw: RawResult[] = own.map(({ procedure, replicate, value, censored }) => ({ procedure, replicate, value, censored }));
    const reason = reasonOf.get(sample.id);
    if (reason !== undefined) {
      inputs.excluded.push({ sampleId: sample.id, code: sample.code, reason, results: raw });
      continue;
    }
    const censored = own.filter((r) => r.censored !== null);
    if (censored.length > 0) {
      const shown = censored.map((r) => `${r.procedure} replicate ${r.replicate} reported as ${r.censored}${r.value}`).join('; ');
      inputs.leftOut.push({ sampleId: sample.id, code: sample.code, note: `Left out of the regression: ${shown} (a value beyond a limit is not a number to fit).`, results: raw });
      continue;
    }
    const comparative = own.filter((r) => r.procedure === 'comparative').map((r) => r.value);
    const candidate = own.filter((r) => r.procedure === 'candidate').map((r) => r.value);
    if (comparative.length === 0 || candidate.length === 0) {
      const missing = comparative.length === 0 ? 'comparative' : 'candidate';
      inputs.leftOut.push({ sampleId: sample.id, code: sample.code, note: `Left out of the regression: no ${missing} result yet.`, results: raw });
      continue;
    }
    const entry: IncludedSample = { sampleId: sample.id, code: sample.code, comparative: average(comparative), candidate: average(candidate) };
    if (comparative.length === 2 && candidate.length === 2) {
      entry.replicates = { comparative: [comparative[0], comparative[1]], candidate: [candidate[0], candidate[1]] };
    }
    inputs.included.push(entry);
  }
  return inputs;
}

async function isSigned(studyId: string): Promise<boolean> {
  const [row] = await getDb().select({ state: studies.state }).from(studies).where(eq(studies.id, studyId));
  return row?.state === 'signed';
}

/**
 * sha256 (hex) of the canonical JSON of the inputs: equal inputs give equal hashes.
 *
 * @example
 * inputsHashOf(await studyInputs(lab.id, studyId)); // '3f1c…' (64 hex digits)
 */
export function inputsHashOf(inputs: StudyInputs): string {
  return sha256(canonicalJson(inputs));
}

/** A small least-recently-used map: a Map keeps insertion order, so the first key is the oldest. */
class Recent<V> {
  private readonly entries = new Map<string, V>();
  constructor(private readonly capacity: number) {}
  get(key: string): V | undefined {
    const value = this.entries.get(key);
    if (value !== undefined) {
      this.entries.delete(key);
      this.entries.set(key, value);
    }
    return value;
  }
  set(key: string, value: V): void {
    this.entries.delete(key);
    this.entries.set(key, value);
    if (this.entries.size > this.capacity) this.entries.delete(this.entries.keys().next().value!);
  }
}

/**
 * Inputs hash by data fingerprint. The fingerprint is an md5 over every column studyInputs reads (samples, results,
 * standing exclusions, the protocol version's settings), computed by the database on each call, so a change made
 * through any server (or straight in the database) gives a new key at once; the hash is a pure function of it.
 */
const inputsHashByFingerprint = new Recent<string>(2000);

/** A run's columns other than its results. */
const runHeadColumns = {
  id: analysisRuns.id,
  inputsHash: analysisRuns.inputsHash,
  engineVersion: analysisRuns.engineVersion,
  createdAt: analysisRuns.createdAt,
  stale: analysisRuns.stale,
  // PostgreSQL gives every new version of a row a new xmin, so (id, xmin) names one content of the row.
  rowVersion: sql<string>`${analysisRuns}.xmin::text`.as('row_version'),
};

/**
 * The study (scoped by laboratory) with the fingerprint of the data its canonical inputs are built from.
 * Each part is aggregated in a fixed order (by id) as JSON, so that no two different contents give the same text.
 */
async function studyFingerprint(db: Reader, laboratoryId: string, studyId: string) {
  if (!isUuid(studyId)) throw notFound('study');
  const latestRun = db
    .select(runHeadColumns)
    .from(analysisRuns)
    .where(and(eq(analysisRuns.laboratoryId, studies.laboratoryId), eq(analysisRuns.studyId, studies.id)))
    .orderBy(desc(analysisRuns.createdAt))
    .limit(1)
    .as('latest_run');
  const [row] = await db
    .select({
      id: studies.id,
      title: studies.title,
      state: studies.state,
      settings: protocolVersions.settings,
      fingerprint: sql<string>`md5(json_build_array(
        ${studies.protocolVersionId},
        ${protocolVersions.settings},
        (select json_agg(json_build_array(m.id, m.code, m.position) order by m.id)
           from ${samples} m where m.laboratory_id = ${studies.laboratoryId} and m.study_id = ${studies.id}),
        (select json_agg(json_build_array(r.id, r.sample_id, r.procedure, r.replicate, r.value, r.censored) order by r.id)
           from ${results} r where r.laboratory_id = ${studies.laboratoryId} and r.study_id = ${studies.id}),
        (select json_agg(json_build_array(e.id, e.sample_id, e.reason) order by e.id)
           from ${exclusions} e where e.laboratory_id = ${studies.laboratoryId} and e.study_id = ${studies.id} and e.revoked_at is null)
      )::text)`,
      latestRun: {
        id: latestRun.id,
        inputsHash: latestRun.inputsHash,
        engineVersion: latestRun.engineVersion,
        createdAt: latestRun.createdAt,
        stale: latestRun.stale,
        rowVersion: latestRun.rowVersion,
      },
    })
    .from(studies)
    .innerJoin(protocolVersions, eq(protocolVersions.id, studies.protocolVersionId))
    .leftJoinLateral(latestRun, sql`true`)
    .where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId)));
  if (!row) throw notFound('study');
  return { ...row, settings: row.settings as ProtocolSettings };
}

/**
 * The study, the hash of its current canonical inputs (inputsHashOf(studyInputs(…))), rebuilt only when the
 * study's data fingerprint is one not seen before, and its latest run without the results column.
 */
async function currentInputsHash(laboratoryId: string, studyId: string) {
  const found = await studyFingerprint(getDb(), laboratoryId, studyId);
  const study = { id: found.id, title: found.title, state: found.state };
  const known = inputsHashByFingerprint.get(fingerprintKey(found));
  if (known !== undefined) return { study, inputsHash: known, latestRun: found.latestRun };
  // Fingerprint and inputs from one snapshot, so that the fingerprint stored describes exactly the data hashed.
  const inputsHash = await getDb().transaction(
    async (tx) => {
      const snapshot = await studyFingerprint(tx, laboratoryId, studyId);
      const hash = inputsHashOf(await inputsOf(tx, laboratoryId, snapshot.id, snapshot.settings));
      inputsHashByFingerprint.set(fingerprintKey(snapshot), hash);
      return hash;
    },
    { isolationLevel: 'repeatable read', accessMode: 'read only' },
  );
  return { study, inputsHash, latestRun: found.latestRun };
}

const fingerprintKey = (found: { id: string; fingerprint: string }) => `${ENGINE_VERSION}:${found.id}:${found.fingerprint}`;

/**
 * The engine's input for a study: λ given, or from the duplicates when the protocol says so and every analysed
 * sample has two of each (otherwise λ = 1, the engine's default); one allowable limit per decision level.
 * `bootstrap: false` leaves out the bootstrap CIs (the quick part of a run).
 *
 * @example
 * analyzeComparison(engineInput(inputs, true));
 */
export function engineInput(inputs: StudyInputs, withBootstrap: boolean): ComparisonInput {
  const { included, settings } = inputs;
  const useDuplicates = settings.demingLambda.mode === 'duplicates' && included.length > 0 && included.every((s) => s.replicates);
  return {
    sampleIds: included.map((s) => s.code),
    comparative: included.map((s) => s.comparative),
    candidate: included.map((s) => s.candidate),
    ...(useDuplicates
      ? { replicates: { comparative: included.map((s) => s.replicates!.comparative), candidate: included.map((s) => s.replicates!.candidate) } }
      : {}),
    ...(settings.demingLambda.mode === 'given' ? { lambda: settings.demingLambda.value } : {}),
    methods: settings.methods,
    primary: settings.primary,
    decisionLevels: settings.decisionLevels.map((l) => l.value),
    allowable: settings.decisionLevels.map(({ allowableBias: { rule, absolute, percent } }) => ({ rule, absolute, percent })),
    seed: settings.bootstrap.seed,
    bootstrap: withBootstrap ? { resamples: settings.bootstrap.resamples, method: settings.bootstrap.method } : false,
    plan: settings.plan,
    excludedCount: inputs.excluded.length,
    // The protocol's start applies to its own ψ when that is redescending; Huber always starts from OLS (convex ρ).
    robust: { tuning: { [settings.robust.psi]: settings.robust.tuning }, start: settings.robust.psi === 'huber' ? undefined : settings.robust.start },
    outliers: { alpha: settings.outlierPolicy.esdAlpha, maxShare: settings.outlierPolicy.maxShare },
  };
}

function checkEnoughPairs(inputs: StudyInputs): void {
  if (inputs.included.length < 3) {
    throw new Problem(409, 'Not enough data', `An analysis needs at least 3 complete pairs; this study has ${inputs.included.length}.`);
  }
}

/** The engine's refusal of the data as a 409 for the page; anything else unchanged. */
function asProblem(error: unknown): unknown {
  return error instanceof StatsInputError ? new Problem(409, 'Cannot analyse these data', error.message) : error;
}

function analyse(inputs: StudyInputs, withBootstrap: boolean): ComparisonAnalysis {
  checkEnoughPairs(inputs);
  try {
    return analyzeComparison(engineInput(inputs, withBootstrap));
  } catch (error) {
    throw asProblem(error);
  }
}

/**
 * The bootstrap part of a run, computed by the queued job: the full analysis from the run's own inputs, with the
 * seeded bootstrap CIs (Efron 1987) of Passing–Bablok and the robust fits. Each fit's bootstrap is one step:
 * `onProgress` hears of it before it runs, and the event loop gets a turn between steps, so that a server computing
 * this still answers its other requests.
 *
 * @example
 * const analysis = await completeAnalysis(inputs, async ({ done, total }) => progress(done / total));
 */
export async function completeAnalysis(
  inputs: StudyInputs,
  onProgress: (step: AnalysisProgress) => Promise<void> = async () => {},
): Promise<ComparisonAnalysis> {
  checkEnoughPairs(inputs);
  try {
    const steps = analyzeComparisonInSteps(engineInput(inputs, true));
    for (;;) {
      const step = steps.next();
      if (step.done) return step.value;
      await onProgress(step.value);
      await new Promise((resolve) => setImmediate(resolve));
    }
  } catch (error) {
    throw asProblem(error);
  }
}

async function latestRun(laboratoryId: string, studyId: string): Promise<AnalysisRunRow | undefined> {
  const [row] = await getDb()
    .select()
    .from(analysisRuns)
    .where(and(eq(analysisRuns.laboratoryId, laboratoryId), eq(analysisRuns.studyId, studyId)))
    .orderBy(desc(analysisRuns.createdAt))
    .limit(1);
  return row;
}

/**
 * Runs the analysis of a study and stores it, or returns the latest run unchanged while its inputs hash is that
 * of the study's current inputs. A new run holds the quick part at once and queues the bootstrap CIs
 * (job kind 'analysis-bootstrap'); older runs are marked stale. Audited as 'analysis.run'.
 *
 * @example
 * const { run, reused } = await runAnalysis({ id: user.id }, lab.id, studyId);
 */
export async function runAnalysis(actor: { id: string }, laboratoryId: string, studyId: string): Promise<{ run: AnalysisRunRow; reused: boolean }> {
  const inputs = await studyInputs(laboratoryId, studyId);
  if (await isSigned(inputs.studyId)) {
    throw new Problem(409, 'Study locked', 'This study is signed and locked; its analysis stays as it was signed. Open an amendment to analyse again.');
  }
  const inputsHash = inputsHashOf(inputs);
  const latest = await latestRun(laboratoryId, inputs.studyId);
  if (latest && latest.inputsHash === inputsHash) return reuseRun(actor, latest);
  const analysis = analyse(inputs, false);
  const stored: StoredResults = { analysis, inputs, bootstrap: { status: 'pending', jobId: null, resamples: inputs.settings.bootstrap.resamples } };
  const outcome = await getDb().transaction(async (tx) => {
    // One run at a time per study, so that two requests with the same new inputs store one run.
    await tx.execute(sql`select pg_advisory_xact_lock(hashtext(${`analysis:${inputs.studyId}`}))`);
    const [newest] = await tx
      .select()
      .from(analysisRuns)
      .where(and(eq(analysisRuns.laboratoryId, laboratoryId), eq(analysisRuns.studyId, inputs.studyId)))
      .orderBy(desc(analysisRuns.createdAt))
      .limit(1);
    if (newest && newest.inputsHash === inputsHash) return { run: newest, created: false };
    await tx
      .update(analysisRuns)
      .set({ stale: true })
      .where(and(eq(analysisRuns.laboratoryId, laboratoryId), eq(analysisRuns.studyId, inputs.studyId), ne(analysisRuns.inputsHash, inputsHash)));
    const [row] = await tx
      .insert(analysisRuns)
      .values({ laboratoryId, studyId: inputs.studyId, inputsHash, engineVersion: ENGINE_VERSION, settings: inputs.settings, results: stored, createdBy: actor.id })
      .returning();
    await recordAudit(tx, {
      laboratoryId,
      actorUserId: actor.id,
      action: 'analysis.run',
      entityType: 'study',
      entityId: inputs.studyId,
      data: {
        analysisRunId: row.id,
        inputsHash,
        engineVersion: ENGINE_VERSION,
        included: inputs.included.length,
        excluded: inputs.excluded.map((e) => e.code),
        leftOut: inputs.leftOut.map((e) => e.code),
        primary: inputs.settings.primary,
      },
    });
    return { run: row, created: true };
  });
  if (!outcome.created) return reuseRun(actor, outcome.run);
  return { run: { ...outcome.run, results: await queueBootstrap(actor, outcome.run, stored) }, reused: false };
}

/** A run whose inputs are the study's current ones: current again, and its bootstrap queued again if it failed. */
async function reuseRun(actor: { id: string }, run: AnalysisRunRow): Promise<{ run: AnalysisRunRow; reused: boolean }> {
  if (run.stale) await getDb().update(analysisRuns).set({ stale: false }).where(eq(analysisRuns.id, run.id));
  const stored = run.results as StoredResults;
  if (stored.bootstrap.status !== 'failed') return { run: { ...run, stale: false }, reused: true };
  const pending: StoredResults = { ...stored, bootstrap: { status: 'pending', jobId: null, resamples: stored.bootstrap.resamples } };
  await setRunResults(run.id, pending);
  return { run: { ...run, stale: false, results: await queueBootstrap(actor, run, pending) }, reused: true };
}

async function queueBootstrap(actor: { id: string }, run: AnalysisRunRow, stored: StoredResults): Promise<StoredResults> {
  const job = await enqueueJob({ laboratoryId: run.laboratoryId, studyId: run.studyId, kind: BOOTSTRAP_JOB_KIND, payload: { runId: run.id }, createdBy: actor.id });
  const withJob: StoredResults = { ...stored, bootstrap: { ...stored.bootstrap, jobId: job.id } };
  await setRunResults(run.id, withJob, true);
  return withJob;
}

/**
 * Replaces a run's stored results. `onlyWhilePending` keeps a finished bootstrap from being overwritten by the
 * job id written just after the run was queued (the job may finish first).
 *
 * @example
 * await setRunResults(run.id, { ...stored, analysis, bootstrap: { ...stored.bootstrap, status: 'done' } });
 */
export async function setRunResults(runId: string, next: StoredResults, onlyWhilePending = false): Promise<void> {
  const db = getDb();
  await db.transaction(async (tx) => {
    const [row] = await tx.select({ results: analysisRuns.results }).from(analysisRuns).where(eq(analysisRuns.id, runId)).for('update');
    if (!row) return;
    const current = row.results as StoredResults;
    if (onlyWhilePending && current.bootstrap.status !== 'pending') {
      await tx.update(analysisRuns).set({ results: { ...current, bootstrap: { ...current.bootstrap, jobId: next.bootstrap.jobId } } }).where(eq(analysisRuns.id, runId));
      return;
    }
    await tx.update(analysisRuns).set({ results: next }).where(eq(analysisRuns.id, runId));
  });
}

/**
 * A run by id, for the bootstrap job (which checks the laboratory itself).
 *
 * @example
 * const run = await getRun(payload.runId);
 */
export async function getRun(runId: string): Promise<AnalysisRunRow | undefined> {
  const [row] = await getDb().select().from(analysisRuns).where(eq(analysisRuns.id, runId));
  return row;
}

/**
 * The latest run of a study and whether it is current (its inputs hash is that of the study's current data,
 * exclusions, settings and engine version); a run that is no longer current is marked stale.
 *
 * @example
 * const { run, current, bootstrapDone } = await getCurrentAnalysis(lab.id, studyId);
 */
export async function getCurrentAnalysis(laboratoryId: string, studyId: string): Promise<{ run: AnalysisRunRow | null; current: boolean; bootstrapDone: boolean }> {
  const { study, inputsHash } = await currentInputsHash(laboratoryId, studyId);
  const run = await latestRun(laboratoryId, study.id);
  if (!run) return { run: null, current: false, bootstrapDone: false };
  const current = await markStaleUnlessCurrent(run, inputsHash, study.state);
  return { run, current, bootstrapDone: (run.results as StoredResults).bootstrap.status === 'done' };
}

/** Whether the run is current; one that is not is marked stale (a signed study's run stays as it was signed). */
async function markStaleUnlessCurrent(run: { id: string; inputsHash: string; stale: boolean }, inputsHash: string, state: StudyState): Promise<boolean> {
  const current = run.inputsHash === inputsHash;
  if (!current && !run.stale && state !== 'signed') {
    await getDb().update(analysisRuns).set({ stale: true }).where(eq(analysisRuns.id, run.id));
    run.stale = true;
  }
  return current;
}


/**
 * Stored results by (run id, row version), each with its JSON as UTF-8: a read of an unchanged run parses,
 * serializes and encodes nothing. Few entries, since a large study's parsed results take megabytes.
 */
const resultsByRowVersion = new Recent<StoredResults>(8);
const resultsJson = new WeakMap<StoredResults, Buffer>();

type RunHead = { id: string; inputsHash: string; engineVersion: string; createdAt: Date; stale: boolean; rowVersion: string };

/** The results of a run whose head was read: from the cache or, when that row version is new, with the row again. */
async function withCachedResults(head: RunHead) {
  const known = resultsByRowVersion.get(`${head.id}:${head.rowVersion}`);
  if (known) return { ...head, results: known };
  // Head and results from one read, in case the row changed since the head was read.
  const [row] = await getDb().select({ ...runHeadColumns, results: analysisRuns.results }).from(analysisRuns).where(eq(analysisRuns.id, head.id));
  if (!row) return undefined;
  const stored = row.results as StoredResults;
  resultsJson.set(stored, Buffer.from(JSON.stringify(stored)));
  resultsByRowVersion.set(`${row.id}:${row.rowVersion}`, stored);
  return { ...row, results: stored };
}

/**
 * What the workspace shows: the latest run with its state, the bootstrap job's progress while it runs, and the
 * study's samples left out or excluded now. Currency as in getCurrentAnalysis.
 *
 * @example
 * const view = await analysisView(lab.id, studyId);
 */
export async function analysisView(laboratoryId: string, studyId: string) {
  const { study, inputsHash, latestRun: head } = await currentInputsHash(laboratoryId, studyId);
  const run = head ? await withCachedResults(head) : undefined;
  const current = run ? await markStaleUnlessCurrent(run, inputsHash, study.state) : false;
  let job: Pick<JobRow, 'id' | 'status' | 'progress' | 'message' | 'error'> | null = null;
  const jobId = run ? run.results.bootstrap.jobId : null;
  if (jobId) {
    const row = await getJob(laboratoryId, jobId);
    job = { id: row.id, status: row.status, progress: row.progress, message: row.message, error: row.error };
  }
  return {
    study,
    run: run ? { id: run.id, inputsHash: run.inputsHash, engineVersion: run.engineVersion, createdAt: run.createdAt, stale: run.stale, results: run.results } : null,
    current,
    bootstrapDone: run ? run.results.bootstrap.status === 'done' : false,
    job,
  };
}

/**
 * JSON.stringify(view) as UTF-8, with the run's results taken from their cached bytes when there are some.
 *
 * @example
 * jsonText(analysisViewJson(await analysisView(lab.id, studyId)));
 */
export function analysisViewJson(view: Awaited<ReturnType<typeof analysisView>>): Buffer<ArrayBuffer> {
  if (!view.run) return Buffer.from(JSON.stringify(view));
  const { results: stored, ...head } = view.run;
  const resultsBytes = resultsJson.get(stored) ?? Buffer.from(JSON.stringify(stored));
  const { study, current, bootstrapDone, job } = view;
  // Same members in the same order as JSON.stringify(view): results is the run's last member.
  return Buffer.concat([
    Buffer.from(`{"study":${JSON.stringify(study)},"run":${JSON.stringify(head).slice(0, -1)},"results":`),
    resultsBytes,
    Buffer.from(`},"current":${current},"bootstrapDone":${bootstrapDone},"job":${JSON.stringify(job)}}`),
  ]);
}

const LOCKED_STATES = new Set(['in_review', 'signed']);

const reasonText = (reason: unknown) => (typeof reason === 'string' ? reason.trim() : '');

async function lockStudyForExclusion(tx: Parameters<Parameters<ReturnType<typeof getDb>['transaction']>[0]>[0], laboratoryId: string, studyId: string, sampleId: string) {
  if (!isUuid(studyId)) throw notFound('study');
  const [study] = await tx.select().from(studies).where(and(eq(studies.id, studyId), eq(studies.laboratoryId, laboratoryId))).for('update');
  if (!study) throw notFound('study');
  if (!isUuid(sampleId)) throw notFound('sample');
  const [sample] = await tx
    .select()
    .from(samples)
    .where(and(eq(samples.id, sampleId), eq(samples.studyId, studyId), eq(samples.laboratoryId, laboratoryId)));
  if (!sample) throw notFound('sample');
  if (LOCKED_STATES.has(study.state)) {
    throw new Problem(409, 'Study locked', `Samples can be excluded or included only before sign-off; this study is ${study.state.replace('_', ' ')}.`);
  }
  return { study, sample };
}

function requireReason(reason: unknown, verb: string): string {
  const text = reasonText(reason);
  if (text.length === 0) throw invalid(`Give a reason to ${verb} this sample.`, [{ field: 'reason', message: `Say why this sample is ${verb}d; the reason goes in the audit trail.` }]);
  if (text.length > 2000) throw invalid('The reason is too long.', [{ field: 'reason', message: 'Keep the reason under 2000 characters.' }]);
  return text;
}

/**
 * Excludes a sample from the analysis with a mandatory reason (audited 'sample.excluded'); 409 when it is
 * already excluded or the study is in review or signed.
 *
 * @example
 * await excludeSample({ id: user.id }, lab.id, studyId, sampleId, 'Haemolysed on inspection');
 */
export async function excludeSample(actor: { id: string }, laboratoryId: string, studyId: string, sampleId: string, reason: unknown) {
  const text = requireReason(reason, 'exclude');
  return getDb().transaction(async (tx) => {
    const { sample } = await lockStudyForExclusion(tx, laboratoryId, studyId, sampleId);
    const [standing] = await tx.select().from(exclusions).where(and(eq(exclusions.sampleId, sample.id), isNull(exclusions.revokedAt)));
    if (standing) throw new Problem(409, 'Already excluded', `${sample.code} is already excluded (${standing.reason}).`);
    const [row] = await tx.insert(exclusions).values({ laboratoryId, studyId, sampleId: sample.id, reason: text, excludedBy: actor.id }).returning();
    await recordAudit(tx, { laboratoryId, actorUserId: actor.id, action: 'sample.excluded', entityType: 'sample', entityId: sample.id, data: { studyId, code: sample.code, reason: text, exclusionId: row.id } });
    return row;
  });
}

/**
 * Includes an excluded sample again with a mandatory reason: the exclusion is revoked, not deleted
 * (audited 'sample.included'); 409 when it is not excluded or the study is in review or signed.
 *
 * @example
 * await includeSample({ id: user.id }, lab.id, studyId, sampleId, 'Re-measured; the first result was a mix-up');
 */
export async function includeSample(actor: { id: string }, laboratoryId: string, studyId: string, sampleId: string, reason: unknown) {
  const text = requireReason(reason, 'include');
  return getDb().transaction(async (tx) => {
    const { sample } = await lockStudyForExclusion(tx, laboratoryId, studyId, sampleId);
    const [standing] = await tx.select().from(exclusions).where(and(eq(exclusions.sampleId, sample.id), isNull(exclusions.revokedAt)));
    if (!standing) throw new Problem(409, 'Not excluded', `${sample.code} is not excluded.`);
    const [row] = await tx
      .update(exclusions)
      .set({ revokedAt: new Date(), revokedBy: actor.id, revokeReason: text })
      .where(eq(exclusions.id, standing.id))
      .returning();
    await recordAudit(tx, { laboratoryId, actorUserId: actor.id, action: 'sample.included', entityType: 'sample', entityId: sample.id, data: { studyId, code: sample.code, reason: text, exclusionId: row.id } });
    return row;
  });
}

/**
 * One sample for the detail panel: all its results, specimen flags, exclusions (standing and revoked) and its
 * audit history, oldest first.
 *
 * @example
 * const detail = await sampleDetail(lab.id, studyId, sampleId);
 */
export async function sampleDetail(laboratoryId: string, studyId: string, sampleId: string) {
  if (!isUuid(studyId)) throw notFound('study');
  if (!isUuid(sampleId)) throw notFound('sample');
  const db = getDb();
  const [sample] = await db
    .select()
    .from(samples)
    .where(and(eq(samples.id, sampleId), eq(samples.studyId, studyId), eq(samples.laboratoryId, laboratoryId)));
  if (!sample) throw notFound('sample');
  const values = await db
    .select({ procedure: results.procedure, replicate: results.replicate, value: results.value, censored: results.censored, unit: results.unit, runDate: results.runDate })
    .from(results)
    .where(eq(results.sampleId, sample.id))
    .orderBy(asc(results.procedure), asc(results.replicate));
  const exclusionRows = await db.select().from(exclusions).where(eq(exclusions.sampleId, sample.id)).orderBy(asc(exclusions.excludedAt));
  const history = await db
    .select({ id: auditEvents.id, action: auditEvents.action, occurredAt: auditEvents.occurredAt, data: auditEvents.data, actor: user.name })
    .from(auditEvents)
    .leftJoin(user, eq(user.id, auditEvents.actorUserId))
    .where(and(eq(auditEvents.laboratoryId, laboratoryId), eq(auditEvents.entityId, sample.id)))
    .orderBy(asc(auditEvents.id));
  return {
    sample: { id: sample.id, code: sample.code, flags: sample.flags, flagNote: sample.flagNote },
    values,
    excluded: exclusionRows.some((e) => e.revokedAt === null),
    exclusions: exclusionRows.map((e) => ({ reason: e.reason, excludedAt: e.excludedAt, revokedAt: e.revokedAt, revokeReason: e.revokeReason })),
    history,
  };
}
