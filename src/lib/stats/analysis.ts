import { allowableLimitAt, validateAllowableLimit, type AllowableLimit } from './allowable';
import { biasAtLevel, biasIntervalKind, biasVerdict, bootstrapBiasIntervals, percentBiasInterval, type BiasVerdict } from './bias';
import type { BootstrapMethod } from './bootstrap';
import { blandAltman, type BlandAltmanResult } from './blandAltman';
import {
  STANDING_CAUTION,
  bootstrapFailureCaution,
  correlationCaution,
  downWeightCaution,
  esdCaution,
  exclusionCaution,
  extrapolationCaution,
  heteroscedasticityCaution,
  leverageCaution,
  methodFailedCaution,
  passingBablokCautions,
  pearsonCorrelation,
  redescendingCautions,
  sampleCountCautions,
  spreadCaution,
  verdictCaution,
  type Caution,
  type StartComparison,
} from './cautions';
import { fitDeming, fitWeightedDeming, lambdaFromDuplicates } from './deming';
import { diagnosticFlags, regressionDiagnostics, type RegressionDiagnostics, type SampleFlags } from './diagnostics';
import { StatsInputError } from './errors';
import { generalizedEsd, maxOutliersForShare, type EsdStep } from './esd';
import { fitLadLine } from './lad';
import { lineDesignMatrix } from './linear';
import { fitRobustLine } from './mEstimator';
import { fitMMLine } from './mm';
import type { MNormKey } from './norms';
import { fitOlsLine } from './ols';
import { fitSEstimator, type SEstimate } from './sEstimator';
import { fitPassingBablok, type PassingBablokFit } from './passingBablok';
import type { LineFit, MethodKey } from './types';
import { validateFinite, validatePairs, validatePositive } from './validate';

/** Version of the engine, stored with every analysis run. */
export const ENGINE_VERSION = '0.3.0';

/** Every estimator key, in the order the analysis reports them. */
export const ALL_METHODS: readonly MethodKey[] = ['ols', 'deming', 'weightedDeming', 'passingBablok', 'huber', 'tukey', 'hampel', 'mm', 'lad'];

/** The estimators run when the caller does not choose. */
export const DEFAULT_METHODS: readonly MethodKey[] = ['ols', 'deming', 'passingBablok', 'huber', 'tukey', 'hampel', 'mm'];

/** Share of samples the generalized ESD screen may call outlying (EP09 practice, from memory). */
export const ESD_MAX_SHARE = 0.025;
export const ESD_ALPHA = 0.05;

/** Input of {@link analyzeComparison}; x is the comparative procedure, y the candidate. */
export interface ComparisonInput {
  sampleIds: string[];
  comparative: number[];
  candidate: number[];
  /** Duplicate measurements per sample; they give λ unless `lambda` is set. */
  replicates?: { comparative: [number, number][]; candidate: [number, number][] };
  methods?: MethodKey[];
  /** Error-variance ratio σ²(candidate error)/σ²(comparative error) for Deming. */
  lambda?: number;
  decisionLevels?: number[];
  /** One limit for every level, or one per decision level in the same order. */
  allowable?: AllowableLimit | AllowableLimit[];
  primary?: MethodKey;
  /** Seeds every random step: S-estimate subsamples and bootstrap resamples (default 1). */
  seed?: number;
  /** Bootstrap of the bias CIs of Passing–Bablok and the robust fits; false leaves those CIs out. */
  bootstrap?: { resamples?: number; method?: BootstrapMethod } | false;
  plan?: { plannedCount?: number; measuringInterval?: [number, number]; targetShares?: [number, number, number] };
  /** Samples excluded before the analysis, for the exclusion caution. */
  excludedCount?: number;
  robust?: { tuning?: Partial<Record<MNormKey, number[]>>; start?: 'ols' | 's-estimate' };
  /** Generalized ESD screen of the differences: α and the largest share of samples it may mark (defaults 0.05 and 2.5 %). */
  outliers?: { alpha?: number; maxShare?: number };
}

/** A fit as the analysis reports it: the line plus what its method adds (Deming's λ, Passing–Bablok's K, N, CUSUM). */
export type AnalysisFit = LineFit &
  Partial<Pick<PassingBablokFit, 'shift' | 'slopeCount' | 'cusum' | 'pearsonR'>> & { lambda?: number; precisionWeights?: number[] };

/** One fit's bias at a decision level. */
export interface FitBias {
  bias: number;
  percentBias: number;
  ci?: [number, number];
  percentCI?: [number, number];
  /** Where the CI comes from. */
  ciMethod?: 'closed-form' | 'bootstrap-bca' | 'bootstrap-percentile';
  verdict?: BiasVerdict;
}

export interface DecisionLevelBias {
  level: number;
  /** ±limit in measurement units at this level, when an allowable bias was given. */
  allowableLimit?: number;
  fits: Partial<Record<MethodKey, FitBias>>;
}

/** The whole method-comparison analysis, plain JSON. */
export interface ComparisonAnalysis {
  engineVersion: string;
  n: number;
  sampleIds: string[];
  comparative: number[];
  candidate: number[];
  seed: number;
  methods: MethodKey[];
  primary: MethodKey;
  lambda: { value: number; source: 'given' | 'duplicates' | 'default' };
  correlation: number;
  fits: Partial<Record<MethodKey, AnalysisFit>>;
  /** Estimators that could not be computed, with the reason. */
  fitErrors: Partial<Record<MethodKey, string>>;
  /** Tukey and Hampel from the other start, to show whether the reported fit depends on its start. */
  alternativeStarts: Partial<Record<MethodKey, { start?: string; intercept: number; slope: number; converged?: boolean; iterations?: number }>>;
  blandAltman: { absolute: BlandAltmanResult; percent?: BlandAltmanResult };
  diagnostics: RegressionDiagnostics & {
    flags: SampleFlags[];
    /** Per robust fit: the hat values of its final weighted step, its weights and its flags. */
    robust: Partial<Record<MethodKey, { hat: number[]; weights: number[]; flags: SampleFlags[] }>>;
  };
  robustWeights: Partial<Record<MethodKey, number[]>>;
  /** Generalized ESD screen of the absolute differences; `steps` are the test's steps in removal order. */
  esd: { alpha: number; maxOutliers: number; outlierIndices: number[]; outlierSampleIds: string[]; outlierCount: number; steps: EsdStep[] };
  bootstrap: { resamples: number; method: BootstrapMethod; failedResamples: Partial<Record<MethodKey, number>> } | null;
  biasAtDecisionLevels: DecisionLevelBias[];
  cautions: Caution[];
  standingCaution: string;
}

const REDESCENDING: readonly MethodKey[] = ['tukey', 'hampel'];
const ROBUST_WEIGHTED: readonly MethodKey[] = ['huber', 'tukey', 'hampel', 'mm'];

/**
 * The one entry point of the engine: fits every chosen estimator (OLS; Deming and weighted Deming, Cornbleet &
 * Gochman 1979, Linnet 1990/1993; Passing–Bablok 1983; Huber, Tukey bisquare, Hampel M-estimators; MM, Yohai 1987;
 * LAD), Bland–Altman agreement (Lancet 1986), OLS and robust diagnostics, the generalized ESD screen of the
 * differences (Rosner 1983), bias at each decision level with its CI and verdict (closed form or seeded bootstrap,
 * Efron 1987), and the data-driven cautions. Deterministic for a given seed: the same input gives the same JSON.
 *
 * @example
 * const analysis = analyzeComparison({
 *   sampleIds: ['S1', 'S2', 'S3', 'S4', 'S5'],
 *   comparative: [52, 88, 126, 170, 240],
 *   candidate: [54, 90, 129, 175, 246],
 *   decisionLevels: [126],
 *   allowable: { absolute: 6, percent: 10, rule: 'larger' },
 * });
 * analysis.biasAtDecisionLevels[0].fits.deming?.verdict; // 'within', 'beyond' or 'inconclusive'
 */
export function analyzeComparison(input: ComparisonInput): ComparisonAnalysis {
  const steps = analyzeComparisonInSteps(input);
  for (;;) {
    const step = steps.next();
    if (step.done) return step.value;
  }
}

/** Where a stepwise analysis has got to: the bootstrap of `method`, the `done + 1`-th of `total`, comes next. */
export interface AnalysisProgress {
  done: number;
  total: number;
  method: MethodKey;
}

/**
 * analyzeComparison one bootstrap at a time: yields an AnalysisProgress before each fit's bootstrap (the long part)
 * and returns the same ComparisonAnalysis, so that a caller can report progress and let other work run between them.
 *
 * @example
 * const steps = analyzeComparisonInSteps(input);
 * let step = steps.next();
 * while (!step.done) { console.log(`bootstrap ${step.value.done + 1} of ${step.value.total}`); step = steps.next(); }
 * const analysis = step.value;
 */
export function* analyzeComparisonInSteps(input: ComparisonInput): Generator<AnalysisProgress, ComparisonAnalysis, void> {
  const settings = validateInput(input);
  const { sampleIds, comparative: x, candidate: y, methods, levels, limits, seed } = settings;
  const n = x.length;
  const lambda = chooseLambda(input);
  const robustStart = input.robust?.start ?? 's-estimate';
  const tuning = input.robust?.tuning;

  const fits: ComparisonAnalysis['fits'] = {};
  const fitErrors: ComparisonAnalysis['fitErrors'] = {};
  const cautions: Caution[] = [];
  const sEstimate = sharedSEstimate(x, y, seed);
  for (const method of methods) {
    try {
      fits[method] = fitMethod(method, x, y, { lambda: lambda.value, seed, start: robustStart, tuning, sEstimate });
    } catch (error) {
      if (!(error instanceof StatsInputError)) throw error;
      fitErrors[method] = error.message;
    }
  }

  const alternativeStarts: ComparisonAnalysis['alternativeStarts'] = {};
  const startComparisons: StartComparison[] = [];
  for (const method of REDESCENDING) {
    const reported = fits[method];
    if (!reported) continue;
    try {
      const other = robustStart === 'ols' ? 's-estimate' : 'ols';
      const alternative = fitRobustLine(x, y, method as MNormKey, {
        start: other,
        seed,
        tuning: tuning?.[method as MNormKey],
        sEstimate: other === 's-estimate' ? sEstimate() : undefined,
      });
      alternativeStarts[method] = pick(alternative);
      startComparisons.push({ method, reported, alternative });
    } catch (error) {
      if (!(error instanceof StatsInputError)) throw error;
    }
  }

  const olsFit = fits.ols ?? fitOlsLine(x, y);
  const olsDiagnostics = regressionDiagnostics(x, y, olsFit);
  const robustDiagnostics: ComparisonAnalysis['diagnostics']['robust'] = {};
  const robustWeights: ComparisonAnalysis['robustWeights'] = {};
  for (const method of ROBUST_WEIGHTED) {
    const fit = fits[method];
    if (!fit?.weights || !fit.hat) continue;
    robustWeights[method] = fit.weights;
    let flags: SampleFlags[] = [];
    try {
      flags = diagnosticFlags(regressionDiagnostics(x, y, fit));
    } catch (error) {
      if (!(error instanceof StatsInputError)) throw error;
    }
    robustDiagnostics[method] = { hat: fit.hat, weights: fit.weights, flags };
  }

  const absolute = blandAltman(x, y, { kind: 'absolute' });
  let percent: BlandAltmanResult | undefined;
  try {
    percent = blandAltman(x, y, { kind: 'percent' });
  } catch (error) {
    if (!(error instanceof StatsInputError)) throw error;
  }

  const esdAlpha = input.outliers?.alpha ?? ESD_ALPHA;
  const maxOutliers = maxOutliersForShare(n, input.outliers?.maxShare ?? ESD_MAX_SHARE);
  const screen = maxOutliers > 0 ? generalizedEsd(absolute.differences, { alpha: esdAlpha, maxOutliers }) : { outlierIndices: [], steps: [] };
  const outlierIndices = [...screen.outlierIndices].sort((a, b) => a - b);
  const esd = {
    alpha: esdAlpha,
    maxOutliers,
    outlierIndices,
    outlierSampleIds: outlierIndices.map((i) => sampleIds[i]),
    outlierCount: outlierIndices.length,
    steps: screen.steps,
  };

  const bootstrapSettings = input.bootstrap === false ? null : { resamples: input.bootstrap?.resamples ?? 2000, method: input.bootstrap?.method ?? 'bca' };
  const bias = yield* biasTable(x, y, fits, levels, limits, seed, bootstrapSettings, tuning, cautions);

  const correlation = pearsonCorrelation(x, y);
  cautions.unshift(
    ...sampleCountCautions(n, input.plan?.plannedCount),
    ...nonNull(spreadCaution(x, { interval: input.plan?.measuringInterval, targetShares: input.plan?.targetShares })),
    ...nonNull(exclusionCaution(n, input.excludedCount ?? 0)),
    ...(Object.keys(fitErrors) as MethodKey[]).map((m) => methodFailedCaution(m, fitErrors[m] as string)),
    ...nonNull(correlationCaution(correlation)),
    ...nonNull(heteroscedasticityCaution(x, y)),
    ...nonNull(leverageCaution(sampleIds, olsDiagnostics.hat)),
    ...redescendingCautions(startComparisons, x, y),
    ...nonNull(downWeightCaution(sampleIds, robustWeights)),
    ...(methods.includes('passingBablok') ? passingBablokCautions({ correlation, cusum: fits.passingBablok?.cusum }) : []),
    ...nonNull(esdCaution(sampleIds, absolute.differences, outlierIndices, esdAlpha)),
    ...nonNull(extrapolationCaution(levels, x)),
  );
  for (const row of bias.rows) {
    const verdicts: Partial<Record<MethodKey, BiasVerdict>> = {};
    for (const method of Object.keys(row.fits) as MethodKey[]) {
      const verdict = row.fits[method]?.verdict;
      if (verdict) verdicts[method] = verdict;
    }
    cautions.push(...nonNull(verdictCaution(row.level, verdicts)));
  }

  return {
    engineVersion: ENGINE_VERSION,
    n,
    sampleIds,
    comparative: x,
    candidate: y,
    seed,
    methods,
    primary: settings.primary,
    lambda,
    correlation,
    fits,
    fitErrors,
    alternativeStarts,
    blandAltman: percent ? { absolute, percent } : { absolute },
    diagnostics: { ...olsDiagnostics, flags: diagnosticFlags(olsDiagnostics), robust: robustDiagnostics },
    robustWeights,
    esd,
    bootstrap: bootstrapSettings ? { ...bootstrapSettings, failedResamples: bias.failedResamples } : null,
    biasAtDecisionLevels: bias.rows,
    cautions,
    standingCaution: STANDING_CAUTION,
  };
}

function nonNull<T>(value: T | null): T[] {
  return value === null ? [] : [value];
}

function pick(fit: LineFit) {
  return { start: fit.start, intercept: fit.intercept, slope: fit.slope, converged: fit.converged, iterations: fit.iterations };
}

/**
 * The S-estimate of the line (seeded fast-S), computed the first time a fit asks for it and then handed to every
 * other: Tukey's and Hampel's start and MM's first stage are the same estimate, and the search is the costly part.
 * A failure is kept too, so that each fit asking reports it.
 */
function sharedSEstimate(x: number[], y: number[], seed: number): () => SEstimate {
  let outcome: SEstimate | StatsInputError | undefined;
  return () => {
    if (outcome === undefined) {
      try {
        outcome = fitSEstimator(lineDesignMatrix(x), y, { seed });
      } catch (error) {
        if (!(error instanceof StatsInputError)) throw error;
        outcome = error;
      }
    }
    if (outcome instanceof StatsInputError) throw outcome;
    return outcome;
  };
}

function fitMethod(
  method: MethodKey,
  x: number[],
  y: number[],
  options: {
    lambda: number;
    seed: number;
    start: 'ols' | 's-estimate';
    tuning?: Partial<Record<MNormKey, number[]>>;
    sEstimate: () => SEstimate;
  },
): AnalysisFit {
  switch (method) {
    case 'ols':
      return fitOlsLine(x, y);
    case 'deming':
      return fitDeming(x, y, { lambda: options.lambda });
    case 'weightedDeming':
      return fitWeightedDeming(x, y, { lambda: options.lambda });
    case 'passingBablok':
      return fitPassingBablok(x, y);
    case 'huber':
      return fitRobustLine(x, y, 'huber', { start: 'ols', tuning: options.tuning?.huber });
    case 'tukey':
    case 'hampel':
      return fitRobustLine(x, y, method, {
        start: options.start,
        seed: options.seed,
        tuning: options.tuning?.[method],
        sEstimate: options.start === 's-estimate' ? options.sEstimate() : undefined,
      });
    case 'mm':
      return fitMMLine(x, y, { seed: options.seed, sEstimate: options.sEstimate() });
    case 'lad':
      return fitLadLine(x, y, { seed: options.seed });
  }
}

function* biasTable(
  x: number[],
  y: number[],
  fits: ComparisonAnalysis['fits'],
  levels: number[],
  limits: (AllowableLimit | undefined)[],
  seed: number,
  bootstrap: { resamples: number; method: BootstrapMethod } | null,
  tuning: Partial<Record<MNormKey, number[]>> | undefined,
  cautions: Caution[],
): Generator<AnalysisProgress, { rows: DecisionLevelBias[]; failedResamples: Partial<Record<MethodKey, number>> }, void> {
  const rows: DecisionLevelBias[] = levels.map((level, k) => {
    const limit = limits[k];
    return limit ? { level, allowableLimit: allowableLimitAt(limit, level), fits: {} } : { level, fits: {} };
  });
  const failedResamples: Partial<Record<MethodKey, number>> = {};
  if (levels.length === 0) return { rows, failedResamples };
  const bootstrapped = bootstrap ? (Object.keys(fits) as MethodKey[]).filter((m) => biasIntervalKind(m) === 'bootstrap') : [];
  for (const method of Object.keys(fits) as MethodKey[]) {
    const fit = fits[method] as LineFit;
    const perLevel: FitBias[] = levels.map((level) => {
      const point = biasAtLevel(fit, level);
      const entry: FitBias = { bias: point.bias, percentBias: point.percentBias };
      if (point.ci && point.percentCI) Object.assign(entry, { ci: point.ci, percentCI: point.percentCI, ciMethod: 'closed-form' });
      return entry;
    });
    if (biasIntervalKind(method) === 'bootstrap' && bootstrap) {
      yield { done: bootstrapped.indexOf(method), total: bootstrapped.length, method };
      try {
        const result = bootstrapBiasIntervals(x, y, fit, levels, { ...bootstrap, seed, tuning });
        failedResamples[method] = result.failedResamples;
        cautions.push(...nonNull(bootstrapFailureCaution(method, result.failedResamples, result.resamples)));
        result.intervals.forEach((ci, k) => {
          Object.assign(perLevel[k], { ci, percentCI: percentBiasInterval(ci, levels[k]), ciMethod: `bootstrap-${bootstrap.method}` });
        });
      } catch (error) {
        if (!(error instanceof StatsInputError)) throw error;
        cautions.push(methodFailedCaution(method, `its bootstrap bias intervals failed (${error.message})`));
      }
    }
    perLevel.forEach((entry, k) => {
      const allowable = rows[k].allowableLimit;
      if (entry.ci && allowable !== undefined) entry.verdict = biasVerdict(entry.ci, allowable);
      rows[k].fits[method] = entry;
    });
  }
  return { rows, failedResamples };
}

function chooseLambda(input: ComparisonInput): ComparisonAnalysis['lambda'] {
  if (input.lambda !== undefined) return { value: input.lambda, source: 'given' };
  const replicates = input.replicates;
  if (replicates) {
    const value = lambdaFromDuplicates(
      replicates.comparative.map((r) => r[0]),
      replicates.comparative.map((r) => r[1]),
      replicates.candidate.map((r) => r[0]),
      replicates.candidate.map((r) => r[1]),
    );
    return { value, source: 'duplicates' };
  }
  return { value: 1, source: 'default' };
}

function validateInput(input: ComparisonInput) {
  const { sampleIds, comparative, candidate } = input;
  validatePairs(comparative, candidate);
  if (!Array.isArray(sampleIds) || sampleIds.length !== comparative.length) {
    throw new StatsInputError(`sampleIds must list one id per sample (${comparative.length} samples, ${sampleIds?.length ?? 0} ids)`, { field: 'sampleIds' });
  }
  const seen = new Set<string>();
  sampleIds.forEach((id, i) => {
    if (typeof id !== 'string' || id.length === 0) throw new StatsInputError(`sampleIds[${i}] must be a non-empty string`, { field: 'sampleIds', index: i });
    if (seen.has(id)) throw new StatsInputError(`sampleIds[${i}] repeats the id '${id}'`, { field: 'sampleIds', index: i });
    seen.add(id);
  });
  const methods = input.methods ?? [...DEFAULT_METHODS];
  if (methods.length === 0) throw new StatsInputError('choose at least one method', { field: 'methods' });
  methods.forEach((m, i) => {
    if (!ALL_METHODS.includes(m)) throw new StatsInputError(`methods[${i}] '${String(m)}' is not a known method (${ALL_METHODS.join(', ')})`, { field: 'methods', index: i });
  });
  const ordered = ALL_METHODS.filter((m) => methods.includes(m));
  const primary = input.primary ?? (ordered.includes('deming') ? 'deming' : ordered[0]);
  if (!ordered.includes(primary)) throw new StatsInputError(`the primary method '${primary}' is not among the methods run`, { field: 'primary' });
  if (input.lambda !== undefined) validatePositive(input.lambda, 'lambda');
  const levels = input.decisionLevels ?? [];
  validateFinite(levels, 'decisionLevels');
  levels.forEach((level, i) => {
    if (level === 0) throw new StatsInputError(`decisionLevels[${i}] is 0, which has no percent bias`, { field: 'decisionLevels', index: i });
  });
  const limits = allowableByLevel(input.allowable, levels.length);
  const seed = input.seed ?? 1;
  if (!Number.isFinite(seed)) throw new StatsInputError(`seed must be a finite number (got ${seed})`, { field: 'seed' });
  if (input.replicates) validateReplicates(input.replicates, comparative.length);
  if (input.excludedCount !== undefined && !(Number.isInteger(input.excludedCount) && input.excludedCount >= 0)) {
    throw new StatsInputError(`excludedCount must be a whole number of at least 0 (got ${input.excludedCount})`, { field: 'excludedCount' });
  }
  return { sampleIds: [...sampleIds], comparative: [...comparative], candidate: [...candidate], methods: ordered, primary, levels: [...levels], limits, seed };
}

function allowableByLevel(allowable: ComparisonInput['allowable'], count: number): (AllowableLimit | undefined)[] {
  if (allowable === undefined) return new Array(count).fill(undefined);
  if (Array.isArray(allowable)) {
    if (allowable.length !== count) {
      throw new StatsInputError(`allowable lists ${allowable.length} limits for ${count} decision levels`, { field: 'allowable' });
    }
    allowable.forEach(validateAllowableLimit);
    return allowable;
  }
  validateAllowableLimit(allowable);
  return new Array(count).fill(allowable);
}

function validateReplicates(replicates: NonNullable<ComparisonInput['replicates']>, n: number): void {
  for (const field of ['comparative', 'candidate'] as const) {
    const rows = replicates[field];
    if (!Array.isArray(rows) || rows.length !== n) {
      throw new StatsInputError(`replicates.${field} must have one pair per sample (${n} samples, got ${rows?.length ?? 0})`, { field: `replicates.${field}` });
    }
    rows.forEach((pair, i) => validateFinite(pair, `replicates.${field}[${i}]`));
  }
}

/** The compact JSON of the CLI (STATISTICS.md, CLI); fields that do not apply to a method are left out. */
export interface CompactAnalysis {
  n: number;
  fits: Partial<Record<MethodKey, Pick<LineFit, 'intercept' | 'slope' | 'interceptCI' | 'slopeCI' | 'scale' | 'iterations' | 'converged' | 'weights'>>>;
  blandAltman: Pick<BlandAltmanResult, 'meanDifference' | 'sdDifference' | 'lowerLoA' | 'upperLoA'>;
  diagnostics: Pick<RegressionDiagnostics, 'hat' | 'studentizedResiduals' | 'cooksDistance'>;
  biasAtDecisionLevels: { level: number; fits: Partial<Record<MethodKey, { bias: number; percentBias: number; ci?: [number, number] }>> }[];
  cautions: string[];
}

/**
 * Reduces a full analysis to the CLI's JSON shape: per fit intercept, slope, their CIs, scale, iterations,
 * converged and weights; absolute Bland–Altman mean, SD and limits; OLS hat values, studentized residuals and
 * Cook's distances; bias, percent bias and CI per level; the caution sentences.
 *
 * @example
 * JSON.stringify(compactAnalysis(analyzeComparison(input)));
 */
export function compactAnalysis(analysis: ComparisonAnalysis): CompactAnalysis {
  const fits: CompactAnalysis['fits'] = {};
  for (const method of Object.keys(analysis.fits) as MethodKey[]) {
    const fit = analysis.fits[method] as LineFit;
    fits[method] = withoutUndefined({
      intercept: fit.intercept,
      slope: fit.slope,
      interceptCI: fit.interceptCI,
      slopeCI: fit.slopeCI,
      scale: fit.scale,
      iterations: fit.iterations,
      converged: fit.converged,
      weights: fit.weights,
    });
  }
  const { meanDifference, sdDifference, lowerLoA, upperLoA } = analysis.blandAltman.absolute;
  const { hat, studentizedResiduals, cooksDistance } = analysis.diagnostics;
  return {
    n: analysis.n,
    fits,
    blandAltman: { meanDifference, sdDifference, lowerLoA, upperLoA },
    diagnostics: { hat, studentizedResiduals, cooksDistance },
    biasAtDecisionLevels: analysis.biasAtDecisionLevels.map((row) => {
      const levelFits: CompactAnalysis['biasAtDecisionLevels'][number]['fits'] = {};
      for (const method of Object.keys(row.fits) as MethodKey[]) {
        const entry = row.fits[method] as FitBias;
        levelFits[method] = withoutUndefined({ bias: entry.bias, percentBias: entry.percentBias, ci: entry.ci });
      }
      return { level: row.level, fits: levelFits };
    }),
    cautions: analysis.cautions.map((c) => c.message),
  };
}

function withoutUndefined<T extends Record<string, unknown>>(value: T): T {
  return Object.fromEntries(Object.entries(value).filter(([, v]) => v !== undefined)) as T;
}
