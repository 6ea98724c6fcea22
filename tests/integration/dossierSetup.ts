/**
 * For the report, dossier and audit-chain tests: a laboratory of its own with an approved glucose protocol, a study
 * whose invented results are written straight to the database (one sample coded like a spreadsheet formula, one
 * excluded with a reason, one with a censored result), its complete analysis run stored as the analysis service
 * stores it, and optionally a signature with the study signed (written with SQL, as the sign-off service would).
 */
import { eq, sql } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { analysisRuns, exclusions, protocols, protocolVersions, results, samples, signatures, studies } from '../../src/db/schema';
import { defaultSettingsFromTemplate } from '../../src/lib/protocolSchema';
import { ENGINE_VERSION } from '../../src/lib/stats/analysis';
import { recordAudit } from '../../src/server/audit';
import { completeAnalysis, inputsHashOf, studyInputs, type StoredResults } from '../../src/server/analysis';
import { loadTemplate } from '../../src/server/templates';
import { demoPairs } from '../../scripts/demo';
import { createLabWithMembers, type TestLab } from './helpers';

/** A sample code a spreadsheet would run as a formula if the CSV did not escape it. */
export const FORMULA_CODE = '=HYPERLINK("http://evil.example/x","open me")';
export const EXCLUDED_CODE = 'RP-EXCL';
export const EXCLUSION_REASON = 'Clotted specimen seen on inspection';
export const CENSORED_CODE = 'RP-CENS';
export const SIGN_COMMENT = 'Re-check the bias at 54 mg/dL after the next calibration.';
export const SIGN_MEANING = 'I have reviewed this analysis and I decide on the candidate procedure as stated.';

export interface ReportStudy {
  lab: TestLab;
  studyId: string;
  runId: string;
  inputsHash: string;
  stored: StoredResults;
  units: string;
}

/** A lab with a study in Collecting, its data, and a stored complete (bootstrapped) analysis run. */
export async function analysedStudy(label: string): Promise<ReportStudy> {
  const lab = await createLabWithMembers(label);
  const template = loadTemplate('glucose');
  if (!template) throw new Error('protocols/glucose.json is missing');
  const base = defaultSettingsFromTemplate(template);
  const settings = {
    ...base,
    title: 'Glucose comparison for the report',
    samplePlan: { ...base.samplePlan, count: 40, replicates: 2 as const, days: 5 },
    demingLambda: { mode: 'duplicates' as const },
    // The fewest resamples the protocol allows: the test is about the report, not the bootstrap.
    bootstrap: { ...base.bootstrap, resamples: 200 },
  };
  const scientist = lab.people.lab_scientist.id;
  const db = getDb();
  const [protocol] = await db.insert(protocols).values({ laboratoryId: lab.id, title: settings.title, analyte: 'Glucose', createdBy: scientist }).returning();
  const [version] = await db
    .insert(protocolVersions)
    .values({ protocolId: protocol.id, laboratoryId: lab.id, versionNumber: 1, status: 'approved', settings, createdBy: scientist, approvedBy: scientist, approvedAt: new Date() })
    .returning();
  const [study] = await db
    .insert(studies)
    .values({
      laboratoryId: lab.id,
      protocolVersionId: version.id,
      title: 'Wren bench analyser against Lark',
      candidateProcedure: { instrument: 'Bench analyser "Wren"', reagentLot: 'LOT-C1', softwareVersion: '2.0' },
      comparativeProcedure: { instrument: 'Core analyser "Lark"', reagentLot: 'LOT-R9', softwareVersion: '5.1' },
      state: 'collecting',
      createdBy: scientist,
    })
    .returning();
  await recordAudit(db, { laboratoryId: lab.id, actorUserId: scientist, action: 'study.opened', entityType: 'study', entityId: study.id, data: { title: study.title } });

  const pairs = demoPairs(40, 777, false);
  pairs[5].code = FORMULA_CODE;
  pairs.push({ code: EXCLUDED_CODE, comparative: [120, 121], candidate: [190, 188], runDate: '2026-11-18' });
  pairs.push({ code: CENSORED_CODE, comparative: [600, 600], candidate: [600, 600], runDate: '2026-11-19' });
  const unit = settings.analyte.units;
  const technician = lab.people.technician.id;
  for (const [index, pair] of pairs.entries()) {
    const [sample] = await db
      .insert(samples)
      .values({ laboratoryId: lab.id, studyId: study.id, code: pair.code, position: index + 1, flags: pair.code === EXCLUDED_CODE ? ['clotted'] : [] })
      .returning();
    const rows = (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, r) => ({
        laboratoryId: lab.id,
        studyId: study.id,
        sampleId: sample.id,
        procedure,
        replicate: r + 1,
        value,
        censored: pair.code === CENSORED_CODE && procedure === 'candidate' ? ('>' as const) : null,
        unit,
        runDate: pair.runDate,
        enteredBy: technician,
      })),
    );
    await db.insert(results).values(rows);
    await recordAudit(db, { laboratoryId: lab.id, actorUserId: technician, action: 'sample.created', entityType: 'sample', entityId: sample.id, data: { studyId: study.id, code: pair.code } });
    if (pair.code === EXCLUDED_CODE) {
      await db.insert(exclusions).values({ laboratoryId: lab.id, studyId: study.id, sampleId: sample.id, reason: EXCLUSION_REASON, excludedBy: scientist });
      await recordAudit(db, { laboratoryId: lab.id, actorUserId: scientist, action: 'sample.excluded', entityType: 'sample', entityId: sample.id, data: { studyId: study.id, reason: EXCLUSION_REASON } });
    }
  }

  const inputs = await studyInputs(lab.id, study.id);
  const stored: StoredResults = { analysis: await completeAnalysis(inputs), inputs, bootstrap: { status: 'done', jobId: null, resamples: settings.bootstrap.resamples } };
  const inputsHash = inputsHashOf(inputs);
  const [run] = await db
    .insert(analysisRuns)
    .values({ laboratoryId: lab.id, studyId: study.id, inputsHash, engineVersion: ENGINE_VERSION, settings: inputs.settings, results: stored, createdBy: scientist })
    .returning();
  await recordAudit(db, { laboratoryId: lab.id, actorUserId: scientist, action: 'analysis.run', entityType: 'study', entityId: study.id, data: { analysisRunId: run.id, inputsHash } });
  return { lab, studyId: study.id, runId: run.id, inputsHash, stored, units: unit };
}

/** Signs the study as its medical director, accepted with conditions, and locks it (state Signed). */
export async function signStudy(study: ReportStudy) {
  const db = getDb();
  const director = study.lab.people.medical_director;
  await db.transaction(async (tx) => {
    await tx.insert(signatures).values({
      laboratoryId: study.lab.id,
      studyId: study.studyId,
      userId: director.id,
      printedName: director.name,
      role: 'medical_director',
      meaning: SIGN_MEANING,
      verdict: 'accepted_with_conditions',
      comment: SIGN_COMMENT,
      analysisRunId: study.runId,
      inputsHash: study.inputsHash,
    });
    await tx.update(studies).set({ state: 'signed', verdict: 'accepted_with_conditions', version: sql`${studies.version} + 1` }).where(eq(studies.id, study.studyId));
    await recordAudit(tx, { laboratoryId: study.lab.id, actorUserId: director.id, action: 'study.signed', entityType: 'study', entityId: study.studyId, data: { verdict: 'accepted_with_conditions' } });
  });
}
