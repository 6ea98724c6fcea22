/**
 * Geometry of the analysis plots, in data units, shared by the web plots and the PDF report: axes with nice
 * ticks, the identity line, fitted lines and the CI band of the primary fit, the difference plot, residuals
 * against fitted values, leverage against studentized residuals with Cook's distance contours, and the weight
 * function of a ψ family with the samples placed on it. Plain arrays only; the drawing is left to the caller.
 */
import type { BlandAltmanResult } from './stats/blandAltman';
import { tQuantile } from './stats/distributions';
import { normByKey, type MNormKey } from './stats/norms';
import type { LineFit, MethodKey } from './stats/types';

export interface Point {
  x: number;
  y: number;
}

/** A sample's point, with its code so that every plot can highlight the same sample. */
export interface SamplePoint extends Point {
  id: string;
}

export interface Axis {
  domain: [number, number];
  ticks: number[];
}

/** Removes float noise such as 0.30000000000000004 from a computed tick. */
const clean = (value: number) => Number(value.toPrecision(12));

/**
 * A "nice" step (1, 2 or 5 × 10^k) that splits `span` into about `count` parts (Heckbert, Graphics Gems 1990).
 *
 * @example
 * niceStep(97, 5); // 20
 */
export function niceStep(span: number, count: number): number {
  const raw = span / Math.max(1, count);
  const power = 10 ** Math.floor(Math.log10(raw));
  const fraction = raw / power;
  const nice = fraction < 1.5 ? 1 : fraction < 3 ? 2 : fraction < 7 ? 5 : 10;
  return nice * power;
}

/**
 * An axis covering `values` (and `include`, e.g. 0 or the limits of agreement), padded by `pad` of the span on
 * both sides and widened to whole nice steps, with its ticks. A single value gets a span of 10 % around it.
 *
 * @example
 * niceAxis([43, 466]).ticks; // [0, 100, 200, 300, 400, 500]
 */
export function niceAxis(values: readonly number[], options: { include?: readonly number[]; count?: number; pad?: number } = {}): Axis {
  const all = [...values, ...(options.include ?? [])].filter(Number.isFinite);
  if (all.length === 0) return { domain: [0, 1], ticks: [0, 0.5, 1] };
  let lo = Math.min(...all);
  let hi = Math.max(...all);
  if (lo === hi) {
    const half = lo === 0 ? 1 : Math.abs(lo) * 0.05;
    lo -= half;
    hi += half;
  }
  const pad = (options.pad ?? 0.03) * (hi - lo);
  lo -= pad;
  hi += pad;
  const step = niceStep(hi - lo, options.count ?? 5);
  const start = Math.floor(lo / step);
  const end = Math.ceil(hi / step);
  const ticks: number[] = [];
  for (let k = start; k <= end; k++) ticks.push(clean(k * step));
  return { domain: [clean(start * step), clean(end * step)], ticks };
}

/**
 * The line y = a + b·x across an x-domain, as its two end points.
 *
 * @example
 * lineSegment(2, 1.03, [0, 100]); // [{ x: 0, y: 2 }, { x: 100, y: 105 }]
 */
export function lineSegment(intercept: number, slope: number, domain: readonly [number, number]): [Point, Point] {
  return [
    { x: domain[0], y: intercept + slope * domain[0] },
    { x: domain[1], y: intercept + slope * domain[1] },
  ];
}

export interface Band {
  /** 'mean-response': ŷ ± t·√(Var a + 2x·Cov(a, b) + x²·Var b); 'interval-ends': the envelope of the four lines through the ends of the intercept and slope CIs. */
  kind: 'mean-response' | 'interval-ends';
  upper: Point[];
  lower: Point[];
  /** Upper edge left to right, then the lower edge right to left: a closed polygon. */
  polygon: Point[];
}

/**
 * The CI band of a fitted line over an x-domain. With a covariance and degrees of freedom (OLS, Deming, M and MM
 * fits) it is the mean-response interval ŷ(x) ± t(1 − α/2, df)·√(Var a + 2x·Cov(a, b) + x²·Var b) (any regression
 * text); otherwise (Passing–Bablok) the envelope of the lines through the ends of the intercept and slope CIs.
 *
 * @example
 * confidenceBand(olsFit, [0, 500]).polygon; // closed polygon in data units
 */
export function confidenceBand(fit: Pick<LineFit, 'intercept' | 'slope' | 'interceptCI' | 'slopeCI' | 'covariance' | 'df' | 'confidence'>, domain: readonly [number, number], steps = 48): Band {
  const xs = Array.from({ length: steps + 1 }, (_, k) => domain[0] + ((domain[1] - domain[0]) * k) / steps);
  const upper: Point[] = [];
  const lower: Point[] = [];
  const { covariance, df } = fit;
  const kind: Band['kind'] = covariance && df !== undefined && df > 0 ? 'mean-response' : 'interval-ends';
  const t = kind === 'mean-response' ? tQuantile(1 - (1 - fit.confidence) / 2, df as number) : 0;
  for (const x of xs) {
    if (kind === 'mean-response') {
      const [[varA, covAB], [, varB]] = covariance as [[number, number], [number, number]];
      const centre = fit.intercept + fit.slope * x;
      const half = t * Math.sqrt(Math.max(0, varA + 2 * x * covAB + x * x * varB));
      upper.push({ x, y: centre + half });
      lower.push({ x, y: centre - half });
    } else {
      const ends = fit.interceptCI.flatMap((a) => fit.slopeCI.map((b) => a + b * x));
      upper.push({ x, y: Math.max(...ends) });
      lower.push({ x, y: Math.min(...ends) });
    }
  }
  return { kind, upper, lower, polygon: [...upper, ...[...lower].reverse()] };
}

export interface ScatterGeometry {
  points: SamplePoint[];
  /** The same axis for x and y, so that the identity line runs at 45°. */
  axis: Axis;
  identity: [Point, Point];
  lines: { method: MethodKey; segment: [Point, Point] }[];
  band: (Band & { method: MethodKey }) | null;
}

/**
 * Scatter plot of candidate (y) against comparative (x): the samples, the identity line y = x, the fitted line of
 * each chosen method and the CI band of the primary one (see {@link confidenceBand}).
 *
 * @example
 * scatterGeometry({ sampleIds, comparative, candidate, fits: analysis.fits, methods: ['ols', 'deming'], primary: 'deming' });
 */
export function scatterGeometry(input: {
  sampleIds: readonly string[];
  comparative: readonly number[];
  candidate: readonly number[];
  fits: Partial<Record<MethodKey, LineFit>>;
  methods: readonly MethodKey[];
  primary: MethodKey;
}): ScatterGeometry {
  const axis = niceAxis([...input.comparative, ...input.candidate]);
  const points = input.sampleIds.map((id, i) => ({ id, x: input.comparative[i], y: input.candidate[i] }));
  const lines = input.methods.flatMap((method) => {
    const fit = input.fits[method];
    return fit ? [{ method, segment: lineSegment(fit.intercept, fit.slope, axis.domain) }] : [];
  });
  const primaryFit = input.fits[input.primary];
  return {
    points,
    axis,
    identity: [
      { x: axis.domain[0], y: axis.domain[0] },
      { x: axis.domain[1], y: axis.domain[1] },
    ],
    lines,
    band: primaryFit ? { ...confidenceBand(primaryFit, axis.domain), method: input.primary } : null,
  };
}

export interface DifferenceGeometry {
  kind: BlandAltmanResult['kind'];
  points: SamplePoint[];
  xAxis: Axis;
  yAxis: Axis;
  zero: [Point, Point];
  mean: [Point, Point];
  lowerLoA: [Point, Point];
  upperLoA: [Point, Point];
}

/**
 * Difference plot (Bland & Altman, Lancet 1986): each sample's difference (absolute y − x, or percent of the pair
 * mean) against the mean of the two procedures, with the mean difference and the limits of agreement.
 *
 * @example
 * differenceGeometry(analysis.blandAltman.absolute, analysis.sampleIds).upperLoA;
 */
export function differenceGeometry(result: BlandAltmanResult, sampleIds: readonly string[]): DifferenceGeometry {
  const xAxis = niceAxis(result.means);
  const yAxis = niceAxis(result.differences, { include: [0, result.lowerLoA, result.upperLoA] });
  const across = (y: number): [Point, Point] => [
    { x: xAxis.domain[0], y },
    { x: xAxis.domain[1], y },
  ];
  return {
    kind: result.kind,
    points: sampleIds.map((id, i) => ({ id, x: result.means[i], y: result.differences[i] })),
    xAxis,
    yAxis,
    zero: across(0),
    mean: across(result.meanDifference),
    lowerLoA: across(result.lowerLoA),
    upperLoA: across(result.upperLoA),
  };
}

export interface ResidualGeometry {
  /** x: fitted value a + b·xᵢ; y: residual yᵢ − (a + b·xᵢ); weight: the robust weight, when the fit has them. */
  points: (SamplePoint & { weight?: number })[];
  xAxis: Axis;
  yAxis: Axis;
  zero: [Point, Point];
}

/**
 * Residuals of a fit against its fitted values, each with the robust weight given (for colouring).
 *
 * @example
 * residualGeometry(sampleIds, comparative, candidate, analysis.fits.huber!, analysis.fits.huber!.weights);
 */
export function residualGeometry(
  sampleIds: readonly string[],
  comparative: readonly number[],
  candidate: readonly number[],
  fit: Pick<LineFit, 'intercept' | 'slope'>,
  weights?: readonly number[],
): ResidualGeometry {
  const points = sampleIds.map((id, i) => {
    const fitted = fit.intercept + fit.slope * comparative[i];
    const point: SamplePoint & { weight?: number } = { id, x: fitted, y: candidate[i] - fitted };
    if (weights) point.weight = weights[i];
    return point;
  });
  const xAxis = niceAxis(points.map((p) => p.x));
  const yAxis = niceAxis(points.map((p) => p.y), { include: [0] });
  return { points, xAxis, yAxis, zero: [{ x: xAxis.domain[0], y: 0 }, { x: xAxis.domain[1], y: 0 }] };
}

export interface LeverageGeometry {
  /** x: hat value hᵢ; y: internally studentized residual rᵢ = eᵢ/(s√(1 − hᵢ)); cooksDistance Dᵢ = rᵢ²hᵢ/(p(1 − hᵢ)). */
  points: (SamplePoint & { cooksDistance: number })[];
  xAxis: Axis;
  yAxis: Axis;
  /** For each level D: the curves r = ±√(D·p·(1 − h)/h), clipped to the y-axis. */
  contours: { level: number; upper: Point[]; lower: Point[] }[];
  /** The high-leverage threshold h = 2p/n, as a vertical segment. */
  leverageThreshold: { value: number; segment: [Point, Point] };
}

/**
 * Leverage against studentized residual (Cook, Technometrics 1977; Belsley, Kuh & Welsch 1980): internally
 * studentized residuals rᵢ = eᵢ/(s√(1 − hᵢ)) with s² = Σe²/(n − p), so that Cook's distance Dᵢ = rᵢ²hᵢ/(p(1 − hᵢ))
 * is constant along the contours r² = D·p·(1 − h)/h drawn for each level (default D = 0.5 and 1).
 *
 * @example
 * leverageGeometry(sampleIds, analysis.diagnostics.residuals, analysis.diagnostics.hat).contours[0].level; // 0.5
 */
export function leverageGeometry(
  sampleIds: readonly string[],
  residuals: readonly number[],
  hat: readonly number[],
  options: { p?: number; levels?: readonly number[]; steps?: number } = {},
): LeverageGeometry {
  const p = options.p ?? 2;
  const n = residuals.length;
  const s = Math.sqrt(residuals.reduce((sum, e) => sum + e * e, 0) / Math.max(1, n - p));
  const points = sampleIds.flatMap((id, i) => {
    const h = hat[i];
    if (!(h < 1) || s === 0) return [];
    const r = residuals[i] / (s * Math.sqrt(1 - h));
    return [{ id, x: h, y: r, cooksDistance: (r * r * h) / (p * (1 - h)) }];
  });
  const threshold = (2 * p) / n;
  // Leverage starts at 0: no padding below it.
  const xAxis = niceAxis(points.map((pt) => pt.x), { include: [0, threshold], pad: 0 });
  const yAxis = niceAxis(points.map((pt) => pt.y), { include: [-3, 3] });
  const yLimit = Math.max(Math.abs(yAxis.domain[0]), Math.abs(yAxis.domain[1]));
  const steps = options.steps ?? 80;
  const hLo = Math.max(xAxis.domain[0], 1e-6);
  const hHi = Math.min(xAxis.domain[1], 1 - 1e-6);
  const contours = (options.levels ?? [0.5, 1]).map((level) => {
    const upper: Point[] = [];
    for (let k = 0; k <= steps; k++) {
      const h = hLo + ((hHi - hLo) * k) / steps;
      const r = Math.sqrt((level * p * (1 - h)) / h);
      if (r <= yLimit) upper.push({ x: h, y: r });
    }
    return { level, upper, lower: upper.map((pt) => ({ x: pt.x, y: -pt.y })) };
  });
  return {
    points,
    xAxis,
    yAxis,
    contours,
    leverageThreshold: { value: threshold, segment: [{ x: threshold, y: yAxis.domain[0] }, { x: threshold, y: yAxis.domain[1] }] },
  };
}

export interface WeightFunctionGeometry {
  psi: MNormKey;
  tuning: number[];
  /** The weight function w(u) = ψ(u)/u over the axis. */
  curve: Point[];
  /** Each sample at its standardized residual uᵢ = rᵢ/s and weight w(uᵢ). */
  points: SamplePoint[];
  xAxis: Axis;
  yAxis: Axis;
}

/**
 * The weight function w(u) = ψ(u)/u of a ψ family (Huber 1964; Beaton & Tukey 1974; Hampel et al. 1986) with every
 * sample placed at its standardized residual uᵢ = (yᵢ − a − b·xᵢ)/s of that family's fit.
 *
 * @example
 * weightFunctionGeometry('tukey', [4.685], sampleIds, comparative, candidate, analysis.fits.tukey!);
 */
export function weightFunctionGeometry(
  psi: MNormKey,
  tuning: readonly number[] | undefined,
  sampleIds: readonly string[],
  comparative: readonly number[],
  candidate: readonly number[],
  fit: Pick<LineFit, 'intercept' | 'slope' | 'scale'>,
  steps = 240,
): WeightFunctionGeometry {
  const norm = normByKey(psi, tuning ? [...tuning] : undefined);
  const scale = fit.scale && fit.scale > 0 ? fit.scale : 1;
  const points = sampleIds.map((id, i) => {
    const u = (candidate[i] - fit.intercept - fit.slope * comparative[i]) / scale;
    return { id, x: u, y: norm.weight(u) };
  });
  const reach = Math.max(norm.tuning[norm.tuning.length - 1] * 1.25, ...points.map((pt) => Math.abs(pt.x) * 1.05));
  const xAxis = niceAxis([-reach, reach], { pad: 0 });
  const curve: Point[] = [];
  for (let k = 0; k <= steps; k++) {
    const u = xAxis.domain[0] + ((xAxis.domain[1] - xAxis.domain[0]) * k) / steps;
    curve.push({ x: u, y: norm.weight(u) });
  }
  return { psi, tuning: [...norm.tuning], curve, points, xAxis, yAxis: { domain: [0, 1.05], ticks: [0, 0.25, 0.5, 0.75, 1] } };
}
