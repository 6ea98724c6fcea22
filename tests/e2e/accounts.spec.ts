import { expect, test } from '@playwright/test';
import { DEMO_LAB, signInAs, waitForMail } from './helpers';
import { E2E_DIRS } from './stack';

test('a newcomer is invited, signs up, confirms the address from the e-mail, joins, and gets the role menu', async ({ browser }) => {
  const email = `newcomer-${Date.now()}@eastmere.example`;

  // The administrator invites the newcomer as a technician.
  const adminContext = await browser.newContext();
  const admin = await adminContext.newPage();
  await signInAs(admin, 'lab_admin');
  await admin.getByRole('link', { name: 'Members' }).click();
  await expect(admin.getByTestId('members-table')).toContainText('Luis Pereira');
  await admin.getByLabel('E-mail address').fill(email);
  await admin.getByLabel('Role', { exact: true }).selectOption('technician');
  await admin.getByRole('button', { name: 'Send the invitation' }).click();
  await expect(admin.getByRole('status')).toContainText(`Invitation sent to ${email}`);
  await adminContext.close();

  // The newcomer follows the invitation, creates an account and confirms the address.
  const invitation = await waitForMail(email, `You are invited to ${DEMO_LAB.name}`);
  const invitationLink = invitation.text.match(/http\S+\/invitations\/\S+/)![0];
  const context = await browser.newContext();
  const page = await context.newPage();
  await page.goto(invitationLink);
  await expect(page.getByRole('heading', { name: `Join ${DEMO_LAB.name}` })).toBeVisible();
  await page.getByRole('link', { name: 'Create an account' }).click();
  await expect(page.getByLabel('E-mail')).toHaveValue(email);
  await page.getByLabel('Full name').fill('Robin Ashdown');
  await page.getByLabel('Password', { exact: true }).fill('a-long-password-1');
  await page.getByLabel('Password again').fill('a-long-password-1');
  await page.getByRole('button', { name: 'Create the account' }).click();
  await expect(page.getByRole('status')).toContainText(`We sent a confirmation link to ${email}`);

  const confirmation = await waitForMail(email, 'Confirm your e-mail address');
  await page.goto(confirmation.text.match(/http\S+verify-email\S+/)![0]);
  // Confirmed and signed in, back on the invitation.
  await expect(page.getByRole('button', { name: `Join ${DEMO_LAB.name}` })).toBeVisible();
  await page.getByRole('button', { name: `Join ${DEMO_LAB.name}` }).click();

  await expect(page).toHaveURL(new RegExp(`/labs/${DEMO_LAB.slug}$`));
  await expect(page.getByRole('heading', { level: 1 })).toHaveText(DEMO_LAB.name);
  await expect(page.getByText('Studies collecting results')).toBeVisible();
  const menu = page.getByTestId('lab-menu');
  await expect(menu.getByRole('link')).toHaveText(['Overview', 'Protocols', 'Studies', 'Audit trail']);
  await expect(page.getByTestId('signed-in-as')).toHaveText('Robin Ashdown');
  await page.screenshot({ path: `${E2E_DIRS.screenshots}/joined-lab-home.png`, fullPage: true });
  await context.close();
});

test('a wrong password is refused with a clear message', async ({ page }) => {
  await page.goto('/sign-in');
  await page.getByLabel('E-mail').fill('quality@eastmere.example');
  await page.getByLabel('Password').fill('not-the-password');
  await page.getByRole('button', { name: 'Sign in' }).click();
  await expect(page.getByRole('alert')).toContainText('The e-mail address or the password is not right.');
});
