/**
 * Sign-off through the built server: submit (analysis current, bootstrap done) → e-mail to the medical directors →
 * sign with the password re-entered → Signed and locked → amendment as a new revision; with the refusals
 * (wrong password, wrong role, another laboratory, stale analysis, stale version).
 */
import { and, eq, ne, sql } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { getDb } from '../../src/server/db';
import { auditTrail, verifyChain } from '../../src/server/audit';
import { analysisRuns, exclusions, outgoingMail, results, samples, signatures, studies } from '../../src/db/schema';
import { inputsHashOf, studyInputs } from '../../src/server/analysis';
import { demoPairs } from '../../scripts/demo';
import { createLabWithMembers, linkIn, signIn, TEST_PASSWORD, waitForMail, type HttpClient } from './helpers';
import { collectingStudy, problemOf, type CollectingStudy } from './studySetup';

afterAll(() => getDb().$client.end());

const SAMPLE_COUNT = 40;

interface AnalysedStudy extends CollectingStudy {
  director: HttpClient;
  run: { id: string; inputsHash: string };
  version: number;
  /** Code of the sample with a standing exclusion (another one was excluded, then kept). */
  excludedCode: string;
}

async function studyVersion(client: HttpClient, base: string): Promise<number> {
  const response = await client.get(base);
  expect(response.status).toBe(200);
  return (await response.json()).study.version;
}

/** Uploads invented duplicate pairs through the results API as the technician; codes start with `prefix`. */
async function enterPairs(setup: CollectingStudy, count: number, seed: number, prefix = '') {
  const pairs = demoPairs(count, seed, false);
  const upload = pairs.flatMap((pair) =>
    (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, index) => ({ sampleCode: `${prefix}${pair.code}`, procedure, replicate: index + 1, value, unit: 'mg/dL', runDate: pair.runDate })),
    ),
  );
  const response = await setup.technician.post(`${setup.base}/results`, { results: upload });
  expect(response.status).toBe(201);
}

/** Runs the analysis as the lab scientist and waits for its bootstrap job to finish. */
async function runAnalysisToEnd(setup: CollectingStudy) {
  const started = await setup.scientist.post(`${setup.base}/analysis`);
  expect([200, 201]).toContain(started.status);
  for (let attempt = 0; attempt < 600; attempt++) {
    const view = await (await setup.scientist.get(`${setup.base}/analysis`)).json();
    if (view.bootstrapDone) return { id: view.run.id as string, inputsHash: view.run.inputsHash as string };
    if (view.job?.status === 'failed') throw new Error(`bootstrap failed: ${view.job.error}`);
    await new Promise((r) => setTimeout(r, 200));
  }
  throw new Error('the bootstrap job did not finish');
}

/** A collecting study with 40 invented pairs and a finished analysis (one sample excluded, one excluded then kept). */
async function analysedStudy(label: string): Promise<AnalysedStudy> {
  const setup = await collectingStudy(label);
  await enterPairs(setup, SAMPLE_COUNT, 4242);
  const rows = await getDb().select().from(samples).where(eq(samples.studyId, setup.studyId));
  const [excluded, restored] = rows;
  const scientistId = setup.lab.people.lab_scientist.id;
  await getDb().insert(exclusions).values([
    { laboratoryId: setup.lab.id, studyId: setup.studyId, sampleId: excluded.id, reason: 'Clotted on inspection', excludedBy: scientistId },
    {
      laboratoryId: setup.lab.id,
      studyId: setup.studyId,
      sampleId: restored.id,
      reason: 'Looked discordant',
      excludedBy: scientistId,
      revokedBy: scientistId,
      revokedAt: new Date(),
      revokeReason: 'Re-measured: agrees',
    },
  ]);
  const run = await runAnalysisToEnd(setup);
  const director = await signIn(setup.lab.people.medical_director.email);
  return { ...setup, director, run, version: await studyVersion(setup.scientist, setup.base), excludedCode: excluded.code };
}

async function signatureCount(studyId: string) {
  return (await getDb().select().from(signatures).where(eq(signatures.studyId, studyId))).length;
}

async function stateOf(studyId: string) {
  const [row] = await getDb().select().from(studies).where(eq(studies.id, studyId));
  return row;
}

describe('submit for sign-off, e-mail, sign', () => {
  it('a scientist submits, the director follows the e-mailed link, signs with the password, and the study is signed and locked', { timeout: 180_000 }, async () => {
    const study = await analysedStudy('flow');
    const { lab } = study;

    const submitted = await study.scientist.post(`${study.base}/submit`, { version: study.version });
    expect(submitted.status).toBe(200);
    const submission = await submitted.json();
    expect(submission.study.state).toBe('in_review');
    expect(submission.notified).toEqual([lab.people.medical_director.email]);

    // The director's e-mail links to the sign page, and is recorded in outgoing_mail.
    const mail = await waitForMail(lab.people.medical_director.email, 'Sign-off requested');
    const link = linkIn(mail.text);
    expect(link).toMatch(new RegExp(`/labs/${lab.slug}/studies/${study.studyId}/sign$`));
    const recorded = await getDb().select().from(outgoingMail).where(and(eq(outgoingMail.laboratoryId, lab.id), eq(outgoingMail.kind, 'sign-off-requested')));
    expect(recorded.map((m) => [m.toAddress, m.status])).toEqual([[lab.people.medical_director.email, 'sent']]);

    const page = await study.director.get(new URL(link).pathname);
    expect(page.status).toBe(200);
    const html = await page.text();
    expect(html).toContain('What your signature means');
    expect(html).toContain('By signing I confirm that I reviewed');
    expect(html).toContain("never replaces, the medical director's judgement under local regulation");
    expect(html).toContain(study.run.inputsHash);
    expect(html).toContain('data-testid="decision-level-table"');

    const body = { verdict: 'accepted_with_conditions', comment: 'Recheck the bias at 126 mg/dL after the next reagent lot', password: TEST_PASSWORD, version: study.version + 1, analysisRunId: study.run.id };
    const auditBefore = (await auditTrail(getDb(), lab.id)).length;

    // A wrong password writes nothing.
    const wrong = await study.director.post(`${study.base}/sign`, { ...body, password: `${TEST_PASSWORD}-not` });
    expect(wrong.status).toBe(403);
    const wrongProblem = await problemOf(wrong);
    expect(wrongProblem.detail).toMatch(/password is not right, so nothing was signed/);
    expect(wrongProblem.errors?.[0].field).toBe('password');
    expect(await signatureCount(study.studyId)).toBe(0);
    expect((await stateOf(study.studyId)).state).toBe('in_review');
    expect((await auditTrail(getDb(), lab.id)).length).toBe(auditBefore);

    // Conditions and reasons are required.
    const noConditions = await study.director.post(`${study.base}/sign`, { ...body, comment: '  ' });
    expect(noConditions.status).toBe(422);
    expect((await problemOf(noConditions)).errors?.map((e) => e.field)).toEqual(['comment']);
    const noReason = await study.director.post(`${study.base}/sign`, { ...body, verdict: 'rejected', comment: '' });
    expect((await problemOf(noReason)).errors?.[0].message).toMatch(/reason for rejecting/);

    const signedResponse = await study.director.post(`${study.base}/sign`, body);
    expect(signedResponse.status).toBe(201);
    const { study: signedStudy, signature } = await signedResponse.json();
    expect(signedStudy).toMatchObject({ state: 'signed', verdict: 'accepted_with_conditions' });

    const [stored] = await getDb().select().from(signatures).where(eq(signatures.studyId, study.studyId));
    expect(stored.id).toBe(signature.id);
    expect(stored).toMatchObject({
      userId: lab.people.medical_director.id,
      printedName: lab.people.medical_director.name,
      role: 'medical_director',
      verdict: 'accepted_with_conditions',
      comment: body.comment,
      analysisRunId: study.run.id,
      inputsHash: study.run.inputsHash,
    });
    expect(stored.meaning).toMatch(/^By signing I confirm that I reviewed/);
    expect(stored.meaning).toContain(study.run.id);
    expect(stored.signedAt).toBeInstanceOf(Date);
    expect(signature.signedAt).toMatch(/Z$/);

    const trail = await auditTrail(getDb(), lab.id, { entityId: study.studyId });
    const signedEvent = trail.find((e) => e.action === 'study.signed');
    expect(trail.map((e) => e.action)).toEqual(expect.arrayContaining(['study.submitted_for_sign_off', 'study.signed']));
    expect(signedEvent?.data).toMatchObject({ signatureId: stored.id, verdict: 'accepted_with_conditions', analysisRunId: study.run.id, inputsHash: study.run.inputsHash, printedName: stored.printedName });
    expect(trail.find((e) => e.action === 'study.submitted_for_sign_off')?.data).toMatchObject({ analysisRunId: study.run.id, inputsHash: study.run.inputsHash });
    expect(await verifyChain(getDb(), lab.id)).toMatchObject({ intact: true });

    const told = await waitForMail(lab.people.lab_scientist.email, 'Signed (Accepted with conditions)');
    expect(linkIn(told.text)).toMatch(/\/sign$/);

    // Locked: the results API and a second signature are refused; the page shows the lock and the manifest.
    const late = await study.technician.post(`${study.base}/results`, { results: [{ sampleCode: 'LATE-1', procedure: 'comparative', replicate: 1, value: 90, unit: 'mg/dL' }] });
    expect(late.status).toBe(409);
    const again = await study.director.post(`${study.base}/sign`, { ...body, version: signedStudy.version });
    expect(again.status).toBe(409);
    expect((await problemOf(again)).detail).toMatch(/this study is signed/);
    // Reading the analysis leaves the signed run untouched; running it again is refused, not attempted.
    expect((await study.scientist.get(`${study.base}/analysis`)).status).toBe(200);
    const rerun = await study.scientist.post(`${study.base}/analysis`, {});
    expect(rerun.status).toBe(409);
    expect((await problemOf(rerun)).detail).toContain('signed and locked');
    const [signedRun] = await getDb().select().from(analysisRuns).where(eq(analysisRuns.id, study.run.id));
    expect(signedRun.stale).toBe(false);
    const lockedPage = await (await study.scientist.get(`/labs/${lab.slug}/studies/${study.studyId}/sign`)).text();
    expect(lockedPage).toContain('Signed and locked');
    expect(lockedPage).toContain('data-testid="signature-table"');
    expect(lockedPage).not.toContain('data-testid="sign-off-form"');
  });

  it('a study whose data changed after submission cannot be signed (409), nor submitted with a stale or missing analysis', { timeout: 180_000 }, async () => {
    const empty = await collectingStudy('noanalysis');
    const none = await empty.scientist.post(`${empty.base}/submit`, { version: await studyVersion(empty.scientist, empty.base) });
    expect(none.status).toBe(409);
    expect((await problemOf(none)).detail).toMatch(/Run the analysis before submitting/);

    const study = await analysedStudy('stale');
    // New data after the analysis: the run is no longer current.
    await enterPairs(study, 1, 99, 'LATE-');
    const version = await studyVersion(study.scientist, study.base);
    const outdated = await study.scientist.post(`${study.base}/submit`, { version });
    expect(outdated.status).toBe(409);
    expect((await problemOf(outdated)).detail).toMatch(/changed since the last analysis run/);
    expect((await stateOf(study.studyId)).state).toBe('collecting');

    const run = await runAnalysisToEnd(study);
    const staleVersion = await study.scientist.post(`${study.base}/submit`, { version: version - 1 });
    expect(staleVersion.status).toBe(409);
    expect((await problemOf(staleVersion)).detail).toMatch(/changed by someone else/);
    expect((await study.scientist.post(`${study.base}/submit`, { version })).status).toBe(200);

    // A value of an analysed sample changes behind the service's back while in review: the signature is refused.
    const [oneResult] = await getDb()
      .select({ id: results.id })
      .from(results)
      .innerJoin(samples, eq(samples.id, results.sampleId))
      .where(and(eq(results.studyId, study.studyId), ne(samples.code, study.excludedCode)))
      .limit(1);
    await getDb().execute(sql`update results set value = value + 7 where id = ${oneResult.id}`);
    const refused = await study.director.post(`${study.base}/sign`, { verdict: 'accepted', comment: '', password: TEST_PASSWORD, version: version + 1, analysisRunId: run.id });
    expect(refused.status).toBe(409);
    expect((await problemOf(refused)).detail).toMatch(/changed since the last analysis run/);
    expect(await signatureCount(study.studyId)).toBe(0);
    expect((await stateOf(study.studyId)).state).toBe('in_review');
  });
});

describe('an analysis still computing', () => {
  it('refuses submission while the bootstrap intervals of a current run are pending (409), and nothing changes', async () => {
    const study = await collectingStudy('pending');
    await enterPairs(study, 10, 5);
    // A current run whose bootstrap is still pending, written as the analysis service writes it before its job ends.
    const inputs = await studyInputs(study.lab.id, study.studyId);
    await getDb()
      .insert(analysisRuns)
      .values({
        laboratoryId: study.lab.id,
        studyId: study.studyId,
        inputsHash: inputsHashOf(inputs),
        engineVersion: inputs.engineVersion,
        settings: inputs.settings,
        results: { analysis: {}, inputs, bootstrap: { status: 'pending', jobId: null, resamples: 0 } },
      });
    const version = await studyVersion(study.scientist, study.base);
    const pending = await study.scientist.post(`${study.base}/submit`, { version });
    expect(pending.status).toBe(409);
    expect((await problemOf(pending)).detail).toMatch(/bootstrap confidence intervals are still being computed/);
    expect(await stateOf(study.studyId)).toMatchObject({ state: 'collecting', version });
  });
});

describe('who may do what', () => {
  it('only medical directors sign, only lab scientists submit, everyone in the lab reads the sign page, another lab gets 404', { timeout: 180_000 }, async () => {
    const study = await analysedStudy('roles');
    const { lab } = study;
    expect((await study.director.post(`${study.base}/submit`, { version: study.version })).status).toBe(403);
    expect((await study.technician.post(`${study.base}/submit`, { version: study.version })).status).toBe(403);
    expect((await study.scientist.post(`${study.base}/submit`, { version: study.version })).status).toBe(200);

    const body = { verdict: 'accepted', comment: '', password: TEST_PASSWORD, version: study.version + 1, analysisRunId: study.run.id };
    for (const role of ['lab_scientist', 'technician', 'quality', 'lab_admin'] as const) {
      const client = await signIn(lab.people[role].email);
      const refused = await client.post(`${study.base}/sign`, body);
      expect(refused.status, role).toBe(403);
      expect((await problemOf(refused)).detail).toMatch(/not allow you to sign studies/);
      const page = await client.get(`/labs/${lab.slug}/studies/${study.studyId}/sign`);
      expect(page.status, role).toBe(200);
      const html = await page.text();
      expect(html).toContain('Awaiting the medical director');
      expect(html).not.toContain('data-testid="sign-off-form"');
    }

    const other = await createLabWithMembers('elsewhere');
    const outsider = await signIn(other.people.medical_director.email);
    expect((await outsider.post(`${study.base}/sign`, body)).status).toBe(404);
    expect((await outsider.post(`/api/labs/${other.slug}/studies/${study.studyId}/sign`, body)).status).toBe(404);
    expect((await outsider.get(`/labs/${other.slug}/studies/${study.studyId}/sign`)).status).toBe(404);
    expect(await signatureCount(study.studyId)).toBe(0);

    expect((await study.director.post(`${study.base}/sign`, body)).status).toBe(201);
  });
});

describe('amendment', () => {
  it('a lab scientist opens the next revision with copies of the samples, results and standing exclusions; the signed one stays locked', { timeout: 180_000 }, async () => {
    const study = await analysedStudy('amend');
    const { lab } = study;
    expect((await study.scientist.post(`${study.base}/amend`, { reason: 'Too early', version: study.version })).status).toBe(409);
    expect((await study.scientist.post(`${study.base}/submit`, { version: study.version })).status).toBe(200);
    const signedResponse = await study.director.post(`${study.base}/sign`, { verdict: 'rejected', comment: 'Bias beyond the limit at the hypoglycaemia level', password: TEST_PASSWORD, version: study.version + 1, analysisRunId: study.run.id });
    expect(signedResponse.status).toBe(201);
    const signedVersion = (await signedResponse.json()).study.version;

    expect((await study.director.post(`${study.base}/amend`, { reason: 'x', version: signedVersion })).status).toBe(403);
    const noReason = await study.scientist.post(`${study.base}/amend`, { reason: ' ', version: signedVersion });
    expect(noReason.status).toBe(422);
    expect((await problemOf(noReason)).errors?.[0].field).toBe('reason');

    const amended = await study.scientist.post(`${study.base}/amend`, { reason: 'Re-measure the low samples with the new lot', version: signedVersion });
    expect(amended.status).toBe(201);
    const { study: next, copied } = await amended.json();
    expect(next).toMatchObject({ state: 'collecting', revision: 2, previousRevisionId: study.studyId, verdict: null });
    expect(copied).toEqual({ samples: SAMPLE_COUNT, results: SAMPLE_COUNT * 4, exclusions: 1 });

    const db = getDb();
    const project = async (studyId: string) => {
      const rows = await db
        .select({ code: samples.code, procedure: results.procedure, replicate: results.replicate, value: results.value, unit: results.unit, runDate: results.runDate })
        .from(results)
        .innerJoin(samples, eq(samples.id, results.sampleId))
        .where(eq(results.studyId, studyId));
      return rows.sort((a, b) => `${a.code}${a.procedure}${a.replicate}`.localeCompare(`${b.code}${b.procedure}${b.replicate}`));
    };
    expect(await project(next.id)).toEqual(await project(study.studyId));
    const standing = await db
      .select({ code: samples.code, reason: exclusions.reason, revokedAt: exclusions.revokedAt })
      .from(exclusions)
      .innerJoin(samples, eq(samples.id, exclusions.sampleId))
      .where(eq(exclusions.studyId, next.id));
    expect(standing).toEqual([{ code: study.excludedCode, reason: 'Clotted on inspection', revokedAt: null }]);

    const old = await stateOf(study.studyId);
    expect(old).toMatchObject({ state: 'signed', verdict: 'rejected', version: signedVersion });
    const again = await study.scientist.post(`${study.base}/amend`, { reason: 'Twice', version: signedVersion });
    expect(again.status).toBe(409);
    expect((await problemOf(again)).detail).toMatch(/already amended: revision 2/);

    // The new revision takes results; the signed one does not; each page links to the other.
    const nextBase = `/api/labs/${lab.slug}/studies/${next.id}`;
    expect((await study.technician.post(`${nextBase}/results`, { results: [{ sampleCode: 'NEW-1', procedure: 'comparative', replicate: 1, value: 90, unit: 'mg/dL' }] })).status).toBe(201);
    expect((await study.technician.post(`${study.base}/results`, { results: [{ sampleCode: 'NEW-1', procedure: 'comparative', replicate: 1, value: 90, unit: 'mg/dL' }] })).status).toBe(409);
    expect(await (await study.scientist.get(`/labs/${lab.slug}/studies/${study.studyId}/sign`)).text()).toContain(`/labs/${lab.slug}/studies/${next.id}/sign`);
    expect(await (await study.scientist.get(`/labs/${lab.slug}/studies/${next.id}/sign`)).text()).toContain(`/labs/${lab.slug}/studies/${study.studyId}/sign`);

    const actions = (await auditTrail(db, lab.id)).filter((e) => e.action === 'study.amended' || e.action === 'study.revision_opened');
    expect(actions.map((e) => [e.action, e.entityId])).toEqual([
      ['study.amended', study.studyId],
      ['study.revision_opened', next.id],
    ]);
  });
});

describe('returning a study unsigned', () => {
  it('a director returns a study in review with a reason: it collects results again and the scientists are e-mailed', { timeout: 180_000 }, async () => {
    const study = await analysedStudy('return');
    const { lab } = study;
    expect((await study.scientist.post(`${study.base}/submit`, { version: study.version })).status).toBe(200);
    const inReview = study.version + 1;

    expect((await study.scientist.post(`${study.base}/return`, { reason: 'Mine', version: inReview })).status).toBe(403);
    const noReason = await study.director.post(`${study.base}/return`, { reason: '', version: inReview });
    expect(noReason.status).toBe(422);
    expect((await problemOf(noReason)).errors?.[0].field).toBe('reason');

    const reason = 'Add five samples above 300 mg/dL: the upper third of the interval is empty';
    const returned = await study.director.post(`${study.base}/return`, { reason, version: inReview });
    expect(returned.status).toBe(200);
    expect((await returned.json()).study).toMatchObject({ state: 'collecting', verdict: null, version: inReview + 1 });
    const mail = await waitForMail(lab.people.lab_scientist.email, 'Returned for changes');
    expect(mail.text).toContain(reason);
    const event = (await auditTrail(getDb(), lab.id, { entityId: study.studyId })).find((e) => e.action === 'study.returned_for_changes');
    expect(event?.data).toMatchObject({ from: 'in_review', to: 'collecting', reason });

    await enterPairs(study, 5, 31, 'HIGH-');
    const sign = await study.director.post(`${study.base}/sign`, { verdict: 'accepted', comment: '', password: TEST_PASSWORD, version: inReview + 1, analysisRunId: study.run.id });
    expect(sign.status).toBe(409);
    expect(await signatureCount(study.studyId)).toBe(0);
  });
});

describe('wrong passwords at signing', () => {
  it('pauses signing after 5 wrong passwords, even with the right one, and writes no signature', async () => {
    const study = await collectingStudy('guess');
    const director = await signIn(study.lab.people.medical_director.email);
    const body = { verdict: 'accepted', comment: '', version: 2, analysisRunId: crypto.randomUUID() };
    for (let attempt = 1; attempt <= 5; attempt++) {
      expect((await director.post(`${study.base}/sign`, { ...body, password: `guess-${attempt}` })).status, `attempt ${attempt}`).toBe(403);
    }
    const paused = await director.post(`${study.base}/sign`, { ...body, password: TEST_PASSWORD });
    expect(paused.status).toBe(429);
    expect((await problemOf(paused)).detail).toMatch(/Signing is paused for 15 minutes after 5 wrong passwords/);
    expect(await signatureCount(study.studyId)).toBe(0);
  });
});
