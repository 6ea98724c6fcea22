/** Shared steps of the browser journeys: sign in as a demo person, read captured mail. */
import { expect, type Page } from '@playwright/test';
import { DEMO_PASSWORD, DEMO_PEOPLE, DEMO_LAB } from '../../scripts/demo';
import { readCapturedMail } from '../../src/server/mailbox';
import type { Role } from '../../src/db/schema';
import { E2E_DIRS } from './stack';

export { DEMO_LAB, DEMO_PASSWORD };

export function demoPerson(role: Role) {
  const person = DEMO_PEOPLE.find((p) => p.role === role);
  if (!person) throw new Error(`no demo person with role ${role}`);
  return person;
}

/**
 * Fills and submits the sign-in form already on the page (once its island is live: before that its button is
 * disabled), by keyboard, as the demo person with that role.
 */
export async function submitSignIn(page: Page, role: Role) {
  const person = demoPerson(role);
  await expect(page.getByRole('button', { name: 'Sign in' })).toBeEnabled();
  await page.getByLabel('E-mail').fill(person.email);
  await page.getByLabel('Password').fill(DEMO_PASSWORD);
  await page.getByLabel('Password').press('Enter');
  return person;
}

/** Signs in through the sign-in page and waits for the laboratory's start page. */
export async function signInAs(page: Page, role: Role) {
  await page.goto('/sign-in');
  const person = await submitSignIn(page, role);
  await expect(page).toHaveURL(new RegExp(`/labs/${DEMO_LAB.slug}$`));
  return person;
}

export async function waitForMail(address: string, subjectIncludes: string, timeoutMs = 10_000) {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const found = (await readCapturedMail(E2E_DIRS.mail)).filter((m) => m.to.includes(address.toLowerCase()) && m.subject.includes(subjectIncludes));
    if (found.length > 0) return found[found.length - 1];
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`No mail to ${address} with "${subjectIncludes}" within ${timeoutMs} ms`);
}
