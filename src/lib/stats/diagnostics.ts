import { StatsInputError } from './errors';
import { createLineDesign } from './linear';
import { fitOlsLine } from './ols';
import type { LineFit } from './types';
import { validatePairs } from './validate';

/**
 * Per-sample regression diagnostics, in input order. A value is null where it is undefined:
 * a hat value of 1 (the fit passes through the sample whatever its y), or no degrees of freedom left
 * for the deleted-residual scale (n − p − 1 = 0).
 */
export interface RegressionDiagnostics {
  n: number;
  /** Number of coefficients (2 for a line). */
  p: number;
  /** The fit the diagnostics belong to. */
  method: LineFit['method'];
  residuals: number[];
  hat: number[];
  /** Externally studentized (deleted) residuals. */
  studentizedResiduals: (number | null)[];
  cooksDistance: (number | null)[];
  dffits: (number | null)[];
  /** Final robust weights when the fit has them. */
  weights?: number[];
}

/** Hat values closer to 1 than this are treated as 1. */
const HAT_ONE = 1e-12;

/**
 * Hat values, externally studentized residuals, Cook's distance and DFFITS for a line
 * (Belsley, Kuh & Welsch, Regression Diagnostics 1980; Cook, Technometrics 1977), with p = 2:
 * rᵢ = √wᵢ·eᵢ/(s√(1 − hᵢ)) with s² = Σwe²/(m − p), tᵢ = rᵢ√((m − p − 1)/(m − p − rᵢ²)),
 * Dᵢ = rᵢ²hᵢ/(p(1 − hᵢ)), DFFITSᵢ = tᵢ√(hᵢ/(1 − hᵢ)).
 * Without `fit` (or for an unweighted fit) these are the OLS diagnostics (w = 1, m = n), as R's
 * hatvalues, rstudent, cooks.distance and dffits of lm. With a robust fit carrying weights and hat values,
 * they are those of its final weighted least-squares step (R's functions on lm with those weights), m being the
 * number of samples with non-zero weight; a sample with weight 0 took no part in that step, so its Cook's
 * distance and DFFITS are 0 and its studentized residual is eᵢ/(s√(1 + x̃ᵢ'(X'WX)⁻¹x̃ᵢ)), a prediction residual.
 *
 * @example
 * regressionDiagnostics([1, 2, 3, 4, 10], [1.1, 2, 2.9, 4.2, 7]).cooksDistance[4]; // large: the point at x = 10
 */
export function regressionDiagnostics(x: readonly number[], y: readonly number[], fit?: LineFit): RegressionDiagnostics {
  validatePairs(x, y);
  const n = x.length;
  const p = 2;
  const line = fit ?? fitOlsLine(x, y);
  if (line.n !== n) {
    throw new StatsInputError(`the fit was made on ${line.n} samples but ${n} were given`, { field: 'fit' });
  }
  const weighted = line.weights !== undefined;
  if (weighted && !line.hat) {
    throw new StatsInputError(`the ${line.method} fit has weights but no hat values`, { field: 'fit' });
  }
  const weights = line.weights ?? new Array<number>(n).fill(1);
  const hat = weighted ? (line.hat as number[]) : createLineDesign(x).hatDiagonal(null);
  const residuals = x.map((xi, i) => y[i] - line.intercept - line.slope * xi);

  let weightedSS = 0;
  let used = 0;
  for (let i = 0; i < n; i++) {
    if (weights[i] > 0) {
      weightedSS += weights[i] * residuals[i] * residuals[i];
      used++;
    }
  }
  const df = used - p;
  if (df < 1) {
    throw new StatsInputError(`at least ${p + 1} samples with non-zero weight are needed (got ${used})`, { field: 'fit' });
  }
  const s = Math.sqrt(weightedSS / df);
  // (X'WX)⁻¹ gives the leverage of a zero-weight sample as a new point
  const inverse = weighted ? createLineDesign(x).crossProductInverse(new Float64Array(weights)) : null;

  const studentizedResiduals: (number | null)[] = [];
  const cooksDistance: (number | null)[] = [];
  const dffits: (number | null)[] = [];
  for (let i = 0; i < n; i++) {
    const h = hat[i];
    if (weights[i] === 0 && inverse) {
      const [[caa, cab], [, cbb]] = inverse;
      const leverage = caa + 2 * x[i] * cab + x[i] * x[i] * cbb;
      studentizedResiduals.push(residuals[i] / (s * Math.sqrt(1 + leverage)));
      cooksDistance.push(0);
      dffits.push(0);
      continue;
    }
    if (h >= 1 - HAT_ONE) {
      studentizedResiduals.push(null);
      cooksDistance.push(null);
      dffits.push(null);
      continue;
    }
    const internal = (Math.sqrt(weights[i]) * residuals[i]) / (s * Math.sqrt(1 - h));
    cooksDistance.push((internal * internal * h) / (p * (1 - h)));
    if (df - 1 < 1) {
      studentizedResiduals.push(null);
      dffits.push(null);
      continue;
    }
    const external = internal * Math.sqrt((df - 1) / (df - internal * internal));
    studentizedResiduals.push(external);
    dffits.push(external * Math.sqrt(h / (1 - h)));
  }
  return {
    n,
    p,
    method: line.method,
    residuals,
    hat,
    studentizedResiduals,
    cooksDistance,
    dffits,
    ...(line.weights ? { weights: line.weights } : {}),
  };
}

/** One flag on a sample, naming the rule and its threshold. */
export interface DiagnosticFlag {
  kind: 'highLeverage' | 'influential' | 'largeResidual' | 'lowWeight';
  /** The sample's value of the statistic. */
  value: number;
  threshold: number;
  /** The rule, e.g. "h > 2p/n". */
  rule: string;
  /** A plain sentence for the report. */
  message: string;
}

/** Flags of one sample (only samples with at least one flag are listed). */
export interface SampleFlags {
  index: number;
  flags: DiagnosticFlag[];
}

/**
 * Rules of the diagnostic flags (STATISTICS.md, Diagnostics).
 *
 * @example
 * FLAG_RULES.highLeverage; // 'h > 2p/n'
 */
export const FLAG_RULES = {
  highLeverage: 'h > 2p/n',
  influential: "Cook's D > 4/n",
  largeResidual: '|studentized residual| > 3',
  lowWeight: 'weight < 0.25',
} as const;

const format = (v: number) => Number(v.toPrecision(3)).toString();

/**
 * Flags per sample with the named thresholds: high leverage h > 2p/n (Hoaglin & Welsch, Am Stat 1978),
 * influential Cook's D > 4/n (common practice), |studentized residual| > 3, robust weight < 0.25.
 *
 * @example
 * diagnosticFlags(regressionDiagnostics(x, y, huberFit)); // [{ index: 7, flags: [{ kind: 'lowWeight', ... }] }]
 */
export function diagnosticFlags(diagnostics: RegressionDiagnostics): SampleFlags[] {
  const { n, p } = diagnostics;
  const leverageLimit = (2 * p) / n;
  const cookLimit = 4 / n;
  const result: SampleFlags[] = [];
  for (let i = 0; i < n; i++) {
    const flags: DiagnosticFlag[] = [];
    const h = diagnostics.hat[i];
    if (h > leverageLimit) {
      flags.push({
        kind: 'highLeverage',
        value: h,
        threshold: leverageLimit,
        rule: FLAG_RULES.highLeverage,
        message: `sample ${i + 1}: hat value ${format(h)} > 2p/n = ${format(leverageLimit)} (high leverage)`,
      });
    }
    const d = diagnostics.cooksDistance[i];
    if (d !== null && d > cookLimit) {
      flags.push({
        kind: 'influential',
        value: d,
        threshold: cookLimit,
        rule: FLAG_RULES.influential,
        message: `sample ${i + 1}: Cook's distance ${format(d)} > 4/n = ${format(cookLimit)} (influential)`,
      });
    }
    const t = diagnostics.studentizedResiduals[i];
    if (t !== null && Math.abs(t) > 3) {
      flags.push({
        kind: 'largeResidual',
        value: t,
        threshold: 3,
        rule: FLAG_RULES.largeResidual,
        message: `sample ${i + 1}: studentized residual ${format(t)}, |t| > 3 (outlying)`,
      });
    }
    const w = diagnostics.weights?.[i];
    if (w !== undefined && w < 0.25) {
      flags.push({
        kind: 'lowWeight',
        value: w,
        threshold: 0.25,
        rule: FLAG_RULES.lowWeight,
        message: `sample ${i + 1}: robust weight ${format(w)} < 0.25 (heavily down-weighted)`,
      });
    }
    if (flags.length > 0) result.push({ index: i, flags });
  }
  return result;
}
