/**
 * The report's plots, from the shared plot geometry (the web plots use the same): the scatter with the identity
 * line, every fit and the primary fit's CI band; the difference plot with the limits of agreement; residuals of the
 * primary fit; leverage with Cook's distance contours. Here only styles, labels and the marked samples are added.
 */
import { differenceGeometry, leverageGeometry, residualGeometry, scatterGeometry } from '../../lib/plotGeometry';
import { methodName } from '../../lib/stats/cautions';
import type { ComparisonAnalysis } from '../../lib/stats/analysis';
import type { LineFit, MethodKey } from '../../lib/stats/types';
import type { PlotPoint, PlotSpec } from './PlotFigure';

const markedOf = (analysis: ComparisonAnalysis) => {
  const outliers = new Set(analysis.esd.outlierSampleIds);
  return <T extends { id: string; x: number; y: number }>(p: T): PlotPoint => ({ x: p.x, y: p.y, marked: outliers.has(p.id) });
};

const fittedMethods = (analysis: ComparisonAnalysis) => (Object.keys(analysis.fits) as MethodKey[]).filter((m) => analysis.fits[m]);

/**
 * Candidate against comparative: identity line, every fit (the primary one strong) and the primary fit's CI band.
 *
 * @example
 * scatterSpec(analysis, 'mg/dL').lines[0].style; // 'identity'
 */
export function scatterSpec(analysis: ComparisonAnalysis, units: string): PlotSpec {
  const geometry = scatterGeometry({
    sampleIds: analysis.sampleIds,
    comparative: analysis.comparative,
    candidate: analysis.candidate,
    fits: analysis.fits as Partial<Record<MethodKey, LineFit>>,
    methods: fittedMethods(analysis),
    primary: analysis.primary,
  });
  const others = geometry.lines.filter((l) => l.method !== analysis.primary).map((l) => ({ points: l.segment, style: 'secondary' as const }));
  const primary = geometry.lines.filter((l) => l.method === analysis.primary).map((l) => ({ points: l.segment, style: 'primary' as const }));
  return {
    xLabel: `Comparative procedure (${units})`,
    yLabel: `Candidate procedure (${units})`,
    xAxis: geometry.axis,
    yAxis: geometry.axis,
    points: geometry.points.map(markedOf(analysis)),
    lines: [{ points: geometry.identity, style: 'identity' }, ...others, ...primary],
    band: geometry.band?.polygon,
  };
}

/**
 * Difference (candidate − comparative) against the pair mean, with zero, the mean difference and the limits of agreement.
 *
 * @example
 * differenceSpec(analysis, 'mg/dL').lines.map((l) => l.style); // ['zero', 'mean', 'limit', 'limit']
 */
export function differenceSpec(analysis: ComparisonAnalysis, units: string): PlotSpec {
  const geometry = differenceGeometry(analysis.blandAltman.absolute, analysis.sampleIds);
  return {
    xLabel: `Mean of the two procedures (${units})`,
    yLabel: `Candidate − comparative (${units})`,
    xAxis: geometry.xAxis,
    yAxis: geometry.yAxis,
    points: geometry.points.map(markedOf(analysis)),
    lines: [
      { points: geometry.zero, style: 'zero' },
      { points: geometry.mean, style: 'mean' },
      { points: geometry.lowerLoA, style: 'limit' },
      { points: geometry.upperLoA, style: 'limit' },
    ],
  };
}

/**
 * Residuals of the primary fit against its fitted values, or null when the primary fit is missing.
 *
 * @example
 * residualSpec(analysis, 'mg/dL')?.lines[0].style; // 'zero'
 */
export function residualSpec(analysis: ComparisonAnalysis, units: string): PlotSpec | null {
  const fit = analysis.fits[analysis.primary];
  if (!fit) return null;
  const geometry = residualGeometry(analysis.sampleIds, analysis.comparative, analysis.candidate, fit);
  return {
    xLabel: `Fitted value, ${methodName(analysis.primary)} (${units})`,
    yLabel: `Residual (${units})`,
    xAxis: geometry.xAxis,
    yAxis: geometry.yAxis,
    points: geometry.points.map(markedOf(analysis)),
    lines: [{ points: geometry.zero, style: 'zero' }],
  };
}

/**
 * OLS leverage against studentized residual with Cook's distance contours (0.5 and 1) and the 2p/n threshold.
 *
 * @example
 * leverageSpec(analysis).lines.at(-1)?.style; // 'limit' (the leverage threshold)
 */
export function leverageSpec(analysis: ComparisonAnalysis): PlotSpec {
  const geometry = leverageGeometry(analysis.sampleIds, analysis.diagnostics.residuals, analysis.diagnostics.hat);
  return {
    xLabel: 'Leverage (hat value, OLS)',
    yLabel: 'Studentized residual',
    xAxis: geometry.xAxis,
    yAxis: geometry.yAxis,
    points: geometry.points.map(markedOf(analysis)),
    lines: [
      ...geometry.contours.flatMap((c) => [
        { points: c.upper, style: 'contour' as const },
        { points: c.lower, style: 'contour' as const },
      ]),
      { points: geometry.leverageThreshold.segment, style: 'limit' },
    ],
  };
}

/**
 * The legend words of the scatter plot.
 *
 * @example
 * scatterLegend(analysis); // 'Dashed grey: identity (y = x). Solid: Deming (primary) with its 95 % confidence band. …'
 */
export function scatterLegend(analysis: ComparisonAnalysis): string {
  const others = fittedMethods(analysis).filter((m) => m !== analysis.primary).map(methodName);
  return `Dashed grey: identity (y = x). Solid: ${methodName(analysis.primary)} (primary) with its 95 % confidence band. Dotted: ${others.join(', ') || 'no other fits'}. Open circles: outliers of the ESD screen.`;
}
