/**
 * Quality & regulatory makes the report and downloads the dossier of a study the spec sets up itself through the
 * API (the demo's collecting study is left alone): the zip holds the six files and its manifest's hashes match.
 */
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, renameSync } from 'node:fs';
import { expect, test, type APIRequestContext, type Browser, type Page } from '@playwright/test';
import yauzl from 'yauzl';
import { demoPairs } from '../../scripts/demo';
import type { Role } from '../../src/db/schema';
import { DEMO_LAB, signInAs } from './helpers';
import { E2E_DIRS } from './stack';

const TITLE = 'Bench analyser "Avocet" against Heron: dossier journey';
const api = `/api/labs/${DEMO_LAB.slug}`;

async function personPage(browser: Browser, role: Role): Promise<Page> {
  const page = await (await browser.newContext()).newPage();
  await signInAs(page, role);
  return page;
}

async function ok<T>(response: Awaited<ReturnType<APIRequestContext['get']>>, status = 200): Promise<T> {
  expect(response.status(), await response.text()).toBe(status);
  return (await response.json()) as T;
}

/** The entry names and contents of a zip file, read with yauzl. */
function unzip(path: string): Promise<Map<string, Buffer>> {
  return new Promise((resolve, reject) => {
    yauzl.open(path, { lazyEntries: true }, (error, zip) => {
      if (error) return reject(error);
      const files = new Map<string, Buffer>();
      zip.on('error', reject);
      zip.on('end', () => resolve(files));
      zip.on('entry', (entry: yauzl.Entry) => {
        zip.openReadStream(entry, (streamError, stream) => {
          if (streamError) return reject(streamError);
          const chunks: Buffer[] = [];
          stream.on('data', (chunk: Buffer) => chunks.push(chunk));
          stream.on('end', () => {
            files.set(entry.fileName, Buffer.concat(chunks));
            zip.readEntry();
          });
        });
      });
      zip.readEntry();
    });
  });
}

test('quality & regulatory makes the report and downloads it and the dossier: a zip with the six files whose manifest matches', async ({ browser }) => {
  test.setTimeout(240_000);
  const scientist = await personPage(browser, 'lab_scientist');
  const { protocols } = await ok<{ protocols: { title: string; versions: { id: string; status: string }[] }[] }>(await scientist.request.get(`${api}/protocols`));
  const approved = protocols.flatMap((p) => p.versions).find((v) => v.status === 'approved');
  expect(approved, 'the demo has an approved protocol version').toBeTruthy();
  const opened = await ok<{ study: { id: string; version: number } }>(
    await scientist.request.post(`${api}/studies`, {
      data: {
        title: TITLE,
        protocolVersionId: approved!.id,
        candidate: { instrument: 'Bench analyser "Avocet" (serial AV-08)', reagentLot: 'GLU-2612-D', softwareVersion: '3.1' },
        comparative: { instrument: 'Core analyser "Heron" (serial HR-1187)', reagentLot: 'GLU-2609-A', softwareVersion: '7.0.3' },
        technicianIds: [],
      },
    }),
    201,
  );
  const studyId = opened.study.id;
  const base = `${api}/studies/${studyId}`;
  await ok(await scientist.request.post(`${base}/transitions`, { data: { transition: 'start_collecting', version: opened.study.version } }));

  const technician = await personPage(browser, 'technician');
  const upload = demoPairs(30, 4242, false).flatMap((pair) =>
    (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, index) => ({ sampleCode: `AV-${pair.code}`, procedure, replicate: index + 1, value, unit: 'mg/dL', runDate: pair.runDate })),
    ),
  );
  await ok(await technician.request.post(`${base}/results`, { data: { results: upload } }), 201);
  const started = await scientist.request.post(`${base}/analysis`, { data: {} });
  expect([200, 201], await started.text()).toContain(started.status());
  await expect.poll(async () => (await ok<{ bootstrapDone: boolean }>(await scientist.request.get(`${base}/analysis`))).bootstrapDone, { timeout: 120_000, intervals: [500] }).toBe(true);

  // The quality person opens the study's report and dossier page and makes the report.
  const quality = await personPage(browser, 'quality');
  await quality.goto(`/labs/${DEMO_LAB.slug}/studies/${studyId}/dossier`);
  await expect(quality.getByRole('heading', { level: 1 })).toHaveText(TITLE);
  await expect(quality.getByTestId('report-state')).toContainText('No report stored yet');
  await expect(quality.getByTestId('chain-summary')).toContainText('Intact');
  await quality.getByRole('button', { name: 'Make the report' }).click();
  await expect(quality.getByTestId('report-state')).toContainText('Report ready', { timeout: 120_000 });
  await quality.screenshot({ path: `${E2E_DIRS.screenshots}/dossier-page.png`, fullPage: true });

  const reportDownload = quality.waitForEvent('download');
  await quality.getByRole('link', { name: 'Download the report (PDF)' }).click();
  const report = await reportDownload;
  expect(report.suggestedFilename()).toMatch(/^report-.*\.pdf$/);
  const reportPath = await report.path();
  expect(readFileSync(reportPath).subarray(0, 5).toString('latin1')).toBe('%PDF-');
  // The first page as a picture, to look at.
  mkdirSync(E2E_DIRS.screenshots, { recursive: true });
  execFileSync('pdftoppm', ['-png', '-r', '60', '-f', '1', '-l', '1', '-singlefile', reportPath, `${E2E_DIRS.screenshots}/report-page1-tmp`]);
  renameSync(`${E2E_DIRS.screenshots}/report-page1-tmp.png`, `${E2E_DIRS.screenshots}/report-page1.png`);

  const dossierDownload = quality.waitForEvent('download');
  await quality.getByRole('link', { name: 'Download the dossier (zip)' }).click();
  const dossier = await dossierDownload;
  expect(dossier.suggestedFilename()).toMatch(/^dossier-.*\.zip$/);
  const files = await unzip(await dossier.path());
  expect([...files.keys()]).toEqual(['report.pdf', 'results.csv', 'analysis.json', 'protocol.json', 'audit.csv', 'manifest.json']);
  const manifest = JSON.parse(files.get('manifest.json')!.toString('utf8')) as { studyId: string; files: Record<string, { sha256: string; size: number }> };
  expect(manifest.studyId).toBe(studyId);
  for (const [name, entry] of Object.entries(manifest.files)) {
    expect(entry.sha256, name).toBe(createHash('sha256').update(files.get(name)!).digest('hex'));
  }
  // The stored report is the one in the dossier: nothing changed between the two downloads.
  expect(Buffer.compare(files.get('report.pdf')!, readFileSync(reportPath))).toBe(0);
  expect(files.get('results.csv')!.toString('utf8').split('\r\n').filter(Boolean).length).toBe(1 + upload.length);

  // A technician reads the report but has no dossier or report button.
  await technician.goto(`/labs/${DEMO_LAB.slug}/studies/${studyId}/dossier`);
  await expect(technician.getByRole('link', { name: 'Download the report (PDF)' })).toBeVisible();
  await expect(technician.getByRole('link', { name: 'Download the dossier (zip)' })).toHaveCount(0);
  await expect(technician.getByRole('button', { name: /Make the report/ })).toHaveCount(0);
});
