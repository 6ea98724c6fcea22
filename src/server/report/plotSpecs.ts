/**
 * The report's plots in data units, from a stored analysis: the scatter of candidate against comparative with
 * the identity line, the primary fit with its confidence band and the other fits; the difference plot with the
 * mean difference and the limits of agreement.
 */
import { meanResponseInterval } from '../../lib/stats/ols';
import { methodName } from '../../lib/stats/cautions';
import type { ComparisonAnalysis } from '../../lib/stats/analysis';
import type { LineFit, MethodKey } from '../../lib/stats/types';
import type { PlotLine, PlotSpec } from './PlotFigure';

const BAND_STEPS = 24;

function padded(lo: number, hi: number, share = 0.05): [number, number] {
  const span = hi - lo || Math.abs(hi) || 1;
  return [lo - span * share, hi + span * share];
}

/**
 * Scatter plot geometry: points (ESD outliers marked), identity line, every fit over the data's x range (the
 * primary one drawn strong) and the primary fit's pointwise confidence band when it has a covariance matrix.
 *
 * @example
 * const spec = scatterSpec(analysis, 'mg/dL');
 * spec.lines[0].style; // 'identity'
 */
export function scatterSpec(analysis: ComparisonAnalysis, units: string): PlotSpec {
  const xs = analysis.comparative;
  const ys = analysis.candidate;
  const lo = Math.min(...xs, ...ys);
  const hi = Math.max(...xs, ...ys);
  const domain = padded(lo, hi);
  const xMin = Math.min(...xs);
  const xMax = Math.max(...xs);
  const marked = new Set(analysis.esd.outlierIndices);
  const lines: PlotLine[] = [{ from: [domain[0], domain[0]], to: [domain[1], domain[1]], style: 'identity' }];
  for (const method of Object.keys(analysis.fits) as MethodKey[]) {
    if (method === analysis.primary) continue;
    const fit = analysis.fits[method] as LineFit;
    lines.push({ from: [xMin, fit.intercept + fit.slope * xMin], to: [xMax, fit.intercept + fit.slope * xMax], style: 'secondary' });
  }
  const primary = analysis.fits[analysis.primary];
  let band: [number, number][] | undefined;
  if (primary) {
    lines.push({ from: [xMin, primary.intercept + primary.slope * xMin], to: [xMax, primary.intercept + primary.slope * xMax], style: 'primary' });
    if (primary.covariance && primary.df !== undefined) {
      const grid = Array.from({ length: BAND_STEPS + 1 }, (_, i) => xMin + ((xMax - xMin) * i) / BAND_STEPS);
      const intervals = grid.map((x) => meanResponseInterval(primary, x).ci);
      band = [...grid.map((x, i) => [x, intervals[i][1]] as [number, number]), ...grid.map((x, i) => [x, intervals[i][0]] as [number, number]).reverse()];
    }
  }
  return {
    xLabel: `Comparative procedure (${units})`,
    yLabel: `Candidate procedure (${units})`,
    xDomain: domain,
    yDomain: domain,
    points: xs.map((x, i) => ({ x, y: ys[i], marked: marked.has(i) })),
    lines,
    band,
  };
}

/**
 * Difference plot geometry: y − x against the pair mean, zero line, mean difference and limits of agreement.
 *
 * @example
 * differenceSpec(analysis, 'mg/dL').lines.map((l) => l.style); // ['zero', 'mean', 'limit', 'limit']
 */
export function differenceSpec(analysis: ComparisonAnalysis, units: string): PlotSpec {
  const ba = analysis.blandAltman.absolute;
  const xDomain = padded(Math.min(...ba.means), Math.max(...ba.means));
  const yDomain = padded(Math.min(0, ba.lowerLoA, ...ba.differences), Math.max(0, ba.upperLoA, ...ba.differences), 0.08);
  const marked = new Set(analysis.esd.outlierIndices);
  const across = (y: number, style: PlotLine['style']): PlotLine => ({ from: [xDomain[0], y], to: [xDomain[1], y], style });
  return {
    xLabel: `Mean of the two procedures (${units})`,
    yLabel: `Candidate − comparative (${units})`,
    xDomain,
    yDomain,
    points: ba.means.map((m, i) => ({ x: m, y: ba.differences[i], marked: marked.has(i) })),
    lines: [across(0, 'zero'), across(ba.meanDifference, 'mean'), across(ba.lowerLoA, 'limit'), across(ba.upperLoA, 'limit')],
  };
}

/** The legend words of the scatter plot. */
export function scatterLegend(analysis: ComparisonAnalysis): string {
  const others = (Object.keys(analysis.fits) as MethodKey[]).filter((m) => m !== analysis.primary).map(methodName);
  return `Dashed grey: identity (y = x). Solid: ${methodName(analysis.primary)} (primary) with its 95 % confidence band. Dotted: ${others.join(', ') || 'no other fits'}. Open circles: outliers of the ESD screen.`;
}
