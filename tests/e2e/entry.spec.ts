/**
 * Entering results in the browser, on a study of its own (the demo's collecting study is left alone): a lab
 * scientist opens a new study and starts collecting; the technician types a dozen pairs by keyboard only, pastes a
 * block copied from a spreadsheet (with decimal commas and one typo), fixes the typo, and imports a CSV file whose
 * columns need mapping.
 */
import AxeBuilder from '@axe-core/playwright';
import { expect, test, type Page } from '@playwright/test';
import { DEMO_LAB, signInAs } from './helpers';
import { E2E_DIRS } from './stack';

const TITLE = 'Bench analyser "Sandpiper" against Heron: entry journey';

/** Invented duplicate pairs: comparative values across the interval, candidate about 3 % higher. */
const typed = Array.from({ length: 12 }, (_, i) => {
  const level = 40 + i * 35;
  return { code: `E2E-${String(i + 1).padStart(2, '0')}`, values: [level, level + 0.6, level * 1.03, level * 1.03 + 0.4].map((v) => v.toFixed(1)), date: `2026-11-${16 + (i % 4)}` };
});

async function typeRow(page: Page, row: (typeof typed)[number]) {
  await page.keyboard.type(row.code);
  for (const value of row.values) {
    await page.keyboard.press('Tab');
    await page.keyboard.type(value);
  }
  await page.keyboard.press('Tab');
  await page.keyboard.type(row.date);
  await page.keyboard.press('Enter');
}

test('a technician types, pastes, fixes and imports paired results', async ({ browser }) => {
  test.setTimeout(180_000);
  const scientist = await (await browser.newContext()).newPage();
  await signInAs(scientist, 'lab_scientist');
  await scientist.goto(`/labs/${DEMO_LAB.slug}/studies/new`);
  await scientist.getByLabel('Title').fill(TITLE);
  await scientist.locator('#f-candidate-instrument').fill('Bench analyser "Sandpiper" (serial SP-0032)');
  await scientist.locator('#f-candidate-reagentLot').fill('GLU-2612-C');
  await scientist.locator('#f-candidate-softwareVersion').fill('1.8.0');
  await scientist.locator('#f-comparative-instrument').fill('Core analyser "Heron" (serial HR-1187)');
  await scientist.locator('#f-comparative-reagentLot').fill('GLU-2609-A');
  await scientist.locator('#f-comparative-softwareVersion').fill('7.0.3');
  await scientist.getByRole('button', { name: 'Open the study' }).click();
  await expect(scientist.getByTestId('study-state')).toContainText('Draft');
  await scientist.getByRole('button', { name: 'Start collecting results' }).click();
  await expect(scientist.getByTestId('study-state')).toContainText('Collecting results');
  const studyUrl = new URL(scientist.url()).pathname;
  // The scientist sees the grid read-only.
  await expect(scientist.getByTestId('entry-grid')).toContainText('Read-only');

  const context = await browser.newContext();
  await context.grantPermissions(['clipboard-read', 'clipboard-write']);
  const page = await context.newPage();
  await signInAs(page, 'technician');
  await page.goto(studyUrl);
  const grid = page.getByTestId('entry-grid');
  const rows = grid.getByTestId('grid-row');

  // A dozen pairs, keyboard only: Tab across a row, Enter back to the first column of the next row.
  await expect(page.getByLabel('new row 1: sample code')).toBeEnabled();
  await page.getByLabel('new row 1: sample code').focus();
  for (const [i, row] of typed.entries()) {
    await typeRow(page, row);
    await expect(page.getByLabel(`new row ${i + 2}: sample code`)).toBeFocused();
  }
  await expect(rows.filter({ has: page.getByText('✔ Saved') })).toHaveCount(12);
  await expect(page.getByTestId('coverage-samples')).toContainText('12');

  // A block copied from a spreadsheet: tab-separated, decimal commas, one typo ("7O,2" with a letter O).
  const block = ['E2E-13\t61,2\t61,5\t63,3\t63,0\t2026-11-19', 'E2E-14\t7O,2\t70,8\t72,9\t73,1\t2026-11-19', 'E2E-15\t333,0\t331,9\t343,2\t342,5\t2026-11-19'].join('\r\n') + '\r\n';
  await page.evaluate((text) => navigator.clipboard.writeText(text), block);
  await page.getByLabel('new row 13: sample code').focus();
  await page.keyboard.press('ControlOrMeta+V');
  const typo = page.getByLabel('E2E-14: comparative replicate 1');
  await expect(typo).toHaveAttribute('aria-invalid', 'true');
  await expect(rows.filter({ hasText: 'Fix the marked cells' })).toHaveCount(1);
  await expect(rows.filter({ has: page.getByText('✔ Saved') })).toHaveCount(14);

  // Fix the typo by keyboard: Escape-free overwrite (the cell's text is selected on focus), Enter to leave the row.
  await typo.focus();
  await page.keyboard.type('70,2');
  await expect(typo).not.toHaveAttribute('aria-invalid', 'true');
  await page.keyboard.press('Enter');
  await expect(rows.filter({ has: page.getByText('✔ Saved') })).toHaveCount(15);
  await expect(page.getByLabel('E2E-14: comparative replicate 1')).toHaveValue('70.2');
  await expect(page.getByTestId('coverage-samples')).toContainText('15');

  // A CSV whose columns need mapping: the guesses find the code column; the technician maps the rest.
  const importer = page.getByTestId('csv-import');
  await expect(importer.getByLabel('CSV file')).toBeEnabled();
  await importer.getByLabel('CSV file').setInputFiles('tests/fixtures/csv/e2e-mapping.csv');
  // The worker starts and reads the file off the main thread; a busy machine may take a while.
  await expect(importer.getByTestId('csv-mapping')).toContainText('3 data rows, separated by semicolon, with decimal commas', { timeout: 30_000 });
  await expect(importer.getByLabel('Sample code')).toHaveValue('Specimen');
  await importer.getByLabel('Comparative replicate 1').selectOption('Ref A');
  await importer.getByLabel('Comparative replicate 2').selectOption('Ref B');
  await importer.getByLabel('Candidate replicate 1').selectOption('New A');
  await importer.getByLabel('Candidate replicate 2').selectOption('New B');
  await importer.getByLabel('Run date').selectOption('Day');
  await expect(importer.getByTestId('csv-preview')).toContainText('E2E-CSV-2');
  await expect(importer.getByTestId('import-problems')).toHaveCount(0);
  await importer.getByRole('button', { name: 'Import 3 rows' }).click();
  await expect(importer).toContainText('Imported 3 rows: 3 new samples');
  await expect(rows.filter({ has: page.getByText('✔ Saved') })).toHaveCount(18);
  await expect(page.getByLabel('E2E-CSV-2: comparative replicate 1')).toHaveValue('245.1');
  await expect(page.getByTestId('coverage-samples')).toContainText('18');

  // A row entered by mistake is removed by keyboard (Ctrl+Delete in the row), with a reason; coverage follows.
  await page.getByLabel('E2E-CSV-3: sample code').focus();
  await page.keyboard.press('Control+Delete');
  const removal = page.getByRole('dialog');
  await expect(removal).toContainText('Remove sample E2E-CSV-3?');
  await page.keyboard.type('Specimen belongs to another study');
  await page.keyboard.press('Enter');
  await expect(page.getByLabel('E2E-CSV-3: sample code')).toHaveCount(0);
  await expect(rows.filter({ has: page.getByText('✔ Saved') })).toHaveCount(17);
  await expect(page.getByTestId('coverage-samples')).toContainText('17');

  // The study page with its grid, coverage and import has no serious accessibility violations (axe-core, WCAG 2.1 AA).
  const axe = await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze();
  expect(axe.violations.filter((v) => v.impact === 'serious' || v.impact === 'critical').map((v) => `${v.id}: ${v.nodes.map((n) => n.target.join(' ')).slice(0, 3).join(', ')}`)).toEqual([]);

  await grid.screenshot({ path: `${E2E_DIRS.screenshots}/entry-grid.png` });
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/entry-study.png`, fullPage: true });

  // The same row edited in two tabs: the later save is refused, both values are shown, and the technician chooses.
  const other = await (await browser.newContext()).newPage();
  await signInAs(other, 'technician');
  await other.goto(studyUrl);
  await expect(other.getByLabel('E2E-01: comparative replicate 1')).toHaveValue('40.0');
  await expect(other.getByLabel('E2E-01: comparative replicate 1')).toBeEnabled();

  const changeWithReason = async (tab: Page, value: string, reason: string) => {
    await tab.getByLabel('E2E-01: comparative replicate 1').focus();
    await tab.keyboard.type(value);
    await tab.keyboard.press('Enter');
    await expect(tab.getByRole('dialog')).toContainText('comparative replicate 1');
    await tab.keyboard.type(reason);
    await tab.keyboard.press('Enter');
  };
  await changeWithReason(page, '41', 'Re-read the analyser printout');
  await expect(rows.first()).toContainText('✔ Saved');
  await changeWithReason(other, '42', 'Transcription check');
  const conflict = other.getByTestId('conflict');
  await expect(conflict).toContainText('saved by someone else');
  await expect(conflict.getByRole('row', { name: /^Saved/ })).toContainText('41');
  await expect(conflict.getByRole('row', { name: /^Yours/ })).toContainText('42');
  await other.getByTestId('entry-grid').screenshot({ path: `${E2E_DIRS.screenshots}/entry-conflict.png` });
  await conflict.getByRole('button', { name: 'Keep the saved values' }).click();
  await expect(conflict).toHaveCount(0);
  await expect(other.getByLabel('E2E-01: comparative replicate 1')).toHaveValue('41.0');
});
