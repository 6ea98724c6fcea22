/**
 * `npm test`: a production build; vitest (unit, and integration against the built server on a throwaway
 * PostgreSQL cluster); the Playwright journeys in Debian's chromium; then one summary line for all suites.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, rmSync } from 'node:fs';
import { ROOT } from './local';

const RESULTS = `${ROOT}test-results`;
rmSync(RESULTS, { recursive: true, force: true });
mkdirSync(`${RESULTS}/screenshots`, { recursive: true });

function run(command: string, args: string[], env: Record<string, string> = {}) {
  console.log(`\n$ ${command} ${args.join(' ')}`);
  return spawnSync(command, args, { cwd: ROOT, stdio: 'inherit', env: { ...process.env, ...env } }).status ?? 1;
}

function readJson(file: string): Record<string, any> | null {
  return existsSync(file) ? JSON.parse(readFileSync(file, 'utf8')) : null;
}

// Integration and browser tests both talk to the built server.
const buildStatus = run('npx', ['astro', 'build']);
const vitestStatus = run('npx', ['vitest', 'run', '--reporter=default', '--reporter=json', `--outputFile.json=${RESULTS}/vitest.json`]);
const vitest = readJson(`${RESULTS}/vitest.json`);

const e2eStatus =
  buildStatus === 0
    ? run('npx', ['playwright', 'test', '--reporter=list,json'], { PLAYWRIGHT_JSON_OUTPUT_NAME: `${RESULTS}/playwright.json` })
    : 1;
const e2e = readJson(`${RESULTS}/playwright.json`);

const suites = [
  {
    name: 'vitest',
    passed: vitest?.numPassedTests ?? 0,
    // A test file that fails before any test runs (an import error, say) counts as one failure.
    failed:
      (vitest?.numFailedTests ?? 0) +
      (vitest?.testResults ?? []).filter((file: any) => file.status === 'failed' && file.assertionResults.length === 0).length,
    ok: vitestStatus === 0 && !!vitest,
  },
  {
    name: 'playwright',
    passed: (e2e?.stats?.expected ?? 0) + (e2e?.stats?.flaky ?? 0),
    failed: e2e?.stats?.unexpected ?? 0,
    ok: e2eStatus === 0 && !!e2e,
  },
];
console.log('');
for (const s of suites) console.log(`${s.name}: ${s.passed} passed, ${s.failed} failed${s.ok ? '' : ' (suite did not complete cleanly)'}`);
if (buildStatus !== 0) console.log('The production build failed, so the browser tests did not run.');
// A suite that crashed without reporting counts as one failure, so the total never reads green by accident.
const passed = suites.reduce((sum, s) => sum + s.passed, 0);
const failed = suites.reduce((sum, s) => sum + s.failed + (s.ok || s.failed > 0 ? 0 : 1), 0);
console.log(`${passed} passed, ${failed} failed`);
process.exit(failed === 0 && suites.every((s) => s.ok) ? 0 : 1);
