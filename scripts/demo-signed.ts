/**
 * The demo's signed study, made through the app's own endpoints as the demo people would make it: the lab
 * scientist opens it, the technician uploads results, the analysis runs with its bootstrap, the scientist submits
 * and the medical director signs with the password. Everything in it is invented.
 */
import { DEMO_LAB, DEMO_PASSWORD, DEMO_PEOPLE, DEMO_STUDY_TITLE, demoPairs } from './demo';
import { signedInSession, type HttpSession } from './http-session';

export const SIGNED_STUDY_TITLE = 'Heron core analyser, new reagent lot GLU-2611-B: plasma glucose';

async function expectOk<T>(response: Response, what: string): Promise<T> {
  if (!response.ok) throw new Error(`${what} failed: ${response.status} ${await response.text()}`);
  return (await response.json()) as T;
}

const person = (role: (typeof DEMO_PEOPLE)[number]['role']) => DEMO_PEOPLE.find((p) => p.role === role)!;

export async function seedSignedStudy(baseUrl: string, timeoutMs = 180_000) {
  const api = `/api/labs/${DEMO_LAB.slug}`;
  const scientist = await signedInSession(baseUrl, person('lab_scientist').email, DEMO_PASSWORD);
  const { studies } = await expectOk<{ studies: { id: string; title: string }[] }>(await scientist.get(`${api}/studies`), 'listing studies');
  const collecting = studies.find((s) => s.title === DEMO_STUDY_TITLE);
  if (!collecting) throw new Error('the demo collecting study is missing');
  // The signed study follows the same approved protocol version.
  const { study: pinned } = await expectOk<{ study: { protocolVersionId: string } }>(await scientist.get(`${api}/studies/${collecting.id}`), 'reading the demo study');

  const opened = await expectOk<{ study: { id: string; version: number } }>(
    await scientist.post(`${api}/studies`, {
      title: SIGNED_STUDY_TITLE,
      protocolVersionId: pinned.protocolVersionId,
      candidate: { instrument: 'Core analyser "Heron" (serial HR-1187)', reagentLot: 'GLU-2611-B', softwareVersion: '7.0.3' },
      comparative: { instrument: 'Core analyser "Heron" (serial HR-1187)', reagentLot: 'GLU-2609-A', softwareVersion: '7.0.3' },
      technicianIds: [],
    }),
    'opening the signed study',
  );
  const base = `${api}/studies/${opened.study.id}`;
  await expectOk(await scientist.post(`${base}/transitions`, { transition: 'start_collecting', version: opened.study.version }), 'starting collection');

  const technician = await signedInSession(baseUrl, person('technician').email, DEMO_PASSWORD);
  const results = demoPairs(45, 20261020, false).flatMap((pair) =>
    (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, index) => ({
        sampleCode: pair.code.replace('EM-', 'LT-'),
        procedure,
        replicate: index + 1,
        value,
        unit: 'mg/dL',
        runDate: pair.runDate.replace('2026-11-', '2026-10-'),
      })),
    ),
  );
  await expectOk(await technician.post(`${base}/results`, { results }), 'uploading results');

  await expectOk(await scientist.post(`${base}/analysis`, {}), 'running the analysis');
  const analysis = await waitFor<{ bootstrapDone: boolean; run: { id: string } }>(scientist, `${base}/analysis`, (body) => body.bootstrapDone, timeoutMs);
  const { study: analysed } = await expectOk<{ study: { version: number } }>(await scientist.get(base), 'reading the study');
  await expectOk(await scientist.post(`${base}/submit`, { version: analysed.version }), 'submitting for sign-off');

  const director = await signedInSession(baseUrl, person('medical_director').email, DEMO_PASSWORD);
  const { study: inReview } = await expectOk<{ study: { version: number } }>(await director.get(base), 'reading the submitted study');
  await expectOk(
    await director.post(`${base}/sign`, {
      verdict: 'accepted',
      comment: 'The new lot agrees with the current one at every decision level.',
      password: DEMO_PASSWORD,
      version: inReview.version,
      analysisRunId: analysis.run.id,
    }),
    'signing',
  );
  return opened.study.id;
}

async function waitFor<T>(session: HttpSession, path: string, done: (body: T) => boolean, timeoutMs: number): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const body = await expectOk<T>(await session.get(path), `reading ${path}`);
    if (done(body)) return body;
    await new Promise((r) => setTimeout(r, 500));
  }
  throw new Error(`${path} was not ready within ${timeoutMs / 1000} s`);
}
