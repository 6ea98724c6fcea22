/// <reference types="vitest/config" />
import { getViteConfig } from 'astro/config';

// Astro's Vite setup, so that code using astro:env runs under vitest as it does in the app.
export default getViteConfig({
  // PostgreSQL clusters, builds and test output hold tens of thousands of files: never watch them.
  server: { watch: { ignored: ['**/.data/**', '**/.builds/**', '**/dist/**', '**/test-results/**', '**/node_modules/**'] } },
  test: {
    projects: [
      {
        extends: true,
        test: { name: 'unit', include: ['tests/unit/**/*.test.ts'] },
      },
      {
        extends: true,
        test: {
          name: 'integration',
          include: ['tests/integration/**/*.test.ts'],
          globalSetup: ['tests/integration/global-setup.ts'],
          fileParallelism: false,
          testTimeout: 30_000,
          hookTimeout: 60_000,
        },
      },
    ],
  },
});
