import { describe, expect, it } from 'vitest';
import {
  STANDING_CAUTION,
  bootstrapFailureCaution,
  methodFailedCaution,
  correlationCaution,
  downWeightCaution,
  esdCaution,
  exclusionCaution,
  extrapolationCaution,
  formatNumber,
  heteroscedasticityCaution,
  heteroscedasticityTest,
  leverageCaution,
  passingBablokCautions,
  pearsonCorrelation,
  redescendingCautions,
  sampleCountCautions,
  spreadCaution,
  verdictCaution,
} from '../../../../src/lib/stats/cautions';
import type { LineFit } from '../../../../src/lib/stats/types';

const ids = (n: number) => Array.from({ length: n }, (_, i) => `S${String(i + 1).padStart(3, '0')}`);
/** 40 comparative values spread evenly over 10–200 and a candidate close to them (built for these tests). */
const evenX = Array.from({ length: 40 }, (_, i) => 10 + (190 * i) / 39);
const evenY = evenX.map((v, i) => v + (i % 2 === 0 ? 0.5 : -0.5));

describe('sample count', () => {
  it('fires below the plan and below 40, naming the counts', () => {
    const cautions = sampleCountCautions(32, 48);
    expect(cautions.map((c) => c.code)).toEqual(['fewer-than-planned', 'fewer-than-40']);
    expect(cautions[0].message).toContain('32');
    expect(cautions[0].message).toContain('48');
    expect(cautions[1].message).toContain('40');
  });
  it('is silent at 40 samples with 40 planned', () => {
    expect(sampleCountCautions(40, 40)).toEqual([]);
  });
});

describe('spread over the measuring interval', () => {
  it('names the third that holds too few samples against the plan interval', () => {
    const clustered = [...Array.from({ length: 36 }, (_, i) => 10 + i), 150, 170, 190, 195];
    const caution = spreadCaution(clustered, { interval: [0, 200] });
    expect(caution?.code).toBe('poor-spread');
    // 0 of 40 in the middle third (66.7–133.3), 4 of 40 = 10 % in the upper third: both under 1/6
    expect(caution?.message).toContain('middle third holds 0 %');
    expect(caution?.message).toContain('upper third holds 10 %');
    expect(caution?.message).toContain('planned measuring interval 0–200');
  });
  it('is silent for evenly spread samples', () => {
    expect(spreadCaution(evenX, { interval: [0, 210] })).toBeNull();
    expect(spreadCaution(evenX)).toBeNull();
  });
});

describe('correlation', () => {
  it('Pearson r matches R cor(c(1,2,3), c(2,4,7)) = 0.9933993 (from memory)', () => {
    expect(pearsonCorrelation([1, 2, 3], [2, 4, 7])).toBeCloseTo(0.9933993, 6);
  });
  it('fires below 0.975 and states r', () => {
    expect(correlationCaution(0.962)?.message).toContain('r = 0.962');
    expect(correlationCaution(0.99)).toBeNull();
  });
});

describe('differences growing with concentration', () => {
  it('fires when |d| is proportional to the level and suggests weighted Deming', () => {
    // constant 5 % difference with alternating sign
    const y = evenX.map((v, i) => v * (i % 2 === 0 ? 1.05 : 0.95));
    const caution = heteroscedasticityCaution(evenX, y);
    expect(caution?.code).toBe('differences-grow-with-concentration');
    expect(caution?.message).toContain('weighted Deming');
    expect(heteroscedasticityTest(evenX, y).pValue).toBeLessThan(0.001);
  });
  it('is silent for constant differences', () => {
    expect(heteroscedasticityCaution(evenX, evenY)).toBeNull();
  });
});

describe('leverage', () => {
  it('names the sample far out in x', () => {
    const x = [...evenX.slice(0, 39).map((v) => v / 4), 400];
    const h = hatValues(x);
    const caution = leverageCaution(ids(40), h);
    expect(caution?.sampleIds).toEqual(['S040']);
    expect(caution?.message).toContain('S040');
    expect(caution?.message).toContain('MM');
  });
  it('is silent for evenly spread x', () => {
    expect(leverageCaution(ids(40), hatValues(evenX))).toBeNull();
  });
});

/** OLS hat values of a line, 1/n + (x − x̄)²/Sxx (any regression text). */
function hatValues(x: number[]): number[] {
  const mean = x.reduce((s, v) => s + v, 0) / x.length;
  const sxx = x.reduce((s, v) => s + (v - mean) ** 2, 0);
  return x.map((v) => 1 / x.length + (v - mean) ** 2 / sxx);
}

const line = (intercept: number, slope: number, extra: Partial<LineFit> = {}): LineFit => ({
  method: 'tukey',
  n: 40,
  intercept,
  slope,
  interceptCI: [intercept - 1, intercept + 1],
  slopeCI: [slope - 0.1, slope + 0.1],
  confidence: 0.95,
  ...extra,
});

describe('redescending fits', () => {
  it('fires when the fit did not converge, naming the start and iterations', () => {
    const cautions = redescendingCautions(
      [{ method: 'tukey', reported: line(0, 1, { converged: false, iterations: 200, start: 's-estimate' }), alternative: line(0, 1, { start: 'ols', converged: true }) }],
      evenX,
      evenY,
    );
    expect(cautions.map((c) => c.code)).toEqual(['redescending-not-converged']);
    expect(cautions[0].message).toContain('200 iterations');
    expect(cautions[0].message).toContain('s-estimate');
  });
  it('fires when the two starts land on different lines and is silent when they agree', () => {
    const differ = redescendingCautions(
      [{ method: 'hampel', reported: line(0, 1, { start: 's-estimate', converged: true }), alternative: line(8, 0.9, { start: 'ols', converged: true }) }],
      evenX,
      evenY,
    );
    expect(differ.map((c) => c.code)).toEqual(['redescending-start-dependent']);
    expect(differ[0].message).toContain('Hampel');
    const agree = redescendingCautions(
      [{ method: 'hampel', reported: line(0, 1, { converged: true }), alternative: line(0.0001, 1, { converged: true }) }],
      evenX,
      evenY,
    );
    expect(agree).toEqual([]);
  });
});

describe('down-weighted samples', () => {
  it('names the samples and the fits that down-weight them, and suggests interference', () => {
    const huber = new Array(5).fill(1);
    const mm = new Array(5).fill(0.9);
    huber[3] = 0.2;
    mm[3] = 0;
    mm[1] = 0.1;
    const caution = downWeightCaution(['a', 'b', 'c', 'd', 'e'], { huber, mm });
    expect(caution?.sampleIds).toEqual(['b', 'd']);
    expect(caution?.message).toContain('d (Huber, MM)');
    expect(caution?.message).toContain('haemolysis');
  });
  it('is silent when no weight is below 0.25', () => {
    expect(downWeightCaution(['a', 'b'], { huber: [1, 0.25] })).toBeNull();
  });
});

describe('decision levels outside the measured range', () => {
  it('names the level that needs extrapolation', () => {
    const caution = extrapolationCaution([5, 126, 400], evenX);
    expect(caution?.message).toContain('5, 400');
    expect(caution?.message).not.toContain('126,');
  });
  it('is silent inside the range', () => {
    expect(extrapolationCaution([70, 126], evenX)).toBeNull();
  });
});

describe('Passing–Bablok assumptions', () => {
  it('fires on negative correlation and on a CUSUM rejection', () => {
    const cautions = passingBablokCautions({ correlation: -0.31, cusum: { statistic: 1.9, critical: 1.36, linear: false } });
    expect(cautions.map((c) => c.code)).toEqual(['passing-bablok-negative-correlation', 'passing-bablok-nonlinear']);
    expect(cautions[0].message).toContain('-0.31');
    expect(cautions[1].message).toContain('1.9');
  });
  it('is silent for a positive, linear relation', () => {
    expect(passingBablokCautions({ correlation: 0.99, cusum: { statistic: 0.5, critical: 1.36, linear: true } })).toEqual([]);
  });
});

describe('exclusions', () => {
  it('fires above 2.5 % and states the numbers', () => {
    expect(exclusionCaution(38, 2)?.message).toContain('2 of 40 samples (5 %)');
    expect(exclusionCaution(39, 1)).toBeNull();
  });
});

describe('verdicts', () => {
  it('fires when estimators disagree at a level, naming them', () => {
    const caution = verdictCaution(126, { ols: 'within', deming: 'within', mm: 'inconclusive' });
    expect(caution?.message).toContain('126');
    expect(caution?.message).toContain('within: OLS, Deming');
    expect(caution?.message).toContain('inconclusive: MM');
    expect(verdictCaution(126, { ols: 'within', mm: 'within' })).toBeNull();
  });
});

describe('generalized ESD outliers', () => {
  it('names the outlying samples with their differences', () => {
    const caution = esdCaution(['a', 'b', 'c'], [0.1, 9.25, -0.2], [1], 0.05);
    expect(caution?.sampleIds).toEqual(['b']);
    expect(caution?.message).toContain('b (difference 9.25)');
    expect(esdCaution(['a'], [0], [], 0.05)).toBeNull();
  });
});

describe('standing caution and number format', () => {
  it('says that statistics support and never replace the medical director', () => {
    expect(STANDING_CAUTION).toContain('medical director');
    expect(STANDING_CAUTION).toContain('quality policy');
  });
  it('formats numbers with 4 significant digits', () => {
    expect(formatNumber(0.96234)).toBe('0.9623');
    expect(formatNumber(126)).toBe('126');
    expect(formatNumber(-14.38361)).toBe('-14.38');
  });
});

describe('fits and bootstraps that fail', () => {
  it('a method that could not be computed says why', () => {
    const caution = methodFailedCaution('passingBablok', 'every pairwise slope is exactly −1');
    expect(caution.message).toBe('Passing–Bablok could not be computed: every pairwise slope is exactly −1.');
  });
  it('skipped bootstrap resamples are counted, and nothing is said when none failed', () => {
    expect(bootstrapFailureCaution('mm', 12, 2000)?.message).toContain('12 of 2000');
    expect(bootstrapFailureCaution('mm', 0, 2000)).toBeNull();
  });
});
