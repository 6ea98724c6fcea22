import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

// Bland & Altman, Lancet 1986: peak expiratory flow (l/min), Wright (comparative) and mini Wright (candidate).
const wright = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427];
const mini = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451];
const pefCsv = ['sample_id,comparative,candidate', ...wright.map((w, i) => `PEF${i + 1},${w},${mini[i]}`)].join('\n') + '\n';

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'analyze-cli-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function run(csv: string, args: string[] = []) {
  const file = join(dir, `input-${Math.random().toString(36).slice(2)}.csv`);
  writeFileSync(file, csv);
  const result = spawnSync('npx', ['tsx', 'scripts/analyze.ts', file, ...args], { encoding: 'utf8', cwd: process.cwd(), timeout: 60_000 });
  return { code: result.status, stdout: result.stdout, stderr: result.stderr };
}

describe('npm run analyze', () => {
  it('--json prints one object of the documented shape', () => {
    const { code, stdout } = run(pefCsv, ['--json', '--decision-levels', '300,450', '--methods', 'ols,deming,huber', '--seed', '3']);
    expect(code).toBe(0);
    const out = JSON.parse(stdout);
    expect(Object.keys(out)).toEqual(['n', 'fits', 'blandAltman', 'diagnostics', 'biasAtDecisionLevels', 'cautions']);
    expect(out.n).toBe(17);
    expect(Object.keys(out.fits)).toEqual(['ols', 'deming', 'huber']);
    expect(out.fits.huber.weights).toHaveLength(17);
    expect(out.fits.deming.weights).toBeUndefined();
    expect(out.fits.ols.slopeCI).toHaveLength(2);
    // Bland & Altman 1986: mean difference 2.1 (mini − Wright), SD 38.8
    expect(out.blandAltman.meanDifference).toBeCloseTo(2.1, 1);
    expect(out.blandAltman.sdDifference).toBeCloseTo(38.8, 1);
    expect(out.diagnostics.hat).toHaveLength(17);
    expect(out.biasAtDecisionLevels.map((r: { level: number }) => r.level)).toEqual([300, 450]);
    expect(out.biasAtDecisionLevels[0].fits.huber.ci).toHaveLength(2);
    expect(out.cautions.some((c: string) => c.includes('17 samples'))).toBe(true);
  }, 60_000);

  it('averages replicate columns and takes λ from them; --lambda overrides', () => {
    const header = 'sample_id,comparative_1,comparative_2,candidate_1,candidate_2';
    const rows = wright.map((w, i) => `R${i + 1},${w - 2},${w + 2},${mini[i] - (i % 3)},${mini[i] + (i % 3)}`);
    const csv = [header, ...rows].join('\n');
    const { code, stdout } = run(csv, ['--json', '--methods', 'ols']);
    expect(code).toBe(0);
    const out = JSON.parse(stdout);
    // the averages are the PEF readings, so the OLS line is that of the PEF data
    const plain = JSON.parse(run(pefCsv, ['--json', '--methods', 'ols']).stdout);
    expect(out.fits.ols.slope).toBeCloseTo(plain.fits.ols.slope, 12);
    const readable = run(csv, ['--methods', 'deming']);
    expect(readable.stdout).toContain('(duplicates)');
    expect(run(csv, ['--methods', 'deming', '--lambda', '2']).stdout).toContain('λ = 2 (given)');
  }, 60_000);

  it('prints a readable summary with the standing caution', () => {
    const { code, stdout } = run(pefCsv, ['--methods', 'ols,passingBablok', '--decision-levels', '450']);
    expect(code).toBe(0);
    expect(stdout).toContain('Passing–Bablok');
    expect(stdout).toContain('Bias at decision levels');
    expect(stdout).toContain("medical director's decision");
  }, 60_000);

  it('names the CSV line of a non-numeric value (header is line 1)', () => {
    const csv = pefCsv.replace('PEF4,434,428', 'PEF4,434,abc');
    const { code, stderr } = run(csv);
    expect(code).not.toBe(0);
    expect(stderr).toContain('line 5');
    expect(stderr).toContain("candidate 'abc' is not a number");
  }, 60_000);

  it('names line 1 for a missing column', () => {
    const { code, stderr } = run('sample_id,comparative\nA,1\nB,2\nC,3\n');
    expect(code).not.toBe(0);
    expect(stderr).toContain("line 1: column 'candidate' is missing");
  }, 60_000);

  it('refuses fewer than 3 pairs, naming the last line', () => {
    const { code, stderr } = run('sample_id,comparative,candidate\nA,1,1.1\nB,2,2.1\n');
    expect(code).not.toBe(0);
    expect(stderr).toContain('line 3: only 2 data rows');
  }, 60_000);

  it('names both lines of a repeated sample id', () => {
    const { code, stderr } = run('sample_id,comparative,candidate\nA,1,1.1\nB,2,2.1\nA,3,3.2\n');
    expect(code).not.toBe(0);
    expect(stderr).toContain("line 4: sample_id 'A' already appears on line 2");
  }, 60_000);

  it('refuses an unknown method with exit code 2', () => {
    const { code, stderr } = run(pefCsv, ['--methods', 'ols,bogus']);
    expect(code).toBe(2);
    expect(stderr).toContain("unknown method 'bogus'");
  }, 60_000);
});
