import { readdirSync, readFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import {
  analyteTemplateSchema,
  blankSettings,
  defaultSettingsFromTemplate,
  intervalThirds,
  protocolSettingsSchema,
  protocolWarnings,
  type AnalyteTemplate,
  type ProtocolSettings,
} from '../../../src/lib/protocolSchema';
import type { AllowableLimit } from '../../../src/lib/stats/allowable';
import { StatsInputError } from '../../../src/lib/stats/errors';

const protocolsDir = fileURLToPath(new URL('../../../protocols/', import.meta.url));
const templateFiles = readdirSync(protocolsDir).filter((file) => file.endsWith('.json'));
const rawTemplate = (file: string): unknown => JSON.parse(readFileSync(join(protocolsDir, file), 'utf8'));
const templates: AnalyteTemplate[] = templateFiles.map((file) => analyteTemplateSchema.parse(rawTemplate(file)));
const glucose = templates.find((template) => template.id === 'glucose') as AnalyteTemplate;

/** Dotted paths of the issues when parsing fails; [] when it passes. */
function issuePaths(result: { success: boolean; error?: { issues: { path: PropertyKey[] }[] } }): string[] {
  return result.success ? [] : (result.error?.issues ?? []).map((issue) => issue.path.join('.'));
}

/** Valid glucose settings with one change applied, to check that exactly that change is refused. */
function glucoseSettingsWith(change: (settings: ProtocolSettings) => void): ProtocolSettings {
  const settings = structuredClone(defaultSettingsFromTemplate(glucose));
  change(settings);
  return settings;
}

const refusedPaths = (change: (settings: ProtocolSettings) => void) =>
  issuePaths(protocolSettingsSchema.safeParse(glucoseSettingsWith(change)));

describe('analyte templates in protocols/', () => {
  it('has at least 12 templates covering clinical chemistry, immunoassay and haematology', () => {
    expect(templates.length).toBeGreaterThanOrEqual(12);
    const disciplines = new Set(templates.map((template) => template.discipline));
    for (const discipline of ['clinical chemistry', 'immunoassay', 'haematology'] as const) {
      expect(disciplines.has(discipline), discipline).toBe(true);
    }
  });

  it.each(templateFiles)('%s parses and its id is its file name', (file) => {
    const result = analyteTemplateSchema.safeParse(rawTemplate(file));
    expect(issuePaths(result)).toEqual([]);
    expect(result.data?.id).toBe(basename(file, '.json'));
  });

  it('marks every value recalled from memory as such, with the required wording', () => {
    for (const template of templates) {
      const sources = [
        template.measuringInterval.source,
        template.allowableBias.source,
        ...template.decisionLevels.flatMap((level) => [level.source, level.allowableBias?.source ?? '']),
      ].filter((source) => source.includes('from memory'));
      for (const source of sources) {
        expect(source, template.id).toMatch(/from memory — (verify against the current source|replace with)/);
      }
    }
  });
});

/*
 * SI factors checked against chemistry outside the project: molar masses from the formulae and the IUPAC
 * standard atomic weights (H 1.008, C 12.011, N 14.007, O 15.999, P 30.974, Ca 40.078, Co 58.933,
 * I 126.904 — from memory), and the definitions of the units (1 U = 1 µmol/min, 1 kat = 1 mol/s).
 */
describe('SI conversion factors (SI = conventional × factor)', () => {
  const atomicWeight: Record<string, number> = { H: 1.008, C: 12.011, N: 14.007, O: 15.999, P: 30.974, Ca: 40.078, Co: 58.933, I: 126.904 };
  const molarMass = (formula: string) =>
    [...formula.matchAll(/([A-Z][a-z]?)(\d*)/g)].reduce((sum, [, element, count]) => sum + atomicWeight[element] * Number(count || 1), 0);
  // Formula of the substance each template's factor is based on (triglycerides: triolein, vitamin B12: cyanocobalamin).
  const formulaOf: Record<string, string> = {
    glucose: 'C6H12O6',
    creatinine: 'C4H7N3O',
    calcium: 'Ca',
    'total-cholesterol': 'C27H46O',
    triglycerides: 'C57H104O6',
    'free-t4': 'C15H11I4NO4',
    'vitamin-b12': 'C63H88CoN14O14P',
  };
  // Each unit as an amount of its base quantity per litre.
  const perLitre: Record<string, { base: 'g' | 'mol' | 'count' | 'IU' | 'kat'; size: number }> = {
    'mg/dL': { base: 'g', size: 1e-3 / 0.1 },
    'g/dL': { base: 'g', size: 1 / 0.1 },
    'g/L': { base: 'g', size: 1 },
    'ng/dL': { base: 'g', size: 1e-9 / 0.1 },
    'ng/mL': { base: 'g', size: 1e-9 / 1e-3 },
    'µg/L': { base: 'g', size: 1e-6 },
    'pg/mL': { base: 'g', size: 1e-12 / 1e-3 },
    'mmol/L': { base: 'mol', size: 1e-3 },
    'µmol/L': { base: 'mol', size: 1e-6 },
    'pmol/L': { base: 'mol', size: 1e-12 },
    '×10³/µL': { base: 'count', size: 1e3 / 1e-6 },
    '×10⁹/L': { base: 'count', size: 1e9 },
    'mIU/mL': { base: 'IU', size: 1e-3 / 1e-3 },
    'IU/L': { base: 'IU', size: 1 },
    'U/L': { base: 'kat', size: 1e-6 / 60 },
    'µkat/L': { base: 'kat', size: 1e-6 },
  };
  const withSi = templates.filter((template) => template.units.si !== undefined);

  it('gives the SI unit and factor together', () => {
    for (const template of templates) {
      expect(template.units.si === undefined, template.id).toBe(template.units.siFactor === undefined);
    }
    expect(withSi.length).toBeGreaterThan(0);
  });

  it.each(withSi.map((template) => [template.id, template] as const))('%s factor agrees with its units within 0.1 %', (id, template) => {
    const conventional = perLitre[template.units.conventional];
    const si = perLitre[template.units.si as string];
    expect(conventional, `unit ${template.units.conventional}`).toBeDefined();
    expect(si, `unit ${template.units.si}`).toBeDefined();
    let expected: number;
    if (conventional.base === 'g' && si.base === 'mol') {
      expect(formulaOf[id], `formula for ${id}`).toBeDefined();
      expected = conventional.size / molarMass(formulaOf[id]) / si.size;
    } else {
      expect(si.base).toBe(conventional.base);
      expected = conventional.size / si.size;
    }
    expect(Math.abs((template.units.siFactor as number) / expected - 1)).toBeLessThan(1e-3);
  });
});

describe('analyteTemplateSchema refusals', () => {
  const validGlucose = () => structuredClone(rawTemplate('glucose.json')) as Record<string, any>;

  it('refuses an SI unit without its factor, at units.siFactor', () => {
    const template = validGlucose();
    delete template.units.siFactor;
    expect(issuePaths(analyteTemplateSchema.safeParse(template))).toEqual(['units.siFactor']);
  });

  it('refuses an id that is not kebab-case', () => {
    const template = validGlucose();
    template.id = 'Free_T4';
    expect(issuePaths(analyteTemplateSchema.safeParse(template))).toEqual(['id']);
  });

  it('refuses a per-level allowable bias of 0, at that level', () => {
    const template = validGlucose();
    template.decisionLevels[1].allowableBias = { rule: 'absolute', absolute: 0, source: 'lab policy' };
    expect(issuePaths(analyteTemplateSchema.safeParse(template))).toEqual(['decisionLevels.1.allowableBias.absolute']);
  });

  it('refuses a log-scale spread over an interval that starts at 0', () => {
    const template = validGlucose();
    template.measuringInterval.low = 0;
    template.sampleSpread.scale = 'log';
    expect(issuePaths(analyteTemplateSchema.safeParse(template))).toEqual(['sampleSpread.scale']);
  });

  it('refuses a decision level outside the measuring interval and a missing source', () => {
    const template = validGlucose();
    template.decisionLevels[0].value = 5;
    expect(issuePaths(analyteTemplateSchema.safeParse(template))).toEqual(['decisionLevels.0.value']);
    const unsourced = validGlucose();
    unsourced.allowableBias.source = ' ';
    expect(issuePaths(analyteTemplateSchema.safeParse(unsourced))).toEqual(['allowableBias.source']);
  });
});

describe('defaultSettingsFromTemplate', () => {
  it.each(templates.map((template) => [template.id, template] as const))('%s gives valid settings', (_id, template) => {
    const settings = defaultSettingsFromTemplate(template);
    expect(issuePaths(protocolSettingsSchema.safeParse(settings))).toEqual([]);
    expect(settings.templateId).toBe(template.id);
    expect(settings.decisionLevels.map((level) => level.value)).toEqual(template.decisionLevels.map((level) => level.value));
    settings.decisionLevels.forEach((level, index) => {
      expect(level.allowableBias).toEqual(template.decisionLevels[index].allowableBias ?? template.allowableBias);
    });
    expect(settings.primaryEstimator.method).toBe(template.suggestedRegression.method);
    // Only the procedure descriptions are left to write: the plan itself draws no warning.
    expect(protocolWarnings(settings).map((warning) => warning.path)).toEqual(['candidateProcedure', 'comparativeProcedure']);
  });

  it('keeps a per-level override instead of the template bias (TSH at 0.1 mIU/L)', () => {
    const tsh = templates.find((template) => template.id === 'tsh') as AnalyteTemplate;
    const level = defaultSettingsFromTemplate(tsh).decisionLevels.find((candidate) => candidate.value === 0.1);
    expect(level?.allowableBias.rule).toBe('percent');
    expect(tsh.allowableBias.rule).toBe('larger');
  });

  it('parses into the statistics engine’s allowable-limit shape', () => {
    const limit: AllowableLimit = protocolSettingsSchema.parse(defaultSettingsFromTemplate(glucose)).decisionLevels[0].allowableBias;
    expect(limit.rule).toBe('larger');
  });
});

describe('intervalThirds', () => {
  it('splits on a linear scale into equal widths and on a log scale into equal ratios, a third each', () => {
    const narrow = intervalThirds(100, 180, 'linear');
    const widths = narrow.map((part) => part.high - part.low);
    // Boundaries are rounded to 3 significant figures, so widths agree to about 1 % of the interval.
    for (const width of widths) expect(Math.abs(width - 80 / 3)).toBeLessThan(0.8);
    const wide = intervalThirds(0.01, 100, 'log');
    const ratios = wide.map((part) => part.high / part.low);
    for (const ratio of ratios) expect(Math.log10(ratio)).toBeCloseTo(4 / 3, 2);
    for (const parts of [narrow, wide]) {
      expect(parts.map((part) => part.share).reduce((sum, share) => sum + share, 0)).toBeCloseTo(1, 12);
      parts.slice(1).forEach((part, index) => expect(part.low).toBe(parts[index].high));
    }
  });

  it('keeps the parts in order when 3 significant figures cannot tell the boundaries apart', () => {
    const parts = intervalThirds(1.0001, 1.0004, 'linear');
    parts.forEach((part) => expect(part.low).toBeLessThan(part.high));
    expect(parts[0].low).toBe(1.0001);
    expect(parts[2].high).toBe(1.0004);
  });

  it('refuses a log scale from 0 and an empty interval, naming the low end', () => {
    expect(() => intervalThirds(0, 100, 'log')).toThrow(StatsInputError);
    expect(() => intervalThirds(0, 100, 'log')).toThrow(/above 0/);
    expect(() => intervalThirds(5, 5, 'linear')).toThrow(/below its high end/);
  });
});

describe('protocolSettingsSchema refusals, each at its field', () => {
  it('refuses an allowable bias of 0 or below', () => {
    expect(refusedPaths((s) => (s.decisionLevels[2].allowableBias.absolute = 0))).toEqual(['decisionLevels.2.allowableBias.absolute']);
    expect(refusedPaths((s) => (s.decisionLevels[0].allowableBias.percent = -8))).toEqual(['decisionLevels.0.allowableBias.percent']);
  });

  it("refuses rule 'larger' without both parts and a part the rule does not use", () => {
    expect(refusedPaths((s) => delete s.decisionLevels[1].allowableBias.percent)).toEqual(['decisionLevels.1.allowableBias.percent']);
    expect(refusedPaths((s) => (s.decisionLevels[1].allowableBias.rule = 'absolute'))).toEqual(['decisionLevels.1.allowableBias.percent']);
  });

  it('refuses a decision level outside the measuring interval', () => {
    expect(refusedPaths((s) => (s.decisionLevels[3].value = 600))).toEqual(['decisionLevels.3.value']);
  });

  it('refuses a duplicate decision level, at the repeat', () => {
    expect(refusedPaths((s) => (s.decisionLevels[4].value = s.decisionLevels[1].value))).toEqual(['decisionLevels.4.value']);
  });

  it('refuses a measuring interval whose low end is not below its high end', () => {
    const paths = refusedPaths((s) => (s.analyte.measuringInterval = { low: 500, high: 10 }));
    expect(paths).toEqual(['analyte.measuringInterval.high']);
  });

  it('refuses shares that do not sum to 1, and parts that leave gaps', () => {
    expect(refusedPaths((s) => (s.samplePlan.intervalParts[0].share = 0.5))).toEqual(['samplePlan.intervalParts']);
    expect(refusedPaths((s) => (s.samplePlan.intervalParts[1].low += 1))).toEqual(['samplePlan.intervalParts.1.low']);
    expect(refusedPaths((s) => (s.samplePlan.intervalParts[2].high = 400))).toEqual(['samplePlan.intervalParts.2.high']);
  });

  it('accepts shares that sum to 1 within 1e-6', () => {
    expect(refusedPaths((s) => s.samplePlan.intervalParts.forEach((part) => (part.share = 0.3333333)))).toEqual([]);
  });

  it('refuses λ given without a value or at 0, and λ from duplicates without duplicates', () => {
    expect(refusedPaths((s) => (s.demingLambda = { mode: 'given' }))).toEqual(['demingLambda.value']);
    expect(refusedPaths((s) => (s.demingLambda = { mode: 'given', value: 0 }))).toEqual(['demingLambda.value']);
    expect(refusedPaths((s) => (s.demingLambda = { mode: 'duplicates' }))).toEqual(['demingLambda.mode']);
    expect(
      refusedPaths((s) => {
        s.demingLambda = { mode: 'duplicates' };
        s.samplePlan.replicates = 2;
      }),
    ).toEqual([]);
  });

  it('refuses tuning constants that do not fit the ψ', () => {
    expect(refusedPaths((s) => (s.robust.tuning = [1.345, 2]))).toEqual(['robust.tuning']);
    expect(refusedPaths((s) => (s.robust.tuning = [-1]))).toEqual(['robust.tuning.0']);
    expect(refusedPaths((s) => (s.robust = { psi: 'hampel', tuning: [1.345], start: 's-estimate' }))).toEqual(['robust.tuning']);
    expect(refusedPaths((s) => (s.robust = { psi: 'hampel', tuning: [2, 8, 4], start: 's-estimate' }))).toEqual(['robust.tuning.2']);
    expect(refusedPaths((s) => (s.robust = { psi: 'hampel', tuning: [2, 4, 8], start: 's-estimate' }))).toEqual([]);
  });

  it('refuses robust settings whose ψ differs from an M-estimator chosen as primary', () => {
    expect(refusedPaths((s) => (s.primaryEstimator.method = 'tukey'))).toEqual(['robust.psi']);
  });

  it('refuses an empty rationale, fewer than 3 samples and outlier settings out of range', () => {
    expect(refusedPaths((s) => (s.primaryEstimator.rationale = '  '))).toEqual(['primaryEstimator.rationale']);
    expect(refusedPaths((s) => (s.samplePlan.count = 2))).toEqual(['samplePlan.count']);
    expect(refusedPaths((s) => (s.outlierPolicy.esdAlpha = 0.5))).toEqual(['outlierPolicy.esdAlpha']);
    expect(refusedPaths((s) => (s.outlierPolicy.maxShare = 0.25))).toEqual(['outlierPolicy.maxShare']);
    expect(refusedPaths((s) => (s.bootstrap.resamples = 100))).toEqual(['bootstrap.resamples']);
    expect(refusedPaths((s) => (s.bootstrap.seed = 1.5))).toEqual(['bootstrap.seed']);
  });

  it('fills in outlier and bootstrap defaults when they are left out', () => {
    const input: Record<string, any> = glucoseSettingsWith(() => {});
    input.outlierPolicy = {};
    delete input.bootstrap.resamples;
    const parsed = protocolSettingsSchema.parse(input);
    expect(parsed.outlierPolicy).toEqual({ esdAlpha: 0.05, maxShare: 0.025 });
    expect(parsed.bootstrap.resamples).toBe(2000);
  });
});

describe('protocolWarnings', () => {
  it('warns, without refusing, when fewer than 40 samples are planned', () => {
    const settings = glucoseSettingsWith((s) => (s.samplePlan.count = 20));
    expect(protocolSettingsSchema.safeParse(settings).success).toBe(true);
    const countWarnings = protocolWarnings(settings).filter((warning) => warning.path === 'samplePlan.count');
    expect(countWarnings).toHaveLength(1);
    expect(countWarnings[0].message).toMatch(/20 samples.*40/);
  });

  it('warns when a redescending ψ starts from OLS', () => {
    const settings = glucoseSettingsWith((s) => (s.robust = { psi: 'tukey', tuning: [4.685], start: 'ols' }));
    expect(protocolWarnings(settings).map((warning) => warning.path)).toContain('robust.start');
  });
});

describe('blankSettings', () => {
  it('is refused only where the designer still has to fill something in', () => {
    const paths = new Set(issuePaths(protocolSettingsSchema.safeParse(blankSettings())));
    expect(paths).toEqual(
      new Set(['title', 'analyte.name', 'analyte.units', 'analyte.measuringInterval.high', 'samplePlan.intervalParts', 'decisionLevels', 'primaryEstimator.rationale']),
    );
  });
});
