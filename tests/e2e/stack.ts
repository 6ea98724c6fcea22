/** Folders of the end-to-end stack, shared by the server script and the tests (to read captured mail). */
import { DATA_DIR } from '../../scripts/local';

export const E2E_DIRS = {
  cluster: `${DATA_DIR}/e2e-postgres`,
  mail: `${DATA_DIR}/e2e-mail`,
  screenshots: 'test-results/screenshots',
} as const;
