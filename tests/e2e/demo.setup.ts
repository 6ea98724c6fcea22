import { expect, test as setup } from '@playwright/test';
import { SIGNED_STUDY_TITLE, seedSignedStudy } from '../../scripts/demo-signed';
import { signInAs } from './helpers';

// The same step `npm start` takes on an empty database: the demo's signed study, made through the app itself.
setup('the demo laboratory gets its signed study through the app', async ({ page, baseURL }) => {
  setup.setTimeout(240_000);
  await seedSignedStudy(baseURL!);
  await signInAs(page, 'quality');
  await expect(page.getByTestId('focus-studies')).toContainText(SIGNED_STUDY_TITLE);
  await expect(page.getByTestId('focus-studies')).toContainText('Accepted');
});
