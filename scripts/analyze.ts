/**
 * Batch analysis of a method-comparison CSV (STATISTICS.md, CLI):
 *   npm run analyze -- FILE.csv [--json] [--methods ols,deming,...] [--lambda 1] [--decision-levels 70,126,200] [--seed N]
 * Exit code 0 on success, 1 for bad input (the message names the CSV line), 2 for bad arguments.
 */
import { readFileSync } from 'node:fs';
import {
  ALL_METHODS,
  StatsInputError,
  analyzeComparison,
  compactAnalysis,
  formatNumber,
  methodName,
  parseComparisonCsv,
  type ComparisonAnalysis,
  type MethodKey,
} from '../src/lib/stats/index';

class UsageError extends Error {}

const USAGE =
  'usage: npm run analyze -- FILE.csv [--json] [--methods ols,deming,passingBablok,huber,tukey,hampel,mm] ' +
  '[--lambda 1] [--decision-levels 70,126,200] [--seed N]';

interface Arguments {
  file: string;
  json: boolean;
  methods?: MethodKey[];
  lambda?: number;
  decisionLevels?: number[];
  seed?: number;
}

function parseArguments(argv: string[]): Arguments {
  let file: string | undefined;
  const result: Partial<Arguments> = { json: false };
  for (let i = 0; i < argv.length; i++) {
    const arg = argv[i];
    const value = () => {
      const next = argv[++i];
      if (next === undefined || next.startsWith('--')) throw new UsageError(`${arg} needs a value`);
      return next;
    };
    switch (arg) {
      case '--json':
        result.json = true;
        break;
      case '--methods':
        result.methods = value()
          .split(',')
          .map((m) => m.trim())
          .filter((m) => m !== '')
          .map((m) => {
            if (!(ALL_METHODS as readonly string[]).includes(m)) {
              throw new UsageError(`unknown method '${m}' (known: ${ALL_METHODS.join(', ')})`);
            }
            return m as MethodKey;
          });
        if (result.methods.length === 0) throw new UsageError('--methods lists no method');
        break;
      case '--lambda':
        result.lambda = parseNumber(value(), '--lambda');
        if (!(result.lambda > 0)) throw new UsageError(`--lambda must be above 0 (got ${result.lambda})`);
        break;
      case '--decision-levels':
        result.decisionLevels = value()
          .split(',')
          .map((v) => parseNumber(v.trim(), '--decision-levels'));
        break;
      case '--seed':
        result.seed = parseNumber(value(), '--seed');
        if (!Number.isInteger(result.seed)) throw new UsageError(`--seed must be a whole number (got ${result.seed})`);
        break;
      default:
        if (arg.startsWith('--')) throw new UsageError(`unknown option ${arg}`);
        if (file !== undefined) throw new UsageError(`only one CSV file can be analysed (got ${file} and ${arg})`);
        file = arg;
    }
  }
  if (file === undefined) throw new UsageError('no CSV file given');
  return { ...result, file } as Arguments;
}

function parseNumber(text: string, option: string): number {
  const value = Number(text);
  if (text === '' || !Number.isFinite(value)) throw new UsageError(`${option}: '${text}' is not a number`);
  return value;
}

const pad = (text: string, width: number) => text.padEnd(width);
const interval = (ci?: [number, number]) => (ci ? `${formatNumber(ci[0])} to ${formatNumber(ci[1])}` : '—');

function table(header: string[], rows: string[][]): string {
  const widths = header.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)) + 2);
  return [header, ...rows].map((r) => r.map((cell, k) => pad(cell, widths[k])).join('').trimEnd()).join('\n');
}

function summary(analysis: ComparisonAnalysis, file: string): string {
  const percent = Math.round(100 * (analysis.fits.ols?.confidence ?? 0.95));
  const lines: string[] = [];
  lines.push(`Method comparison of ${file}: ${analysis.n} samples, candidate (y) against comparative (x)`);
  lines.push(`Deming λ = ${formatNumber(analysis.lambda.value)} (${analysis.lambda.source}); Pearson r = ${formatNumber(analysis.correlation)}; seed ${analysis.seed}`);
  lines.push('');
  const fitRows = (Object.keys(analysis.fits) as MethodKey[]).map((m) => {
    const fit = analysis.fits[m]!;
    return [
      methodName(m),
      formatNumber(fit.intercept),
      interval(fit.interceptCI),
      formatNumber(fit.slope),
      interval(fit.slopeCI),
      fit.scale === undefined ? '' : formatNumber(fit.scale),
      fit.converged === undefined ? '' : `${fit.converged ? 'yes' : 'NO'} (${fit.iterations})`,
    ];
  });
  lines.push('Fits');
  lines.push(table(['method', 'intercept', `${percent} % CI`, 'slope', `${percent} % CI`, 'scale', 'converged'], fitRows));
  for (const m of Object.keys(analysis.fitErrors) as MethodKey[]) lines.push(`${methodName(m)}: not computed (${analysis.fitErrors[m]})`);
  lines.push('');
  const ba = analysis.blandAltman.absolute;
  lines.push(
    `Bland–Altman (candidate − comparative): mean difference ${formatNumber(ba.meanDifference)}, SD ${formatNumber(ba.sdDifference)}, ` +
      `limits of agreement ${formatNumber(ba.lowerLoA)} to ${formatNumber(ba.upperLoA)}`,
  );
  const pct = analysis.blandAltman.percent;
  if (pct) {
    lines.push(`Percent differences: mean ${formatNumber(pct.meanDifference)} %, limits of agreement ${formatNumber(pct.lowerLoA)} % to ${formatNumber(pct.upperLoA)} %`);
  }
  if (analysis.biasAtDecisionLevels.length > 0) {
    lines.push('');
    lines.push('Bias at decision levels');
    const rows: string[][] = [];
    for (const row of analysis.biasAtDecisionLevels) {
      for (const m of Object.keys(row.fits) as MethodKey[]) {
        const entry = row.fits[m]!;
        rows.push([formatNumber(row.level), methodName(m), formatNumber(entry.bias), `${formatNumber(entry.percentBias)} %`, interval(entry.ci), entry.ciMethod ?? '']);
      }
    }
    lines.push(table(['level', 'method', 'bias', 'bias %', `${percent} % CI`, 'CI from'], rows));
  }
  lines.push('');
  lines.push(analysis.cautions.length === 0 ? 'Cautions: none from the data.' : 'Cautions');
  for (const caution of analysis.cautions) lines.push(`- [${caution.severity}] ${caution.message}`);
  lines.push('');
  lines.push(analysis.standingCaution);
  return lines.join('\n');
}

function main(): number {
  let args: Arguments;
  try {
    args = parseArguments(process.argv.slice(2));
  } catch (error) {
    if (!(error instanceof UsageError)) throw error;
    process.stderr.write(`analyze: ${error.message}\n${USAGE}\n`);
    return 2;
  }
  let text: string;
  try {
    text = readFileSync(args.file, 'utf8');
  } catch (error) {
    process.stderr.write(`analyze: cannot read ${args.file}: ${(error as Error).message}\n`);
    return 1;
  }
  try {
    const samples = parseComparisonCsv(text);
    const analysis = analyzeComparison({
      ...samples,
      methods: args.methods,
      lambda: args.lambda,
      decisionLevels: args.decisionLevels,
      seed: args.seed,
    });
    process.stdout.write(args.json ? `${JSON.stringify(compactAnalysis(analysis), null, 2)}\n` : `${summary(analysis, args.file)}\n`);
    return 0;
  } catch (error) {
    if (!(error instanceof StatsInputError)) throw error;
    process.stderr.write(`analyze: ${args.file}: ${error.message}\n`);
    return 1;
  }
}

process.exitCode = main();
