import { describe, expect, it } from 'vitest';
import { ENGINE_VERSION, analyzeComparison, analyzeComparisonInSteps, compactAnalysis, type AnalysisProgress, type ComparisonInput } from '../../../../src/lib/stats/index';
import { StatsInputError } from '../../../../src/lib/stats/errors';

// Bland & Altman, Lancet 1986: peak expiratory flow (l/min), first readings, Wright (comparative) and mini Wright
// (candidate) meters. Published: mean difference Wright − mini −2.1, SD 38.8.
const wright = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427];
const mini = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451];
const pef: ComparisonInput = {
  sampleIds: wright.map((_, i) => `PEF${i + 1}`),
  comparative: wright,
  candidate: mini,
};

/** Built for these tests: 40 samples spread evenly over 20–380 with small, level-independent differences. */
function cleanStudy(): ComparisonInput {
  const comparative = Array.from({ length: 40 }, (_, i) => 20 + (360 * i) / 39);
  const candidate = comparative.map((v, i) => v + 0.6 * Math.sin(2.3 * i));
  return { sampleIds: comparative.map((_, i) => `C${String(i + 1).padStart(2, '0')}`), comparative, candidate };
}

describe('analyzeComparison on the Bland & Altman (1986) data', () => {
  const analysis = analyzeComparison({ ...pef, decisionLevels: [300, 450, 600], bootstrap: { resamples: 500 } });

  it('reports every default estimator, λ = 1 by default and the engine version', () => {
    expect(Object.keys(analysis.fits)).toEqual(['ols', 'deming', 'passingBablok', 'huber', 'tukey', 'hampel', 'mm']);
    expect(analysis.lambda).toEqual({ value: 1, source: 'default' });
    expect(analysis.engineVersion).toBe(ENGINE_VERSION);
    expect(analysis.n).toBe(17);
  });

  it('Bland–Altman matches the paper: mean difference 2.1 (candidate − comparative), SD 38.8', () => {
    expect(analysis.blandAltman.absolute.meanDifference).toBeCloseTo(2.1, 1);
    expect(analysis.blandAltman.absolute.sdDifference).toBeCloseTo(38.8, 1);
  });

  it('gives every fit a bias with a CI at every level: closed form for OLS and Deming, BCa for the others', () => {
    for (const row of analysis.biasAtDecisionLevels) {
      expect(row.fits.ols?.ciMethod).toBe('closed-form');
      expect(row.fits.deming?.ciMethod).toBe('closed-form');
      for (const m of ['passingBablok', 'huber', 'tukey', 'hampel', 'mm'] as const) {
        const entry = row.fits[m];
        expect(entry?.ciMethod).toBe('bootstrap-bca');
        expect(entry?.ci?.[0]).toBeLessThanOrEqual(entry!.bias);
        expect(entry?.ci?.[1]).toBeGreaterThanOrEqual(entry!.bias);
      }
    }
  });

  it('names the 17-sample shortfall as a caution and always carries the standing caution', () => {
    expect(analysis.cautions.map((c) => c.code)).toContain('fewer-than-40');
    expect(analysis.standingCaution).toContain('medical director');
  });

  it('is plain JSON and deterministic for a seed', () => {
    const again = analyzeComparison({ ...pef, decisionLevels: [300, 450, 600], bootstrap: { resamples: 500 } });
    expect(JSON.stringify(again)).toBe(JSON.stringify(analysis));
    expect(JSON.parse(JSON.stringify(analysis))).toStrictEqual(analysis);
    const otherSeed = analyzeComparison({ ...pef, decisionLevels: [300, 450, 600], bootstrap: { resamples: 500 }, seed: 2 });
    expect(otherSeed.biasAtDecisionLevels[0].fits.huber?.ci).not.toEqual(analysis.biasAtDecisionLevels[0].fits.huber?.ci);
  });

  it('compactAnalysis has exactly the CLI shape', () => {
    const compact = compactAnalysis(analysis);
    expect(Object.keys(compact)).toEqual(['n', 'fits', 'blandAltman', 'diagnostics', 'biasAtDecisionLevels', 'cautions']);
    expect(Object.keys(compact.fits.ols!)).toEqual(['intercept', 'slope', 'interceptCI', 'slopeCI', 'scale']);
    expect(Object.keys(compact.fits.huber!)).toEqual(['intercept', 'slope', 'interceptCI', 'slopeCI', 'scale', 'iterations', 'converged', 'weights']);
    expect(Object.keys(compact.diagnostics)).toEqual(['hat', 'studentizedResiduals', 'cooksDistance']);
    expect(Object.keys(compact.biasAtDecisionLevels[0].fits.mm!)).toEqual(['bias', 'percentBias', 'ci']);
    expect(compact.cautions.every((c) => typeof c === 'string')).toBe(true);
  });
});

describe('analyzeComparison settings', () => {
  it('estimates λ from duplicates as Σ(y₁ − y₂)²/Σ(x₁ − x₂)² (Cornbleet & Gochman 1979)', () => {
    const study = cleanStudy();
    const comparative: [number, number][] = study.comparative.map((v, i) => [v - 0.3 * Math.cos(i), v + 0.3 * Math.cos(i)]);
    const candidate: [number, number][] = study.candidate.map((v, i) => [v - 0.5 * Math.sin(3 * i + 1), v + 0.5 * Math.sin(3 * i + 1)]);
    const expected =
      candidate.reduce((s, [a, b]) => s + (a - b) ** 2, 0) / comparative.reduce((s, [a, b]) => s + (a - b) ** 2, 0);
    const analysis = analyzeComparison({ ...study, replicates: { comparative, candidate }, methods: ['deming'] });
    expect(analysis.lambda.source).toBe('duplicates');
    expect(analysis.lambda.value).toBeCloseTo(expected, 12);
    expect(analyzeComparison({ ...study, replicates: { comparative, candidate }, lambda: 2, methods: ['deming'] }).lambda).toEqual({ value: 2, source: 'given' });
  });

  it('verdicts: within for a close candidate, beyond for a 20 % proportional bias', () => {
    const study = cleanStudy();
    const allowable = { absolute: 6, percent: 10, rule: 'larger' } as const;
    const close = analyzeComparison({ ...study, decisionLevels: [100, 300], allowable, bootstrap: { resamples: 200 } });
    for (const row of close.biasAtDecisionLevels) {
      expect(row.allowableLimit).toBe(Math.max(6, row.level / 10));
      for (const entry of Object.values(row.fits)) expect(entry?.verdict).toBe('within');
    }
    const biased = analyzeComparison({ ...study, candidate: study.candidate.map((v) => 1.2 * v), decisionLevels: [300], allowable, bootstrap: { resamples: 200 } });
    for (const entry of Object.values(biased.biasAtDecisionLevels[0].fits)) expect(entry?.verdict).toBe('beyond');
  });

  it('without the bootstrap only closed-form fits get a CI', () => {
    const analysis = analyzeComparison({ ...cleanStudy(), decisionLevels: [200], bootstrap: false });
    expect(analysis.biasAtDecisionLevels[0].fits.ols?.ci).toBeDefined();
    expect(analysis.biasAtDecisionLevels[0].fits.mm?.ci).toBeUndefined();
    expect(analysis.bootstrap).toBeNull();
  });

  it("the ESD screen follows the caller's α and largest share of outliers", () => {
    const defaults = analyzeComparison({ ...cleanStudy(), bootstrap: false });
    expect(defaults.esd).toMatchObject({ alpha: 0.05, maxOutliers: 1 });
    const policy = analyzeComparison({ ...cleanStudy(), bootstrap: false, outliers: { alpha: 0.01, maxShare: 0.1 } });
    expect(policy.esd).toMatchObject({ alpha: 0.01, maxOutliers: 4 });
    expect(() => analyzeComparison({ ...cleanStudy(), outliers: { alpha: 1.5 } })).toThrow(/alpha/);
  });

  it('rejects bad input with StatsInputError naming the field', () => {
    const study = cleanStudy();
    expect(() => analyzeComparison({ ...study, sampleIds: study.sampleIds.slice(1) })).toThrow(/sampleIds/);
    expect(() => analyzeComparison({ ...study, sampleIds: study.sampleIds.map(() => 'same') })).toThrow(/repeats the id 'same'/);
    expect(() => analyzeComparison({ ...study, methods: ['ols', 'nonsense' as never] })).toThrow(/methods\[1\]/);
    expect(() => analyzeComparison({ ...study, decisionLevels: [100, 200], allowable: [{ percent: 5, rule: 'percent' }] })).toThrow(StatsInputError);
    expect(() => analyzeComparison({ ...study, candidate: study.candidate.map((v, i) => (i === 4 ? Number.NaN : v)) })).toThrow(/y\[4\]/);
  });
});

describe('analyzeComparison cautions', () => {
  it('clean data raise no data-driven caution', () => {
    const analysis = analyzeComparison({ ...cleanStudy(), decisionLevels: [100, 300], bootstrap: { resamples: 200 } });
    expect(analysis.cautions).toEqual([]);
  });

  it('a discordant candidate value is named by the down-weighting and the ESD cautions', () => {
    const study = cleanStudy();
    study.candidate[17] += 40;
    const analysis = analyzeComparison({ ...study, bootstrap: false });
    const downWeighted = analysis.cautions.find((c) => c.code === 'heavily-down-weighted');
    expect(downWeighted?.sampleIds).toEqual(['C18']);
    expect(analysis.cautions.find((c) => c.code === 'esd-outliers')?.sampleIds).toEqual(['C18']);
    expect(analysis.esd.outlierSampleIds).toEqual(['C18']);
  });

  it('a sample far out in x is named as high leverage; a decision level beyond the data as extrapolation', () => {
    const study = cleanStudy();
    study.comparative[39] = 1500;
    study.candidate[39] = 1501;
    const analysis = analyzeComparison({ ...study, decisionLevels: [2000], bootstrap: false });
    expect(analysis.cautions.find((c) => c.code === 'high-leverage')?.sampleIds).toEqual(['C40']);
    expect(analysis.cautions.find((c) => c.code === 'decision-level-outside-range')?.message).toContain('2000');
  });

  it('negatively related procedures: Passing–Bablok fails with a reason and its assumption caution still fires', () => {
    const study = cleanStudy();
    const analysis = analyzeComparison({ ...study, candidate: study.comparative.map((v, i) => 400 - v + 0.6 * Math.sin(2.3 * i)), bootstrap: false });
    const codes = analysis.cautions.map((c) => c.code);
    expect(codes).toContain('passing-bablok-negative-correlation');
    expect(analysis.fitErrors.passingBablok).toBeDefined();
    expect(codes).toContain('method-failed');
  });

  it('plan and exclusions: fewer than planned, poor spread against the plan interval, more than 2.5 % excluded', () => {
    const analysis = analyzeComparison({
      ...cleanStudy(),
      plan: { plannedCount: 60, measuringInterval: [0, 1200] },
      excludedCount: 3,
      bootstrap: false,
    });
    const codes = analysis.cautions.map((c) => c.code);
    expect(codes).toEqual(expect.arrayContaining(['fewer-than-planned', 'poor-spread', 'many-excluded']));
    expect(analysis.cautions.find((c) => c.code === 'many-excluded')?.message).toContain('3 of 43');
  });
});

describe('analyzeComparisonInSteps', () => {
  it('stops before each bootstrap in turn and ends with the same analysis as analyzeComparison', () => {
    const input: ComparisonInput = { ...pef, decisionLevels: [300, 450], bootstrap: { resamples: 200 } };
    const steps = analyzeComparisonInSteps(input);
    const seen: AnalysisProgress[] = [];
    let step = steps.next();
    while (!step.done) {
      seen.push(step.value);
      step = steps.next();
    }
    expect(seen.map((p) => p.method)).toEqual(['passingBablok', 'huber', 'tukey', 'hampel', 'mm']);
    expect(seen.map((p) => p.done)).toEqual([0, 1, 2, 3, 4]);
    expect(seen.every((p) => p.total === 5)).toBe(true);
    expect(step.value).toEqual(analyzeComparison(input));
  });

  it('without a bootstrap there is nothing to wait for', () => {
    const steps = analyzeComparisonInSteps({ ...cleanStudy(), decisionLevels: [200], bootstrap: false });
    const first = steps.next();
    expect(first.done).toBe(true);
  });
});
