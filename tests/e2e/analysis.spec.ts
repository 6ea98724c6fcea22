import { expect, test } from '@playwright/test';
import { DEMO_SPECIAL_SAMPLES } from '../../scripts/demo';
import { DEMO_LAB, signInAs } from './helpers';
import { E2E_DIRS } from './stack';

const STUDY_TITLE = 'Kestrel bench analyser against Heron: plasma glucose';
const REASON = 'Candidate reads a third low against both duplicates; tube mix-up suspected at the bench';

test('a lab scientist runs the analysis of the demo study, reads the leverage caution, excludes a discordant sample with a reason, and sees the verdicts and the audit trail change', async ({ page }) => {
  test.setTimeout(180_000);
  await signInAs(page, 'lab_scientist');
  const listed = await page.request.get(`/api/labs/${DEMO_LAB.slug}/studies`);
  expect(listed.status()).toBe(200);
  const study = (await listed.json()).studies.find((s: { title: string }) => s.title === STUDY_TITLE);
  expect(study).toBeTruthy();

  await page.setViewportSize({ width: 1600, height: 1000 });
  await page.goto(`/labs/${DEMO_LAB.slug}/studies/${study.id}/analysis`);
  await expect(page.getByRole('heading', { level: 1 })).toContainText(STUDY_TITLE);
  const cautions = page.getByTestId('cautions-panel');
  await expect(cautions.getByTestId('standing-caution')).toContainText("medical director's decision");
  await page.getByRole('button', { name: /^Run the analysis/ }).click();

  // The far-out sample is named by the high-leverage caution, shown above the plots.
  const leverage = cautions.locator('[data-caution="high-leverage"]');
  await expect(leverage).toContainText(DEMO_SPECIAL_SAMPLES.highLeverage);
  const panelBox = await cautions.boundingBox();
  const plotsBox = await page.getByTestId('analysis-plots').boundingBox();
  expect(panelBox!.y).toBeLessThan(plotsBox!.y);
  await expect(page.getByTestId('bootstrap-status')).toContainText('Bootstrap intervals done', { timeout: 120_000 });
  await expect(page.getByTestId('run-currency')).toContainText('Current');

  const verdicts = page.getByTestId('decision-table');
  await expect(verdicts.locator('[data-verdict]').first()).toBeVisible();
  await expect(verdicts).toContainText('★ primary');
  const before = await verdicts.innerText();
  // The difference plot switches to percent differences, and its data table lists every sample.
  const differences = page.getByTestId('plot-difference');
  await differences.getByLabel('Percent').check();
  await expect(differences).toContainText('Difference (% of mean)');
  await differences.getByText('Data table').click();
  await expect(differences.locator('tbody tr')).toHaveCount(60);
  await differences.getByLabel(/Absolute/).check();
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/analysis-workspace.png`, fullPage: true });

  // Selecting the discordant sample highlights it in every plot and opens its detail.
  const discordant = DEMO_SPECIAL_SAMPLES.discordant[1];
  await page.getByTestId('sample-picker').selectOption(discordant);
  await expect(page.getByTestId('plot-highlight')).toHaveCount(5);
  const detail = page.getByTestId('sample-detail');
  await expect(detail).toContainText(`Sample ${discordant}`);
  await expect(detail.getByTestId('sample-fits')).toContainText('Passing–Bablok');
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/analysis-sample-detail.png`, fullPage: true });

  // A reason is required.
  await detail.getByRole('button', { name: 'Exclude from the analysis' }).click();
  await expect(detail.getByRole('alert')).toContainText('Give a reason');
  await detail.getByLabel(`Reason to exclude ${discordant}`).fill(REASON);
  await detail.getByRole('button', { name: 'Exclude from the analysis' }).click();
  await expect(page.getByRole('status').filter({ hasText: `${discordant} is excluded` })).toBeVisible({ timeout: 30_000 });
  await expect(page.getByTestId('excluded-samples')).toContainText(`${discordant} — ✖ Excluded: ${REASON}`);
  await expect(detail).toContainText('✖ Excluded');
  await expect(detail.getByTestId('sample-history')).toContainText(REASON);
  await expect(page.getByTestId('bootstrap-status')).toContainText('Bootstrap intervals done', { timeout: 120_000 });
  await expect(page.getByTestId('run-currency')).toContainText('Current');
  await expect.poll(() => verdicts.innerText()).not.toBe(before);
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/analysis-after-exclusion.png`, fullPage: true });

  // The audit trail carries the exclusion with its reason, and the runs.
  await page.goto(`/labs/${DEMO_LAB.slug}/audit`);
  const audit = page.getByTestId('audit-table');
  await expect(audit).toContainText('sample.excluded');
  await expect(audit).toContainText(REASON);
  await expect(audit).toContainText('analysis.run');
});

test('a medical director reads the analysis without run or exclude controls', async ({ page }) => {
  await signInAs(page, 'medical_director');
  const study = (await (await page.request.get(`/api/labs/${DEMO_LAB.slug}/studies`)).json()).studies.find((s: { title: string }) => s.title === STUDY_TITLE);
  await page.goto(`/labs/${DEMO_LAB.slug}/studies/${study.id}/analysis`);
  await expect(page.getByTestId('standing-caution')).toBeVisible();
  await expect(page.getByTestId('run-status')).toBeVisible();
  await expect(page.getByRole('button', { name: /Run the analysis/ })).toHaveCount(0);
  await expect(page.getByText('read only')).toBeVisible();
  // The run of the journey above is there to read; its samples can be inspected but not excluded.
  await page.getByTestId('sample-picker').selectOption(DEMO_SPECIAL_SAMPLES.discordant[0]);
  await expect(page.getByTestId('sample-detail')).toContainText(`Sample ${DEMO_SPECIAL_SAMPLES.discordant[0]}`);
  await expect(page.getByRole('button', { name: /Exclude from the analysis|Include in the analysis/ })).toHaveCount(0);
});
