/**
 * How far a study's results cover its sample plan: samples entered against the planned count, their spread over
 * the parts of the measuring interval against the target shares, days covered, replicates complete, and the
 * censored or out-of-interval results that the analysis will treat specially.
 */
import { eq } from 'drizzle-orm';
import { getDb } from './db';
import { results, samples } from '../db/schema';
import type { ProtocolSettings } from '../lib/protocolSchema';
import { groupBySample } from './results';

/** One result as coverage needs it. */
export interface CoverageResult {
  sampleId: string;
  procedure: 'comparative' | 'candidate';
  replicate: number;
  value: number;
  censored: '<' | '>' | null;
  runDate: string | null;
}

/**
 * Coverage of a sample plan by results. A sample's place on the measuring interval is the mean of its uncensored
 * comparative results (the procedure the laboratory trusts), or of its candidate results when it has no
 * comparative one. Targets are the shares × the planned count, rounded.
 *
 * @example
 * computeCoverage(settings, [{ id: 's1', code: 'S-1' }], [{ sampleId: 's1', procedure: 'comparative', replicate: 1, value: 50, censored: null, runDate: '2026-11-16' }]);
 * // { samples: { entered: 1, planned: 60, … }, parts: [{ label: 'low', count: 1, target: 20, … }, …], … }
 */
export function computeCoverage(settings: ProtocolSettings, sampleRows: { id: string; code: string }[], resultRows: CoverageResult[]) {
  const plan = settings.samplePlan;
  const interval = settings.analyte.measuringInterval;
  const bySample = groupBySample(resultRows);
  const parts = plan.intervalParts.map((part) => ({ ...part, target: Math.round(part.share * plan.count), count: 0 }));
  let entered = 0;
  let paired = 0;
  let replicatesComplete = 0;
  let below = 0;
  let above = 0;
  const notes: string[] = [];
  for (const sample of sampleRows) {
    const own = bySample.get(sample.id) ?? [];
    if (own.length === 0) continue;
    entered++;
    const usable = (procedure: 'comparative' | 'candidate') => own.filter((r) => r.procedure === procedure && !r.censored);
    if (usable('comparative').length > 0 && usable('candidate').length > 0) paired++;
    const has = (procedure: 'comparative' | 'candidate', replicate: number) => own.some((r) => r.procedure === procedure && r.replicate === replicate);
    const complete = Array.from({ length: plan.replicates }, (_, i) => i + 1).every((r) => has('comparative', r) && has('candidate', r));
    if (complete) replicatesComplete++;
    for (const r of own.filter((x) => x.censored)) {
      notes.push(`${sample.code}: ${r.procedure} replicate ${r.replicate} was reported as "${r.censored}${r.value}"; it is kept and left out of the regression.`);
    }
    const basis = usable('comparative').length > 0 ? usable('comparative') : usable('candidate');
    if (basis.length === 0) continue;
    const level = basis.reduce((sum, r) => sum + r.value, 0) / basis.length;
    if (level < interval.low) below++;
    else if (level > interval.high) above++;
    else {
      const part = parts.find((p, i) => level >= p.low && (level < p.high || i === parts.length - 1));
      if (part) part.count++;
    }
  }
  const days = [...new Set(resultRows.map((r) => r.runDate).filter((d): d is string => !!d))].sort();
  return {
    units: settings.analyte.units,
    measuringInterval: interval,
    samples: { entered, planned: plan.count, paired, replicatesComplete, replicates: plan.replicates },
    parts,
    outside: { below, above },
    days: { covered: days.length, planned: plan.days, dates: days },
    notes,
  };
}

/**
 * Coverage type as the panel receives it.
 *
 * @example
 * const data: Coverage = await api('GET', `/api/labs/${slug}/studies/${id}/coverage`);
 */
export type Coverage = ReturnType<typeof computeCoverage>;

/**
 * Coverage of one study (already checked to belong to the laboratory).
 *
 * @example
 * const coverage = await studyCoverage(study.id, settings);
 */
export async function studyCoverage(studyId: string, settings: ProtocolSettings): Promise<Coverage> {
  const db = getDb();
  const sampleRows = await db.select({ id: samples.id, code: samples.code }).from(samples).where(eq(samples.studyId, studyId)).orderBy(samples.position);
  const resultRows = await db
    .select({ sampleId: results.sampleId, procedure: results.procedure, replicate: results.replicate, value: results.value, censored: results.censored, runDate: results.runDate })
    .from(results)
    .where(eq(results.studyId, studyId));
  return computeCoverage(settings, sampleRows, resultRows);
}
