import { expect, test, type Page } from '@playwright/test';
import { DEMO_LAB, signInAs } from './helpers';
import { E2E_DIRS } from './stack';

const labPath = `/labs/${DEMO_LAB.slug}`;

/** Presses Tab and checks that focus reached the control with this label. */
async function tabTo(page: Page, label: string | RegExp) {
  await page.keyboard.press('Tab');
  await expect(page.getByLabel(label, { exact: typeof label === 'string' })).toBeFocused();
}

/** Replaces the focused field's text by typing. */
async function retype(page: Page, text: string) {
  await page.keyboard.press('ControlOrMeta+a');
  await page.keyboard.type(text);
}

test('a lab scientist builds a protocol from a template by keyboard and approves it; a technician can only read it', async ({ page, browser }) => {
  const scientist = await signInAs(page, 'lab_scientist');

  // Choose the potassium template and start the draft: focus, type-ahead in the list, Tab, Enter.
  await page.goto(`${labPath}/protocols/new`);
  const startFrom = page.getByLabel('Start from');
  // The button is enabled once the island has hydrated.
  await expect(page.getByRole('button', { name: 'Start the draft' })).toBeEnabled();
  await startFrom.focus();
  await page.keyboard.type('Potassium');
  await expect(startFrom).toHaveValue('potassium');
  await page.keyboard.press('Tab');
  await expect(page.getByRole('button', { name: 'Start the draft' })).toBeFocused();
  await page.keyboard.press('Enter');
  await expect(page).toHaveURL(new RegExp(`${labPath}/protocols/[0-9a-f-]{36}$`));
  const protocolUrl = page.url();

  await expect(page.getByTestId('protocol-designer')).toHaveAttribute('data-ready', 'true');
  await expect(page.getByLabel('Analyte', { exact: true })).toHaveValue('Potassium');

  // Title, then Tab through the analyte fields to the procedures.
  await page.getByLabel('Protocol title').focus();
  await retype(page, 'Serum potassium: second bench analyser');
  await tabTo(page, 'Analyte');
  await tabTo(page, 'Units');
  await tabTo(page, 'Measuring interval from');
  await tabTo(page, 'Measuring interval to');
  await tabTo(page, 'Candidate procedure (the new one)');
  await page.keyboard.type('Bench analyser "Wren", ion-selective electrode, reagent lot K-2611');
  await tabTo(page, 'Comparative procedure (the one in use)');
  await page.keyboard.type('Core analyser "Heron", ion-selective electrode, reagent lot K-2602');

  // Fewer than 40 samples draws the usual-practice warning beside the field; 60 clears it.
  await tabTo(page, 'Patient samples');
  await retype(page, '30');
  const countWarning = page.locator('[data-field-warning="samplePlan.count"]');
  await expect(countWarning).toContainText('at least 40 are usual');
  await retype(page, '60');
  await expect(countWarning).toHaveCount(0);

  // The autosave waits for a pause in typing, then reports its time; the server has the draft.
  const saveStatus = page.getByTestId('save-status');
  await expect(saveStatus).toHaveText('✎ Unsaved changes');
  await expect(saveStatus).toHaveText(/Saved at \d\d:\d\d/);
  const draftApi = new URL(protocolUrl).pathname.replace('/labs/', '/api/labs/');
  const stored = (await (await page.request.get(draftApi)).json()) as { protocol: { versions: { settings: { candidateProcedure: string; samplePlan: { count: number } } }[] } };
  expect(stored.protocol.versions[0].settings).toMatchObject({ candidateProcedure: expect.stringContaining('"Wren"'), samplePlan: { count: 60 } });

  // A cleared rationale stops approval: the error sits beside the field and focus moves there; typing fixes it.
  await page.getByLabel('Why this estimator').focus();
  await page.keyboard.press('ControlOrMeta+a');
  await page.keyboard.press('Backspace');
  await page.getByLabel('Protocol title').focus();
  await page.keyboard.press('Shift+Tab');
  const approve = page.getByRole('button', { name: 'Approve version 1' });
  await expect(approve).toBeFocused();
  await page.keyboard.press('Enter');
  await expect(page.locator('[data-field-error="primaryEstimator.rationale"]')).toContainText('Say why this estimator is the primary one');
  await expect(page.getByLabel('Why this estimator')).toBeFocused();
  await page.keyboard.type('Constant SD over a narrow interval and both procedures with similar imprecision: Deming with λ = 1.');
  await expect(page.locator('[data-field-error="primaryEstimator.rationale"]')).toHaveCount(0);
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/protocol-designer.png`, fullPage: true });

  await page.getByLabel('Protocol title').focus();
  await page.keyboard.press('Shift+Tab');
  await expect(approve).toBeFocused();
  await page.keyboard.press('Enter');
  await expect(page.getByTestId('approved-notice')).toContainText('Version 1 is approved and frozen');
  await expect(page.getByTestId('version-state')).toContainText(`Approved — approved by ${scientist.name}`);
  const versionUrl = new URL(page.url());
  const [, protocolId, versionId] = versionUrl.pathname.match(/protocols\/([0-9a-f-]{36})\/versions\/([0-9a-f-]{36})/) ?? [];
  expect(protocolId && versionId).toBeTruthy();
  await expect(page.getByTestId('view-decision-levels')).toContainText('3.5');

  // The list shows the version and who approved it.
  await page.goto(`${labPath}/protocols`);
  const row = page.getByTestId('protocols-table').getByRole('row', { name: /Serum potassium: second bench analyser/ });
  await expect(row).toContainText('✔ Approved');
  await expect(row).toContainText(scientist.name);

  // Editing the approved protocol starts version 2 as a draft.
  await page.goto(protocolUrl);
  const edit = page.getByRole('button', { name: 'Edit: start version 2 as a draft' });
  await expect(edit).toBeEnabled();
  await edit.focus();
  await page.keyboard.press('Enter');
  await expect(page.getByRole('button', { name: 'Approve version 2' })).toBeEnabled();
  await expect(page.getByLabel('Protocol title')).toHaveValue('Serum potassium: second bench analyser');

  // A save from another window makes this page's draft stale: the 409 is explained, and a reload shows the other save.
  const protocolApi = new URL(protocolUrl).pathname.replace('/labs/', '/api/labs/');
  type Version = { id: string; versionNumber: number; version: number; settings: Record<string, unknown> };
  const current = ((await (await page.request.get(protocolApi)).json()) as { protocol: { versions: Version[] } }).protocol.versions[0];
  expect(current.versionNumber).toBe(2);
  const elsewhere = await page.request.put(`${protocolApi}/versions/${current.id}`, {
    data: { settings: { ...current.settings, title: 'Retitled in another window' }, version: current.version },
  });
  expect(elsewhere.status()).toBe(200);
  await page.getByLabel('Protocol title').focus();
  await page.keyboard.type(' (second version)');
  await expect(page.getByTestId('save-conflict')).toContainText('saved by someone else');
  await expect(page.getByTestId('save-status')).toContainText('Not saved');
  await page.getByRole('button', { name: 'Reload the current draft' }).focus();
  await page.keyboard.press('Enter');
  await expect(page.getByTestId('protocol-designer')).toHaveAttribute('data-ready', 'true');
  await expect(page.getByLabel('Protocol title')).toHaveValue('Retitled in another window');

  // The technician reads the approved version without any editing controls, and the API refuses edits.
  const technicianContext = await browser.newContext();
  const technicianPage = await technicianContext.newPage();
  await signInAs(technicianPage, 'technician');
  await technicianPage.goto(protocolUrl);
  await expect(technicianPage.getByTestId('protocol-view')).toBeVisible();
  await expect(technicianPage.getByTestId('shown-version')).toContainText(`Version 1 · ✔ Approved by ${scientist.name}`);
  await expect(technicianPage.getByTestId('protocol-view')).toContainText('Bench analyser "Wren"');
  const main = technicianPage.locator('main');
  await expect(main.getByRole('textbox')).toHaveCount(0);
  await expect(main.getByRole('spinbutton')).toHaveCount(0);
  await expect(main.getByRole('button')).toHaveCount(0);
  await technicianPage.goto(`${labPath}/protocols`);
  await expect(technicianPage.getByRole('link', { name: 'Write a new protocol' })).toHaveCount(0);

  const api = `/api/labs/${DEMO_LAB.slug}/protocols/${protocolId}`;
  const put = await technicianPage.request.put(`${api}/versions/${versionId}`, { data: { settings: { title: 'changed' }, version: 1 } });
  expect(put.status()).toBe(403);
  expect((await technicianPage.request.post(`${api}/versions/${versionId}/approve`, { data: { version: 1 } })).status()).toBe(403);
  expect((await technicianPage.request.post(`${api}/versions`)).status()).toBe(403);
  const newPage = await technicianPage.goto(`${labPath}/protocols/new`);
  expect(newPage?.status()).toBe(403);
  await technicianContext.close();

  // The scientist thinks better of version 2 and discards it, after a confirmation: the protocol is back at version 1.
  await page.reload();
  await expect(page.getByTestId('protocol-designer')).toHaveAttribute('data-ready', 'true');
  await page.getByRole('button', { name: 'Discard this draft' }).click();
  const confirmation = page.getByTestId('discard-confirm');
  await expect(confirmation).toContainText('Discard version 2? Its changes are lost; the protocol stays at its approved version.');
  await confirmation.getByRole('button', { name: 'Discard', exact: true }).click();
  await expect(page.getByTestId('shown-version')).toContainText(`Version 1 · ✔ Approved by ${scientist.name}`);
  await expect(page.getByTestId('shown-version')).not.toContainText('draft in progress');
  await expect(page.getByTestId('versions-table').locator('tbody tr')).toHaveCount(1);
});
