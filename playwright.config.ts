import { defineConfig } from '@playwright/test';
import { E2E_PORTS } from './tests/e2e/ports';

const baseURL = `http://127.0.0.1:${E2E_PORTS.web}`;

export default defineConfig({
  testDir: 'tests/e2e',
  outputDir: 'test-results/e2e',
  // One server and one database shared by the journeys, which run in order.
  workers: 1,
  fullyParallel: false,
  timeout: 60_000,
  expect: { timeout: 10_000 },
  use: {
    baseURL,
    browserName: 'chromium',
    screenshot: 'only-on-failure',
    launchOptions: {
      // Debian's chromium; nothing is downloaded.
      executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
      args: [
        '--no-sandbox',
        '--disable-gpu',
        '--disable-background-networking',
        '--disable-component-update',
        '--disable-sync',
        '--no-first-run',
        '--disable-quic',
      ],
    },
  },
  projects: [
    { name: 'demo', testMatch: 'demo.setup.ts' },
    { name: 'journeys', testMatch: '**/*.spec.ts', dependencies: ['demo'] },
  ],
  webServer: {
    command: 'npx tsx tests/e2e/server.ts',
    url: `${baseURL}/api/health`,
    reuseExistingServer: false,
    timeout: 180_000,
    stdout: 'pipe',
    stderr: 'pipe',
    gracefulShutdown: { signal: 'SIGTERM', timeout: 20_000 },
  },
});
