/**
 * The sign-off journey in the browser, on a study of its own (the demo's collecting study is left alone): the lab
 * scientist opens a study, the technician enters results through the API, the analysis runs to the end of its
 * bootstrap, the scientist submits, the director follows the e-mailed link, signs with the password and sees the
 * study locked; quality & regulatory makes the report and downloads the dossier.
 */
import { readFileSync } from 'node:fs';
import AxeBuilder from '@axe-core/playwright';
import { expect, test, type APIRequestContext, type Browser, type Page } from '@playwright/test';
import { demoPairs } from '../../scripts/demo';
import type { Role } from '../../src/db/schema';
import { DEMO_LAB, DEMO_PASSWORD, demoPerson, signInAs, submitSignIn, waitForMail } from './helpers';
import { E2E_DIRS } from './stack';

const TITLE = 'Bench analyser "Plover" against Heron: sign-off journey';
const api = `/api/labs/${DEMO_LAB.slug}`;

/** Waits until every island on the page has hydrated (Astro drops the `ssr` attribute then). */
async function hydrated(page: Page) {
  await page.waitForFunction(() => document.querySelector('astro-island[ssr]') === null);
}

/** A browser of its own for one demo person, signed in through the sign-in page. */
async function personPage(browser: Browser, role: Role): Promise<Page> {
  const page = await (await browser.newContext()).newPage();
  await signInAs(page, role);
  return page;
}

/** No serious or critical axe-core violations (WCAG 2.x A and AA rules). */
async function expectAccessible(page: Page) {
  const results = await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze();
  const serious = results.violations.filter((v) => v.impact === 'serious' || v.impact === 'critical');
  expect(serious.map((v) => `${v.id}: ${v.help} (${v.nodes.map((n) => n.target.join(' ')).join(', ')})`)).toEqual([]);
}

interface StudyBody {
  study: { id: string; version: number; state: string; verdict: string | null };
}

/** The JSON of an answer expected to have `status` (its body is shown when it does not). */
async function ok<T>(response: Awaited<ReturnType<APIRequestContext['get']>>, status = 200): Promise<T> {
  expect(response.status(), (await response.text()).slice(0, 500)).toBe(status);
  return (await response.json()) as T;
}

test('a study goes from submission through the e-mailed link to a signature, is locked, and its dossier downloads', async ({ browser }) => {
  test.setTimeout(240_000);
  const scientist = await personPage(browser, 'lab_scientist');

  // The scientist opens a study of the demo's approved protocol and starts collecting.
  // The protocol version the demo's collecting study follows (other journeys add protocols of their own).
  const { studies } = await ok<{ studies: { id: string; title: string }[] }>(await scientist.request.get(`${api}/studies`));
  const demoStudy = studies.find((s) => s.title === 'Kestrel bench analyser against Heron: plasma glucose');
  expect(demoStudy, 'the demo has its collecting study').toBeTruthy();
  const { study: pinned } = await ok<{ study: { protocolVersionId: string } }>(await scientist.request.get(`${api}/studies/${demoStudy!.id}`));
  const opened = await ok<StudyBody>(
    await scientist.request.post(`${api}/studies`, {
      data: {
        title: TITLE,
        protocolVersionId: pinned.protocolVersionId,
        candidate: { instrument: 'Bench analyser "Plover" (serial PL-22)', reagentLot: 'GLU-2612-C', softwareVersion: '1.4' },
        comparative: { instrument: 'Core analyser "Heron" (serial HR-1187)', reagentLot: 'GLU-2609-A', softwareVersion: '7.0.3' },
        technicianIds: [],
      },
    }),
    201,
  );
  const studyId: string = opened.study.id;
  const base = `${api}/studies/${studyId}`;
  await ok(await scientist.request.post(`${base}/transitions`, { data: { transition: 'start_collecting', version: opened.study.version } }));

  // The technician sends 40 invented duplicate pairs through the results API.
  const technician = await personPage(browser, 'technician');
  const upload = demoPairs(40, 777, false).flatMap((pair) =>
    (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, index) => ({ sampleCode: `PL-${pair.code}`, procedure, replicate: index + 1, value, unit: 'mg/dL', runDate: pair.runDate })),
    ),
  );
  await ok(await technician.request.post(`${base}/results`, { data: { results: upload } }), 201);

  // The analysis runs; its bootstrap job finishes in the background.
  const started = await scientist.request.post(`${base}/analysis`, { data: {} });
  expect([200, 201], await started.text()).toContain(started.status());
  await expect.poll(async () => (await ok<{ bootstrapDone: boolean }>(await scientist.request.get(`${base}/analysis`))).bootstrapDone, { timeout: 120_000, intervals: [500] }).toBe(true);

  // The scientist submits from the sign-off page.
  const signPath = `/labs/${DEMO_LAB.slug}/studies/${studyId}/sign`;
  await scientist.goto(signPath);
  await scientist.getByRole('button', { name: 'Submit for sign-off' }).click();
  await expect(scientist.getByTestId('study-state')).toContainText('Awaiting sign-off');

  // The director reads the e-mail and follows its link.
  const director = demoPerson('medical_director');
  const mail = await waitForMail(director.email, `Sign-off requested: ${TITLE}`);
  const link = mail.text.match(/https?:\/\/\S+\/sign\b/)?.[0];
  expect(link, mail.text).toBeTruthy();
  // Signed out, the link leads through the sign-in page straight back to the study.
  const directorPage = await (await browser.newContext()).newPage();
  await directorPage.goto(new URL(link!).pathname);
  await expect(directorPage).toHaveURL(/\/sign-in\?next=/);
  await submitSignIn(directorPage, 'medical_director');
  await expect(directorPage).toHaveURL(new RegExp(`${signPath}$`));
  await hydrated(directorPage);
  await expect(directorPage.getByRole('heading', { level: 1 })).toContainText(TITLE);
  await expect(directorPage.getByTestId('standing-caution')).toContainText("never replaces, the medical director's judgement");
  await expect(directorPage.getByTestId('decision-level-table')).toBeVisible();
  await expect(directorPage.getByTestId('signature-meaning')).toContainText('By signing I confirm that I reviewed');
  await expectAccessible(directorPage);

  // Conditions are required; a wrong password signs nothing.
  await directorPage.getByLabel('Accepted with conditions').check();
  await directorPage.getByLabel('Your password').fill(DEMO_PASSWORD);
  await directorPage.getByRole('button', { name: 'Sign the study' }).click();
  await expect(directorPage.getByText('State the conditions of the acceptance.')).toBeVisible();
  await directorPage.getByLabel('Conditions of the acceptance (required)').fill('Repeat the comparison at 54 mg/dL with the next reagent lot');
  await directorPage.getByLabel('Your password').fill(`${DEMO_PASSWORD}-wrong`);
  await directorPage.getByRole('button', { name: 'Sign the study' }).click();
  await expect(directorPage.getByText('The password is not right, so nothing was signed.')).toBeVisible();
  await expect(directorPage.getByTestId('study-state')).toContainText('Awaiting sign-off');

  await directorPage.getByLabel('Your password').fill(DEMO_PASSWORD);
  await directorPage.screenshot({ path: `${E2E_DIRS.screenshots}/sign-off.png`, fullPage: true });
  await directorPage.getByRole('button', { name: 'Sign the study' }).click();

  // Signed and locked: the verdict and the signature show, no form or button to change anything remains.
  await expect(directorPage.getByTestId('locked-notice')).toContainText('Signed and locked');
  await expect(directorPage.getByTestId('study-verdict')).toContainText('Accepted with conditions');
  await expect(directorPage.getByTestId('signature-table')).toContainText(director.name);
  await expect(directorPage.getByTestId('sign-off-form')).toHaveCount(0);
  await expectAccessible(directorPage);
  await directorPage.screenshot({ path: `${E2E_DIRS.screenshots}/sign-off-signed.png`, fullPage: true });
  await scientist.goto(signPath);
  await expect(scientist.getByTestId('locked-notice')).toBeVisible();
  await expect(scientist.getByRole('button', { name: 'Submit for sign-off' })).toHaveCount(0);
  const late = await technician.request.post(`${base}/results`, { data: { results: [{ sampleCode: 'PL-LATE', procedure: 'comparative', replicate: 1, value: 90, unit: 'mg/dL' }] } });
  expect(late.status()).toBe(409);
  // The technician's study page offers no way to enter or import results any more.
  await technician.goto(`/labs/${DEMO_LAB.slug}/studies/${studyId}`);
  await expect(technician.getByTestId('study-state')).toContainText('Signed');
  await expect(technician.getByTestId('entry-grid')).toContainText('Read-only');
  await expect(technician.getByTestId('entry-grid').locator('input')).toHaveCount(0);
  await expect(technician.getByTestId('csv-import')).toHaveCount(0);
  expect((await ok<StudyBody>(await scientist.request.get(base))).study).toMatchObject({ state: 'signed', verdict: 'accepted_with_conditions' });
  const told = await waitForMail(demoPerson('lab_scientist').email, `Signed (Accepted with conditions): ${TITLE}`);
  expect(told.text).toContain(signPath);

  // Quality & regulatory makes the report and downloads the dossier.
  const quality = await personPage(browser, 'quality');
  await quality.goto(`/labs/${DEMO_LAB.slug}/studies/${studyId}/dossier`);
  await hydrated(quality);
  await quality.getByRole('button', { name: 'Make the report' }).click();
  await expect(quality.getByTestId('report-state')).toContainText('Report ready', { timeout: 120_000 });
  const download = quality.waitForEvent('download');
  await quality.getByRole('link', { name: 'Download the dossier (zip)' }).click();
  const file = await download;
  expect(file.suggestedFilename()).toMatch(/\.zip$/);
  const path = await file.path();
  // A zip file starts with the local file header signature "PK\x03\x04".
  expect(readFileSync(path).subarray(0, 4).toString('latin1')).toBe('PK\u0003\u0004');
});
