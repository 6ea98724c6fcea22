import { expect, test } from '@playwright/test';
import { E2E_DIRS } from './stack';

test('the start page is styled in Noto Sans with the brand colour, and its island responds', async ({ page, request }) => {
  await page.goto('/');
  const brand = page.getByTestId('brand');
  await expect(brand).toHaveText('Biaswise');

  const fontFamily = await page.evaluate(() => getComputedStyle(document.body).fontFamily);
  expect(fontFamily).toContain('Noto Sans');
  // The font is served by the app itself, not a CDN.
  const fontLoaded = await page.evaluate(async () => {
    await document.fonts.ready;
    return document.fonts.check('16px "Noto Sans"') && [...document.fonts].some((f) => f.family.includes('Noto Sans') && f.status === 'loaded');
  });
  expect(fontLoaded).toBe(true);

  // Tailwind's utility classes are compiled: the header carries the brand's deep blue-green.
  const headerColour = await page.locator('header').evaluate((el) => getComputedStyle(el).backgroundColor);
  expect(headerColour).toBe('rgb(11, 69, 66)');

  const island = page.getByTestId('line-at-level');
  await island.getByLabel('Intercept a').fill('2');
  await island.getByLabel('Slope b').fill('1.05');
  await island.getByLabel('Decision level').fill('100');
  await island.getByRole('button', { name: 'Show the bias' }).click();
  await expect(page.getByTestId('line-at-level-result')).toContainText('higher by 7.00 (7.0 %)');
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/home.png`, fullPage: true });

  const health = await request.get('/api/health');
  expect(health.status()).toBe(200);
  expect(await health.json()).toMatchObject({ status: 'ok', database: { status: 'up' } });
});

test('an unknown address answers 404 with the app page', async ({ page }) => {
  const response = await page.goto('/no/such/page');
  expect(response?.status()).toBe(404);
  await expect(page.getByRole('heading', { level: 1 })).toHaveText('There is nothing at this address');
});
