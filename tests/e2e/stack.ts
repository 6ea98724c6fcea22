/** Folders of the end-to-end stack, shared by the server script and the tests (to read captured mail). */
import { DATA_DIR } from '../../scripts/local';
import { E2E_PORTS } from './ports';

export const E2E_DIRS = {
  cluster: `${DATA_DIR}/e2e-postgres-${E2E_PORTS.web}`,
  mail: `${DATA_DIR}/e2e-mail-${E2E_PORTS.web}`,
  screenshots: 'test-results/screenshots',
} as const;
