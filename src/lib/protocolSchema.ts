/**
 * Analyte templates (the JSON files in `protocols/`) and protocol settings (what the protocol designer
 * edits and the server stores per protocol version), as zod schemas shared by the browser form and the API.
 * Refinements put each problem on the field that causes it, so the form can show it beside that field.
 */
import { z } from 'zod';
import { StatsInputError } from './stats/errors';
import type { MethodKey } from './stats/types';

/**
 * The straight-line estimators a protocol may name as primary (keys of the statistics engine).
 *
 * @example
 * REGRESSION_METHODS.includes('passingBablok'); // true
 */
export const REGRESSION_METHODS = [
  'ols',
  'deming',
  'weightedDeming',
  'passingBablok',
  'huber',
  'tukey',
  'hampel',
  'mm',
] as const satisfies readonly MethodKey[];

/**
 * ψ families of the M-estimators.
 *
 * @example
 * PSI_FAMILIES.map((psi) => DEFAULT_TUNING[psi]); // [[1.345], [4.685], [2, 4, 8]]
 */
export const PSI_FAMILIES = ['huber', 'tukey', 'hampel'] as const;
/**
 * One ψ family.
 *
 * @example
 * const psi: PsiFamily = 'tukey';
 */
export type PsiFamily = (typeof PSI_FAMILIES)[number];

/**
 * Default tuning constants per ψ family (STATISTICS.md): Huber t = 1.345 and Tukey bisquare c = 4.685
 * give 95 % efficiency at the normal; Hampel (a, b, c) = (2, 4, 8).
 *
 * @example
 * DEFAULT_TUNING.hampel; // [2, 4, 8]
 */
export const DEFAULT_TUNING: Record<PsiFamily, readonly number[]> = {
  huber: [1.345],
  tukey: [4.685],
  hampel: [2, 4, 8],
};

/**
 * Laboratory disciplines a template may belong to.
 *
 * @example
 * DISCIPLINES.includes('immunoassay'); // true
 */
export const DISCIPLINES = [
  'clinical chemistry',
  'immunoassay',
  'haematology',
  'coagulation',
  'blood gases',
  'urinalysis',
] as const;

/**
 * Scales on which a template spreads the planned samples over its measuring interval.
 *
 * @example
 * intervalThirds(0.01, 100, SPREAD_SCALES[1]); // log-scale thirds
 */
export const SPREAD_SCALES = ['linear', 'log'] as const;
/**
 * One spread scale.
 *
 * @example
 * const scale: SpreadScale = 'log';
 */
export type SpreadScale = (typeof SPREAD_SCALES)[number];

/** Seeds are 32-bit, as the engine's Mersenne Twister takes them. */
const MAX_SEED = 4294967295;

const KEBAB_CASE = /^[a-z0-9]+(?:-[a-z0-9]+)*$/;

const sourceText = z.string().trim().min(1, 'Give the source of this value (guideline, regulation or local policy).');

/** z.number() refuses NaN and ±Infinity in zod 4. */
const finiteNumber = z.number({ error: 'Enter a finite number.' });

// ---------------------------------------------------------------------------------------------
// Allowable bias

/**
 * Allowable bias at a decision level: an absolute limit in the analyte's units, a percentage of the level,
 * or the larger of the two (as acceptance limits are often written: "± 6 mg/dL or ± 8 %, whichever is greater").
 * A field the rule does not use is refused, so a stored protocol has one reading. The parsed value is an
 * `AllowableLimit` of the statistics engine (plus its source): compute the limit at a level with
 * `allowableLimitAt` from `./stats/allowable`.
 *
 * @example
 * allowableBiasSchema.parse({ rule: 'larger', absolute: 6, percent: 8, source: 'lab quality policy QP-12' });
 */
export const allowableBiasSchema = z
  .object({
    rule: z.enum(['absolute', 'percent', 'larger'], {
      error: "Choose 'absolute', 'percent' or 'larger' (the larger of the absolute and percent limits).",
    }),
    absolute: finiteNumber.optional(),
    percent: finiteNumber.optional(),
    source: sourceText,
  })
  .superRefine((bias, ctx) => {
    const needsAbsolute = bias.rule !== 'percent';
    const needsPercent = bias.rule !== 'absolute';
    const check = (field: 'absolute' | 'percent', needed: boolean) => {
      const value = bias[field];
      if (needed && value === undefined) {
        ctx.addIssue({ code: 'custom', path: [field], message: `Rule '${bias.rule}' needs a${field === 'absolute' ? 'n absolute' : ' percent'} limit.` });
      } else if (!needed && value !== undefined) {
        ctx.addIssue({ code: 'custom', path: [field], message: `Rule '${bias.rule}' does not use a ${field} limit; remove it.` });
      } else if (value !== undefined && value <= 0) {
        ctx.addIssue({ code: 'custom', path: [field], message: `Allowable bias must be greater than 0 (got ${value}).` });
      } else if (field === 'percent' && value !== undefined && value > 100) {
        ctx.addIssue({ code: 'custom', path: [field], message: `Percent is a percentage (10 means ± 10 %); ${value} % is not a plausible limit.` });
      }
    };
    check('absolute', needsAbsolute);
    check('percent', needsPercent);
  });
/**
 * A parsed allowable bias.
 *
 * @example
 * const bias: AllowableBias = { rule: 'percent', percent: 10, source: 'lab quality policy QP-12' };
 */
export type AllowableBias = z.output<typeof allowableBiasSchema>;

// ---------------------------------------------------------------------------------------------
// Shared pieces

const measuringIntervalShape = { low: finiteNumber, high: finiteNumber };

function refineInterval(interval: { low: number; high: number }, ctx: z.RefinementCtx) {
  if (!(interval.low < interval.high)) {
    ctx.addIssue({
      code: 'custom',
      path: ['high'],
      message: `The upper end of the measuring interval (${interval.high}) must be above the lower end (${interval.low}).`,
    });
  }
}

/** Two decision levels are the same when they differ by less than float noise (e.g. after unit conversion). */
function sameLevel(a: number, b: number): boolean {
  return Math.abs(a - b) <= 1e-9 * Math.max(Math.abs(a), Math.abs(b), 1);
}

/** Puts an issue on each decision level outside the interval and on each repeat of an earlier level. */
function refineDecisionLevels(
  levels: readonly { value: number; allowableBias?: AllowableBias }[],
  interval: { low: number; high: number },
  ctx: z.RefinementCtx,
) {
  levels.forEach((level, index) => {
    if (level.value < interval.low || level.value > interval.high) {
      ctx.addIssue({
        code: 'custom',
        path: ['decisionLevels', index, 'value'],
        message: `Decision level ${level.value} is outside the measuring interval ${interval.low}–${interval.high}; the bias there would be extrapolated.`,
      });
    }
    const first = levels.findIndex((other) => sameLevel(other.value, level.value));
    if (first < index) {
      ctx.addIssue({
        code: 'custom',
        path: ['decisionLevels', index, 'value'],
        message: `Decision level ${level.value} is already listed (level ${first + 1}).`,
      });
    }
    if (level.allowableBias?.rule === 'percent' && level.value === 0) {
      ctx.addIssue({
        code: 'custom',
        path: ['decisionLevels', index, 'allowableBias', 'rule'],
        message: 'A percent limit at a decision level of 0 is zero; use an absolute limit.',
      });
    }
  });
}

const meaningText = z.string().trim().min(1, 'Say what this decision level means clinically.');

// ---------------------------------------------------------------------------------------------
// Analyte template

/**
 * One analyte template (a file `protocols/<id>.json`). Every value that could be wrong carries its source.
 * `units.siFactor` converts: SI value = conventional value × siFactor.
 * A decision level may override the template's allowable bias.
 *
 * @example
 * const template = analyteTemplateSchema.parse(JSON.parse(readFileSync('protocols/glucose.json', 'utf8')));
 * template.decisionLevels.map((level) => level.value); // [54, 70, 100, 126, 200]
 */
export const analyteTemplateSchema = z
  .object({
    id: z.string().regex(KEBAB_CASE, 'The id is kebab-case (lower-case words joined by hyphens), e.g. "free-t4".'),
    name: z.string().trim().min(1, 'Name the analyte.'),
    discipline: z.enum(DISCIPLINES, { error: `Choose one of: ${DISCIPLINES.join(', ')}.` }),
    specimenType: z.string().trim().min(1, 'Name the specimen type.'),
    units: z
      .object({
        conventional: z.string().trim().min(1, 'Give the conventional unit.'),
        si: z.string().trim().min(1).optional(),
        siFactor: finiteNumber.positive('The SI factor must be greater than 0.').optional(),
        source: sourceText.optional(),
      })
      .superRefine((units, ctx) => {
        if ((units.si === undefined) !== (units.siFactor === undefined)) {
          ctx.addIssue({
            code: 'custom',
            path: [units.si === undefined ? 'si' : 'siFactor'],
            message: 'Give the SI unit and its factor together (SI = conventional × factor), or neither.',
          });
        }
        if (units.siFactor !== undefined && units.source === undefined) {
          ctx.addIssue({ code: 'custom', path: ['source'], message: 'Give the source of the SI factor (e.g. the molar mass used).' });
        }
      }),
    measuringInterval: z.object({ ...measuringIntervalShape, source: sourceText }).superRefine(refineInterval),
    allowableBias: allowableBiasSchema,
    decisionLevels: z
      .array(
        z.object({
          value: finiteNumber,
          meaning: meaningText,
          source: sourceText,
          allowableBias: allowableBiasSchema.optional(),
        }),
      )
      .min(1, 'List at least one medical decision level.'),
    suggestedRegression: z.object({
      method: z.enum(REGRESSION_METHODS, { error: `Choose one of: ${REGRESSION_METHODS.join(', ')}.` }),
      reason: z.string().trim().min(1, 'Say why this regression suits the analyte.'),
    }),
    sampleSpread: z.object({
      scale: z.enum(SPREAD_SCALES, { error: "Spread samples on a 'linear' or 'log' scale." }),
      reason: z.string().trim().min(1, 'Say why this scale suits where patient results lie.'),
    }),
    notes: z.string().optional(),
  })
  .superRefine((template, ctx) => {
    refineDecisionLevels(template.decisionLevels, template.measuringInterval, ctx);
    if (template.sampleSpread.scale === 'log' && !(template.measuringInterval.low > 0)) {
      ctx.addIssue({ code: 'custom', path: ['sampleSpread', 'scale'], message: 'A log-scale spread needs a measuring interval that starts above 0.' });
    }
  });
/**
 * A parsed analyte template.
 *
 * @example
 * const template: AnalyteTemplate = analyteTemplateSchema.parse(json);
 */
export type AnalyteTemplate = z.output<typeof analyteTemplateSchema>;

// ---------------------------------------------------------------------------------------------
// Protocol settings

/**
 * The sample plan's count below which a warning is shown (EP09 practice, from memory).
 *
 * @example
 * settings.samplePlan.count < RECOMMENDED_MIN_SAMPLES; // then protocolWarnings names samplePlan.count
 */
export const RECOMMENDED_MIN_SAMPLES = 40;
/**
 * Days over which a warning suggests spreading the measurements (EP09 practice, from memory).
 *
 * @example
 * settings.samplePlan.days < RECOMMENDED_MIN_DAYS; // then protocolWarnings names samplePlan.days
 */
export const RECOMMENDED_MIN_DAYS = 5;

const intervalPartSchema = z.object({
  label: z.string().trim().min(1, 'Name this part of the measuring interval.'),
  low: finiteNumber,
  high: finiteNumber,
  share: finiteNumber.min(0, 'A share is between 0 and 1.').max(1, 'A share is between 0 and 1.'),
});
/**
 * One part of the measuring interval with its target share of the samples.
 *
 * @example
 * const low: IntervalPart = { label: 'low', low: 10, high: 173, share: 1 / 3 };
 */
export type IntervalPart = z.output<typeof intervalPartSchema>;

const SHARE_TOLERANCE = 1e-6;

/**
 * Protocol settings: the content of one protocol version. Parts of the measuring interval are contiguous
 * (each starts where the previous ends, from the interval's low end to its high end) and their target
 * shares of the samples sum to 1.
 *
 * @example
 * const result = protocolSettingsSchema.safeParse(formValues);
 * if (!result.success) result.error.issues.map((issue) => issue.path.join('.')); // e.g. ['decisionLevels.1.value']
 */
export const protocolSettingsSchema = z
  .object({
    title: z.string().trim().min(1, 'Give the protocol a title.').max(200, 'Keep the title under 200 characters.'),
    templateId: z.string().regex(KEBAB_CASE, 'A template id is kebab-case, e.g. "free-t4".').optional(),
    analyte: z.object({
      name: z.string().trim().min(1, 'Name the analyte.'),
      units: z.string().trim().min(1, 'Give the units results are reported in.'),
      measuringInterval: z.object(measuringIntervalShape).superRefine(refineInterval),
    }),
    candidateProcedure: z.string().max(2000, 'Keep the description under 2000 characters.'),
    comparativeProcedure: z.string().max(2000, 'Keep the description under 2000 characters.'),
    samplePlan: z.object({
      count: z.int('The sample count is a whole number.').min(3, 'A comparison needs at least 3 samples.'),
      replicates: z.union([z.literal(1), z.literal(2)], { error: 'Measure each sample once (1) or in duplicate (2).' }),
      days: z.int('Days is a whole number.').min(1, 'Plan at least 1 day.'),
      intervalParts: z
        .array(intervalPartSchema)
        .min(1, 'Split the measuring interval into at least one part.')
        .superRefine((parts, ctx) => {
          const total = parts.reduce((sum, part) => sum + part.share, 0);
          if (Math.abs(total - 1) > SHARE_TOLERANCE) {
            ctx.addIssue({ code: 'custom', path: [], message: `The shares must sum to 1 (they sum to ${Number(total.toPrecision(6))}).` });
          }
        }),
    }),
    decisionLevels: z
      .array(z.object({ value: finiteNumber, meaning: meaningText, allowableBias: allowableBiasSchema }))
      .min(1, 'List at least one medical decision level.'),
    primaryEstimator: z.object({
      method: z.enum(REGRESSION_METHODS, { error: `Choose one of: ${REGRESSION_METHODS.join(', ')}.` }),
      rationale: z.string().trim().min(1, 'Say why this estimator is the primary one.'),
    }),
    robust: z
      .object({
        psi: z.enum(PSI_FAMILIES, { error: `Choose one of: ${PSI_FAMILIES.join(', ')}.` }),
        tuning: z.array(finiteNumber),
        start: z.enum(['ols', 's-estimate'], { error: "Start from 'ols' or 's-estimate'." }),
      })
      .superRefine((robust, ctx) => {
        const expected = DEFAULT_TUNING[robust.psi].length;
        if (robust.tuning.length !== expected) {
          ctx.addIssue({
            code: 'custom',
            path: ['tuning'],
            message:
              robust.psi === 'hampel'
                ? `Hampel ψ takes three constants a < b < c (default ${DEFAULT_TUNING.hampel.join(', ')}).`
                : `${robust.psi === 'huber' ? 'Huber' : 'Tukey bisquare'} ψ takes one constant (default ${DEFAULT_TUNING[robust.psi][0]}).`,
          });
          return;
        }
        robust.tuning.forEach((constant, index) => {
          if (constant <= 0) {
            ctx.addIssue({ code: 'custom', path: ['tuning', index], message: `Tuning constants must be greater than 0 (got ${constant}).` });
          } else if (index > 0 && constant <= robust.tuning[index - 1]) {
            ctx.addIssue({
              code: 'custom',
              path: ['tuning', index],
              message: `Hampel constants must increase, a < b < c (got ${robust.tuning.join(', ')}).`,
            });
          }
        });
      }),
    demingLambda: z.object({
      mode: z.enum(['given', 'duplicates'], { error: "λ is 'given' or estimated from 'duplicates'." }),
      value: finiteNumber.optional(),
    }),
    outlierPolicy: z.object({
      esdAlpha: finiteNumber
        .gt(0, 'α for the ESD outlier test is between 0 and 0.5.')
        .lt(0.5, 'α for the ESD outlier test is between 0 and 0.5.')
        .default(0.05),
      maxShare: finiteNumber
        .gt(0, 'The largest share of outliers is above 0.')
        .max(0.2, 'The largest share of outliers is at most 0.2 (20 %).')
        .default(0.025),
    }),
    bootstrap: z.object({
      resamples: z
        .int('Resamples is a whole number.')
        .min(200, 'Use at least 200 bootstrap resamples.')
        .max(20000, 'Use at most 20000 bootstrap resamples.')
        .default(2000),
      seed: z.int('The seed is a whole number.').min(0, 'The seed is 0 or more.').max(MAX_SEED, `The seed is at most ${MAX_SEED}.`),
    }),
  })
  .superRefine((settings, ctx) => {
    const interval = settings.analyte.measuringInterval;
    if (interval.low < interval.high) {
      refineDecisionLevels(settings.decisionLevels, interval, ctx);
      refineIntervalParts(settings.samplePlan.intervalParts, interval, ctx);
    }
    const lambda = settings.demingLambda;
    if (lambda.mode === 'given' && lambda.value === undefined) {
      ctx.addIssue({ code: 'custom', path: ['demingLambda', 'value'], message: 'Give λ (the ratio of the candidate to the comparative error variance).' });
    } else if (lambda.mode === 'given' && lambda.value !== undefined && lambda.value <= 0) {
      ctx.addIssue({ code: 'custom', path: ['demingLambda', 'value'], message: `λ must be greater than 0 (got ${lambda.value}).` });
    } else if (lambda.mode === 'duplicates' && lambda.value !== undefined) {
      ctx.addIssue({ code: 'custom', path: ['demingLambda', 'value'], message: 'λ is estimated from the duplicates; remove the given value.' });
    }
    if (lambda.mode === 'duplicates' && settings.samplePlan.replicates !== 2) {
      ctx.addIssue({ code: 'custom', path: ['demingLambda', 'mode'], message: 'Estimating λ from duplicates needs 2 replicates in the sample plan.' });
    }
    const primary = settings.primaryEstimator.method;
    if ((PSI_FAMILIES as readonly string[]).includes(primary) && settings.robust.psi !== primary) {
      ctx.addIssue({
        code: 'custom',
        path: ['robust', 'psi'],
        message: `The primary estimator is ${primary}; the robust settings must use the ${primary} ψ too.`,
      });
    }
  });
/**
 * Protocol settings after parsing (defaults filled in).
 *
 * @example
 * const settings: ProtocolSettings = protocolSettingsSchema.parse(body);
 */
export type ProtocolSettings = z.output<typeof protocolSettingsSchema>;
/**
 * Protocol settings as a form or API client may send them (fields with defaults may be left out).
 *
 * @example
 * const input: ProtocolSettingsInput = { ...settings, outlierPolicy: {} }; // parses with the defaults 0.05 and 0.025
 */
export type ProtocolSettingsInput = z.input<typeof protocolSettingsSchema>;

function refineIntervalParts(parts: readonly IntervalPart[], interval: { low: number; high: number }, ctx: z.RefinementCtx) {
  parts.forEach((part, index) => {
    const path = ['samplePlan', 'intervalParts', index];
    const expectedLow = index === 0 ? interval.low : parts[index - 1].high;
    if (part.low !== expectedLow) {
      ctx.addIssue({
        code: 'custom',
        path: [...path, 'low'],
        message:
          index === 0
            ? `The first part starts at the low end of the measuring interval (${interval.low}).`
            : `Part ${index + 1} starts where part ${index} ends (${expectedLow}).`,
      });
    }
    if (!(part.low < part.high)) {
      ctx.addIssue({ code: 'custom', path: [...path, 'high'], message: `Part ${index + 1} must end above where it starts (${part.low}).` });
    }
    if (index === parts.length - 1 && part.high !== interval.high) {
      ctx.addIssue({
        code: 'custom',
        path: [...path, 'high'],
        message: `The last part ends at the high end of the measuring interval (${interval.high}).`,
      });
    }
  });
}

// ---------------------------------------------------------------------------------------------
// Warnings and starting points

/**
 * Something the designer should see that does not stop the protocol from being saved.
 *
 * @example
 * const warning: ProtocolWarning = { path: 'samplePlan.count', message: 'The plan has 20 samples; …' };
 */
export interface ProtocolWarning {
  /** Dotted field path, as the form names fields, e.g. "samplePlan.count". */
  path: string;
  message: string;
}

/**
 * Advice on settings that are valid but weaker than usual practice: fewer than 40 samples or 5 days
 * (EP09 practice, from memory), a redescending ψ started from OLS (its ρ is not convex, so IRLS may stop
 * in a local minimum — STATISTICS.md), and procedures not yet described.
 *
 * @example
 * protocolWarnings({ ...settings, samplePlan: { ...settings.samplePlan, count: 20 } });
 * // [{ path: 'samplePlan.count', message: 'The plan has 20 samples; at least 40 are usual …' }]
 */
export function protocolWarnings(settings: ProtocolSettings): ProtocolWarning[] {
  const warnings: ProtocolWarning[] = [];
  const { count, days } = settings.samplePlan;
  if (count < RECOMMENDED_MIN_SAMPLES) {
    warnings.push({
      path: 'samplePlan.count',
      message: `The plan has ${count} samples; at least ${RECOMMENDED_MIN_SAMPLES} are usual for a method comparison, and fewer give wide confidence intervals.`,
    });
  }
  if (days < RECOMMENDED_MIN_DAYS) {
    warnings.push({
      path: 'samplePlan.days',
      message: `The plan spans ${days} day${days === 1 ? '' : 's'}; spreading measurements over at least ${RECOMMENDED_MIN_DAYS} days lets day-to-day variation show.`,
    });
  }
  if (settings.robust.psi !== 'huber' && settings.robust.start === 'ols') {
    warnings.push({
      path: 'robust.start',
      message: `The ${settings.robust.psi} ψ redescends, so a fit started from OLS can stop in a local minimum; the S-estimate is the safer start.`,
    });
  }
  for (const field of ['candidateProcedure', 'comparativeProcedure'] as const) {
    if (settings[field].trim() === '') {
      warnings.push({
        path: field,
        message: `Describe the ${field === 'candidateProcedure' ? 'candidate' : 'comparative'} procedure (analyser, reagent and calibrator lots) before approval.`,
      });
    }
  }
  return warnings;
}

/**
 * Splits a measuring interval low < high into low, middle and high thirds with a third of the samples each,
 * at equal steps on a linear scale or, for analytes whose results span decades (TSH, hCG), on a log scale,
 * where linear thirds would put almost every patient and decision level in the low third.
 *
 * @example
 * intervalThirds(10, 500, 'linear'); // boundaries 10, 173, 337, 500
 * intervalThirds(0.01, 100, 'log');  // boundaries 0.01, 0.215, 4.64, 100
 */
export function intervalThirds(low: number, high: number, scale: SpreadScale): IntervalPart[] {
  if (!(low < high)) throw new StatsInputError(`The interval's low end (${low}) must be below its high end (${high}).`, { field: 'low' });
  if (scale === 'log' && !(low > 0)) {
    throw new StatsInputError(`Log-scale thirds need a low end above 0 (got ${low}).`, { field: 'low' });
  }
  const exact = [1, 2].map((step) => (scale === 'log' ? low * (high / low) ** (step / 3) : low + ((high - low) * step) / 3));
  // Tidy numbers for the designer: the fewest significant figures (3 or more) that keep the parts in order.
  let inner = exact;
  for (let digits = 3; digits <= 15; digits++) {
    inner = exact.map((value) => Number(value.toPrecision(digits)));
    if (low < inner[0] && inner[0] < inner[1] && inner[1] < high) break;
  }
  const bounds = [low, ...inner, high];
  return ['low', 'middle', 'high'].map((label, index) => ({
    label,
    low: bounds[index],
    high: bounds[index + 1],
    share: 1 / 3,
  }));
}

/**
 * Settings shared by every new protocol. 40 samples over 5 days, measured once: the usual minimum of EP09
 * practice (from memory); a template adds thirds of its measuring interval on the scale it names, so that
 * samples cover the interval rather than cluster where most patients are. Singlicate measurement keeps the
 * workload down, so λ starts as given = 1 (equal error variances) until the lab knows both procedures'
 * imprecision. Huber ψ from OLS is the convex, well-behaved robust default; ESD at α = 0.05 with at most
 * 2.5 % outliers and 2,000 bootstrap resamples follow STATISTICS.md. The seed is fixed so the default is
 * reproducible; any recorded seed reproduces the bootstrap.
 */
function commonSettings(): Omit<ProtocolSettings, 'title' | 'templateId' | 'analyte' | 'decisionLevels' | 'primaryEstimator'> {
  return {
    candidateProcedure: '',
    comparativeProcedure: '',
    samplePlan: { count: RECOMMENDED_MIN_SAMPLES, replicates: 1, days: RECOMMENDED_MIN_DAYS, intervalParts: [] },
    robust: { psi: 'huber', tuning: [...DEFAULT_TUNING.huber], start: 'ols' },
    demingLambda: { mode: 'given', value: 1 },
    outlierPolicy: { esdAlpha: 0.05, maxShare: 0.025 },
    bootstrap: { resamples: 2000, seed: 1 },
  };
}

/**
 * Protocol settings built from a template: its analyte, units and measuring interval split into thirds
 * on the template's spread scale, its decision levels
 * each with the level's own allowable bias or else the template's, its suggested regression as primary
 * estimator (with ψ and start matching when that is an M-estimator), and the common plan described above.
 *
 * @example
 * const settings = defaultSettingsFromTemplate(glucoseTemplate);
 * settings.decisionLevels[3]; // { value: 126, meaning: 'Fasting plasma glucose at or above 126 mg/dL …', allowableBias: { rule: 'larger', absolute: 6, percent: 8, source: '…' } }
 * protocolSettingsSchema.parse(settings); // passes
 */
export function defaultSettingsFromTemplate(template: AnalyteTemplate): ProtocolSettings {
  const { low, high } = template.measuringInterval;
  const method = template.suggestedRegression.method;
  const common = commonSettings();
  const robust =
    method === 'huber' || method === 'tukey' || method === 'hampel'
      ? { psi: method, tuning: [...DEFAULT_TUNING[method]], start: method === 'huber' ? ('ols' as const) : ('s-estimate' as const) }
      : common.robust;
  return {
    ...common,
    title: `${template.name} method comparison`,
    templateId: template.id,
    analyte: { name: template.name, units: template.units.conventional, measuringInterval: { low, high } },
    samplePlan: { ...common.samplePlan, intervalParts: intervalThirds(low, high, template.sampleSpread.scale) },
    decisionLevels: template.decisionLevels.map((level) => ({
      value: level.value,
      meaning: level.meaning,
      allowableBias: { ...(level.allowableBias ?? template.allowableBias) },
    })),
    primaryEstimator: { method, rationale: template.suggestedRegression.reason },
    robust,
  };
}

/**
 * Settings for a protocol started without a template: the common plan with the analyte, title,
 * measuring interval, its parts, decision levels and estimator rationale left for the designer to fill in
 * (so it does not pass `protocolSettingsSchema` until they are). Deming is the primary estimator because
 * both procedures have measurement error.
 *
 * @example
 * const form = useForm<ProtocolSettingsInput>({ defaultValues: blankSettings() });
 */
export function blankSettings(): ProtocolSettings {
  return {
    ...commonSettings(),
    title: '',
    analyte: { name: '', units: '', measuringInterval: { low: 0, high: 0 } },
    decisionLevels: [],
    primaryEstimator: { method: 'deming', rationale: '' },
  };
}
