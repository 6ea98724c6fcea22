import AxeBuilder from '@axe-core/playwright';
import { expect, test, type Page } from '@playwright/test';
import type { Role } from '../../src/db/schema';
import { DEMO_LAB, signInAs } from './helpers';

/** No serious or critical violations (axe-core's WCAG 2.x A and AA rules). */
async function expectAccessible(page: Page) {
  const results = await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze();
  const serious = results.violations.filter((v) => v.impact === 'serious' || v.impact === 'critical');
  expect(serious.map((v) => `${v.id}: ${v.help} (${v.nodes.map((n) => n.target.join(' ')).join(', ')})`)).toEqual([]);
}

test('public pages have no serious accessibility violations', async ({ page }) => {
  for (const path of ['/', '/sign-in', '/sign-up', '/forgot-password', '/no/such/page']) {
    await page.goto(path);
    await expectAccessible(page);
  }
});

const LAB_PAGES: { role: Role; paths: string[] }[] = [
  { role: 'lab_admin', paths: ['', '/members', '/tokens', '/audit', '/mailbox'] },
  { role: 'technician', paths: ['', '/protocols', '/studies'] },
];

for (const { role, paths } of LAB_PAGES) {
  test(`${role}: laboratory pages have no serious accessibility violations`, async ({ page }) => {
    await signInAs(page, role);
    for (const path of paths) {
      await page.goto(`/labs/${DEMO_LAB.slug}${path}`);
      await page.waitForLoadState('networkidle');
      await expectAccessible(page);
    }
  });
}
