import { useState, type ReactNode } from 'react';
import {
  differenceGeometry,
  leverageGeometry,
  residualGeometry,
  scatterGeometry,
  weightFunctionGeometry,
} from '../../lib/plotGeometry';
import { methodName } from '../../lib/stats/cautions';
import type { ComparisonAnalysis, MethodKey } from '../../lib/stats/index';
import type { MNormKey } from '../../lib/stats/norms';
import { decimalsFor, fixed } from './format';
import { Plot, type PlotLine } from './Plot';
import { METHOD_STYLE, type Highlight, type StoredResults } from './types';

const BAND_FILL = 'rgba(23, 112, 107, 0.14)';
const REFERENCE = '#9ca3af';

/** Colour of a robust weight from amber (0) to the brand colour (1). */
function weightColour(weight: number | undefined): string {
  if (weight === undefined) return '#0f5a56';
  const w = Math.min(1, Math.max(0, weight));
  const mix = (a: number, b: number) => Math.round(a + (b - a) * w);
  return `rgb(${mix(184, 15)}, ${mix(107, 90)}, ${mix(11, 86)})`;
}

function PlotCard({ title, testId, children, note }: { title: string; testId: string; children: ReactNode; note?: ReactNode }) {
  return (
    <section className="rounded border border-neutral-200 bg-white p-3" data-testid={testId} aria-label={title}>
      <h3 className="text-sm font-semibold text-brand-900">{title}</h3>
      {note && <div className="mt-0.5 text-xs text-neutral-600">{note}</div>}
      {children}
    </section>
  );
}

interface Column {
  header: string;
  values: (number | null | undefined)[];
}

/** Every point of a plot as a table; a sample's code selects it in every plot. */
function DataTable({ caption, codes, columns, highlight }: { caption: string; codes: string[]; columns: Column[]; highlight: Highlight }) {
  const decimals = columns.map((c) => decimalsFor(c.values));
  return (
    <details className="mt-1 text-xs">
      <summary className="cursor-pointer text-brand-700">Data table</summary>
      <div className="max-h-56 overflow-auto">
        <table className="w-full border-collapse">
          <caption className="sr-only">{caption}</caption>
          <thead>
            <tr className="border-b border-neutral-200 text-neutral-500">
              <th className="px-2 py-1 text-left font-medium">Sample</th>
              {columns.map((c) => (
                <th key={c.header} className="num px-2 py-1 font-medium">{c.header}</th>
              ))}
            </tr>
          </thead>
          <tbody>
            {codes.map((code, i) => (
              <tr key={code} className={code === highlight.selected ? 'bg-brand-50' : undefined}>
                <td className="px-2 py-0.5">
                  <button type="button" className="text-brand-700 underline-offset-2 hover:underline" onClick={() => highlight.onSelect(code)} onFocus={() => highlight.onHover(code)} onBlur={() => highlight.onHover(null)}>
                    {code}
                  </button>
                </td>
                {columns.map((c, k) => (
                  <td key={c.header} className="num px-2 py-0.5">{fixed(c.values[i], decimals[k])}</td>
                ))}
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </details>
  );
}

function Legend({ items }: { items: { key: string; label: string; stroke: string; dash?: string; fill?: string }[] }) {
  return (
    <ul className="mt-1 flex flex-wrap gap-x-3 gap-y-0.5 text-xs text-neutral-700" aria-label="Legend">
      {items.map((item) => (
        <li key={item.key} className="flex items-center gap-1">
          <svg width="22" height="8" aria-hidden="true">
            {item.fill ? <rect width="22" height="8" fill={item.fill} /> : <line x1="0" y1="4" x2="22" y2="4" stroke={item.stroke} strokeWidth="2" strokeDasharray={item.dash} />}
          </svg>
          {item.label}
        </li>
      ))}
    </ul>
  );
}

/**
 * The five plots of the workspace, each with its data table.
 *
 * @example
 * <Plots results={view.run.results} units="mg/dL" highlight={highlight} />
 */
export function Plots({ results, units, highlight }: { results: StoredResults; units: string; highlight: Highlight }) {
  const analysis: ComparisonAnalysis = results.analysis;
  const { sampleIds, comparative, candidate, fits, primary } = analysis;
  // Stored JSON does not keep key order, so the engine's method list gives the order.
  const methods = analysis.methods.filter((m) => fits[m]);
  const [differenceKind, setDifferenceKind] = useState<'absolute' | 'percent'>('absolute');
  const weighted = methods.filter((m) => fits[m]?.weights);
  const psi = results.inputs.settings.robust.psi as MNormKey;
  const [residualMethod, setResidualMethod] = useState<MethodKey>(weighted.includes(primary) ? primary : (weighted.includes(psi) ? psi : methods[0]));
  const plotProps = { selected: highlight.selected, hovered: highlight.hovered, onHover: highlight.onHover, onSelect: highlight.onSelect };

  const scatter = scatterGeometry({ sampleIds, comparative, candidate, fits, methods, primary });
  const scatterLines: PlotLine[] = [
    { key: 'identity', points: scatter.identity, stroke: REFERENCE, dash: '4 4', width: 1 },
    ...scatter.lines.map((l) => ({ key: l.method, points: l.segment, ...METHOD_STYLE[l.method], width: l.method === primary ? 2.2 : 1.3 })),
  ];

  const ba = differenceKind === 'percent' && analysis.blandAltman.percent ? analysis.blandAltman.percent : analysis.blandAltman.absolute;
  const difference = differenceGeometry(ba, sampleIds);
  const differenceUnit = ba.kind === 'percent' ? '%' : units;

  const residualFit = fits[residualMethod] ?? fits[primary]!;
  const residual = residualGeometry(sampleIds, comparative, candidate, residualFit, residualFit.weights ?? fits[psi]?.weights);

  const leverage = leverageGeometry(sampleIds, analysis.diagnostics.residuals, analysis.diagnostics.hat);
  const leverageById = new Map(leverage.points.map((p) => [p.id, p]));

  const psiFit = fits[psi];
  const weightCurve = psiFit ? weightFunctionGeometry(psi, results.inputs.settings.robust.tuning, sampleIds, comparative, candidate, psiFit) : null;

  return (
    <div className="grid gap-3 md:grid-cols-2 2xl:grid-cols-3" data-testid="analysis-plots">
      <PlotCard
        title="Candidate against comparative"
        testId="plot-scatter"
        note={<>Identity line, the fitted line of each estimator, and the {scatter.band?.kind === 'mean-response' ? 'mean-response' : 'CI-ends'} 95 % band of the primary estimator ({methodName(primary)}).</>}
      >
        <Plot
          label="Scatter plot"
          xLabel={`Comparative (${units})`}
          yLabel={`Candidate (${units})`}
          xAxis={scatter.axis}
          yAxis={scatter.axis}
          points={scatter.points}
          lines={scatterLines}
          areas={scatter.band ? [{ key: 'band', points: scatter.band.polygon, fill: BAND_FILL }] : []}
          {...plotProps}
        />
        <Legend
          items={[
            { key: 'identity', label: 'y = x', stroke: REFERENCE, dash: '4 4' },
            ...scatter.lines.map((l) => ({ key: l.method, label: `${methodName(l.method)}${l.method === primary ? ' (primary)' : ''}`, ...METHOD_STYLE[l.method] })),
            { key: 'band', label: `95 % band, ${methodName(primary)}`, stroke: '', fill: BAND_FILL },
          ]}
        />
        <DataTable
          caption="Samples of the scatter plot"
          codes={sampleIds}
          columns={[{ header: `Comparative (${units})`, values: comparative }, { header: `Candidate (${units})`, values: candidate }]}
          highlight={highlight}
        />
      </PlotCard>

      <PlotCard
        title="Differences against the mean"
        testId="plot-difference"
        note={
          <fieldset className="flex items-center gap-3">
            <legend className="sr-only">Difference shown as</legend>
            {(['absolute', 'percent'] as const).map((kind) => (
              <label key={kind} className="flex items-center gap-1">
                <input type="radio" name="difference-kind" value={kind} checked={differenceKind === kind} onChange={() => setDifferenceKind(kind)} disabled={kind === 'percent' && !analysis.blandAltman.percent} />
                {kind === 'absolute' ? `Absolute (${units})` : 'Percent'}
              </label>
            ))}
            <span>
              Mean {fixed(ba.meanDifference, decimalsFor([ba.meanDifference, ba.lowerLoA, ba.upperLoA]))} {differenceUnit}; limits of agreement {fixed(ba.lowerLoA, decimalsFor([ba.lowerLoA, ba.upperLoA]))} to{' '}
              {fixed(ba.upperLoA, decimalsFor([ba.lowerLoA, ba.upperLoA]))} {differenceUnit}
            </span>
          </fieldset>
        }
      >
        <Plot
          label="Difference plot"
          xLabel={`Mean of the two procedures (${units})`}
          yLabel={ba.kind === 'percent' ? 'Difference (% of mean)' : `Candidate − comparative (${units})`}
          xAxis={difference.xAxis}
          yAxis={difference.yAxis}
          points={difference.points}
          lines={[
            { key: 'zero', points: difference.zero, stroke: REFERENCE, width: 1 },
            { key: 'mean', points: difference.mean, stroke: '#0f5a56', width: 1.8 },
            { key: 'lower', points: difference.lowerLoA, stroke: '#7a4506', dash: '5 3' },
            { key: 'upper', points: difference.upperLoA, stroke: '#7a4506', dash: '5 3' },
          ]}
          {...plotProps}
        />
        <Legend
          items={[
            { key: 'mean', label: 'Mean difference', stroke: '#0f5a56' },
            { key: 'loa', label: 'Limits of agreement (mean ± 1.96 SD)', stroke: '#7a4506', dash: '5 3' },
            { key: 'zero', label: 'No difference', stroke: REFERENCE },
          ]}
        />
        <DataTable
          caption="Points of the difference plot"
          codes={sampleIds}
          columns={[{ header: `Mean (${units})`, values: ba.means }, { header: `Difference (${differenceUnit})`, values: ba.differences }]}
          highlight={highlight}
        />
      </PlotCard>

      <PlotCard
        title="Residuals against fitted values"
        testId="plot-residuals"
        note={
          <label className="flex items-center gap-2">
            Fit
            <select className="rounded border border-neutral-300 bg-white px-1 py-0.5" value={residualMethod} onChange={(e) => setResidualMethod(e.currentTarget.value as MethodKey)}>
              {methods.map((m) => (
                <option key={m} value={m}>{methodName(m)}</option>
              ))}
            </select>
            <span>Colour: robust weight{residualFit.weights ? '' : ` of ${methodName(psi)}`}, amber (0) to green (1); hollow below 0.25.</span>
          </label>
        }
      >
        <Plot
          label="Residual plot"
          xLabel={`Fitted candidate value (${units})`}
          yLabel={`Residual (${units})`}
          xAxis={residual.xAxis}
          yAxis={residual.yAxis}
          points={residual.points.map((p) => ({ ...p, fill: weightColour(p.weight), hollow: p.weight !== undefined && p.weight < 0.25 }))}
          lines={[{ key: 'zero', points: residual.zero, stroke: REFERENCE, width: 1 }]}
          {...plotProps}
        />
        <DataTable
          caption="Points of the residual plot"
          codes={sampleIds}
          columns={[
            { header: 'Fitted', values: residual.points.map((p) => p.x) },
            { header: 'Residual', values: residual.points.map((p) => p.y) },
            { header: 'Weight', values: residual.points.map((p) => p.weight) },
          ]}
          highlight={highlight}
        />
      </PlotCard>

      <PlotCard
        title="Leverage against studentized residual (OLS)"
        testId="plot-leverage"
        note={<>Cook's distance contours at D = 0.5 (dashed) and D = 1 (solid); dotted line: high leverage h = 2p/n = {fixed(leverage.leverageThreshold.value, 3)}.</>}
      >
        <Plot
          label="Leverage plot"
          xLabel="Leverage (hat value h)"
          yLabel="Studentized residual"
          xAxis={leverage.xAxis}
          yAxis={leverage.yAxis}
          points={leverage.points}
          lines={[
            { key: 'zero', points: [{ x: leverage.xAxis.domain[0], y: 0 }, { x: leverage.xAxis.domain[1], y: 0 }], stroke: REFERENCE, width: 1 },
            { key: 'threshold', points: leverage.leverageThreshold.segment, stroke: REFERENCE, dash: '1 3', width: 1.2 },
            ...leverage.contours.flatMap((c) => [
              { key: `d${c.level}-upper`, points: c.upper, stroke: '#7a4506', dash: c.level < 1 ? '5 3' : undefined, width: 1 },
              { key: `d${c.level}-lower`, points: c.lower, stroke: '#7a4506', dash: c.level < 1 ? '5 3' : undefined, width: 1 },
            ]),
          ]}
          {...plotProps}
        />
        <DataTable
          caption="Points of the leverage plot"
          codes={sampleIds}
          columns={[
            { header: 'Leverage h', values: sampleIds.map((id) => leverageById.get(id)?.x) },
            { header: 'Studentized residual', values: sampleIds.map((id) => leverageById.get(id)?.y) },
            { header: "Cook's D", values: sampleIds.map((id) => leverageById.get(id)?.cooksDistance) },
          ]}
          highlight={highlight}
        />
      </PlotCard>

      {weightCurve && psiFit && (
        <PlotCard
          title={`Weight function of ${methodName(psi)} ψ`}
          testId="plot-weights"
          note={<>w(u) = ψ(u)/u with tuning {weightCurve.tuning.join(', ')}; each sample at its standardized residual u = r/s of the {methodName(psi)} fit (s = {fixed(psiFit.scale, decimalsFor([psiFit.scale]))}).</>}
        >
          <Plot
            label="Weight function"
            xLabel="Standardized residual u"
            yLabel="Weight w(u)"
            xAxis={weightCurve.xAxis}
            yAxis={weightCurve.yAxis}
            points={weightCurve.points.map((p) => ({ ...p, fill: weightColour(p.y), hollow: p.y < 0.25 }))}
            lines={[{ key: 'curve', points: weightCurve.curve, stroke: '#0f5a56', width: 1.6 }]}
            {...plotProps}
          />
          <DataTable
            caption="Samples on the weight function"
            codes={sampleIds}
            columns={[
              { header: 'u', values: weightCurve.points.map((p) => p.x) },
              { header: 'Weight', values: weightCurve.points.map((p) => p.y) },
            ]}
            highlight={highlight}
          />
        </PlotCard>
      )}
    </div>
  );
}
