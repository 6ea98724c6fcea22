import { ResponsiveScatterPlot, type ScatterPlotLayerProps } from '@nivo/scatterplot';
import type { Axis, Point } from '../../lib/plotGeometry';
import { tickLabel } from './format';

/** A sample drawn in a plot: hollow when it is heavily down-weighted, so the mark does not rely on colour. */
export interface PlotPoint extends Point {
  id: string;
  fill?: string;
  hollow?: boolean;
}

export interface PlotLine {
  key: string;
  points: Point[];
  stroke: string;
  dash?: string;
  width?: number;
}

export interface PlotArea {
  key: string;
  points: Point[];
  fill: string;
}

interface Datum {
  x: number;
  y: number;
  id: string;
}

interface PlotProps {
  label: string;
  xLabel: string;
  yLabel: string;
  xAxis: Axis;
  yAxis: Axis;
  points: PlotPoint[];
  lines?: PlotLine[];
  areas?: PlotArea[];
  /** Sample codes highlighted in every plot (selected, hovered). */
  selected: string | null;
  hovered: string | null;
  onHover: (id: string | null) => void;
  onSelect: (id: string) => void;
  height?: number;
}

const INK = '#1f2a2a';

/**
 * One scatter plot of the workspace (nivo) with custom layers for areas, lines and the samples; the selected and
 * the hovered sample are ringed and labelled in every plot.
 *
 * @example
 * <Plot label="Scatter plot" xLabel="x" yLabel="y" xAxis={axis} yAxis={axis} points={points} {...highlight} />
 */
export function Plot({ label, xLabel, yLabel, xAxis, yAxis, points, lines = [], areas = [], selected, hovered, onHover, onSelect, height = 290 }: PlotProps) {
  const data = [{ id: 'samples', data: points.map((p) => ({ x: p.x, y: p.y, id: p.id })) }];
  const byId = new Map(points.map((p) => [p.id, p]));

  const clipId = `clip-${label.replace(/\W/g, '')}`;
  const AreasLayer = ({ xScale, yScale, innerWidth, innerHeight }: ScatterPlotLayerProps<Datum>) => (
    <g clipPath={`url(#${clipId})`}>
      <clipPath id={clipId}>
        <rect width={innerWidth} height={innerHeight} />
      </clipPath>
      {areas.map((area) => (
        <polygon key={area.key} points={area.points.map((p) => `${xScale(p.x)},${yScale(p.y)}`).join(' ')} fill={area.fill} stroke="none" />
      ))}
    </g>
  );
  const LinesLayer = ({ xScale, yScale }: ScatterPlotLayerProps<Datum>) => (
    <g clipPath={`url(#${clipId})`}>
      {lines.map((line) => (
        <polyline
          key={line.key}
          points={line.points.map((p) => `${xScale(p.x)},${yScale(p.y)}`).join(' ')}
          fill="none"
          stroke={line.stroke}
          strokeWidth={line.width ?? 1.5}
          strokeDasharray={line.dash}
        />
      ))}
    </g>
  );
  const PointsLayer = ({ xScale, yScale }: ScatterPlotLayerProps<Datum>) => {
    const marked = [selected, hovered].filter((id, k, all): id is string => !!id && all.indexOf(id) === k && byId.has(id));
    return (
      <g>
        {points.map((p) => (
          <circle
            key={p.id}
            cx={xScale(p.x)}
            cy={yScale(p.y)}
            r={3.2}
            fill={p.hollow ? 'white' : (p.fill ?? '#0f5a56')}
            stroke={p.hollow ? (p.fill ?? '#b86b0b') : 'white'}
            strokeWidth={p.hollow ? 1.6 : 0.6}
            fillOpacity={0.9}
          />
        ))}
        {marked.map((id) => {
          const p = byId.get(id)!;
          const cx = xScale(p.x);
          const cy = yScale(p.y);
          return (
            <g key={`mark-${id}`} data-testid="plot-highlight">
              <circle cx={cx} cy={cy} r={7} fill="none" stroke={INK} strokeWidth={id === selected ? 2 : 1.2} />
              <text x={cx + 9} y={cy - 7} fontSize={11} fontWeight={600} fill={INK} paintOrder="stroke" stroke="white" strokeWidth={3}>
                {id}
              </text>
            </g>
          );
        })}
      </g>
    );
  };

  const axis = (ticks: number[], legend: string, offset: number) => ({
    tickValues: ticks,
    format: (v: number) => tickLabel(v, ticks),
    legend,
    legendPosition: 'middle' as const,
    legendOffset: offset,
    tickSize: 4,
  });

  return (
    <div style={{ height }} role="img" aria-label={`${label}: the data table below lists every point`}>
      <ResponsiveScatterPlot<Datum>
        data={data}
        margin={{ top: 12, right: 16, bottom: 44, left: 56 }}
        xScale={{ type: 'linear', min: xAxis.domain[0], max: xAxis.domain[1] }}
        yScale={{ type: 'linear', min: yAxis.domain[0], max: yAxis.domain[1] }}
        gridXValues={xAxis.ticks}
        gridYValues={yAxis.ticks}
        axisBottom={axis(xAxis.ticks, xLabel, 36)}
        axisLeft={axis(yAxis.ticks, yLabel, -46)}
        nodeSize={7}
        animate={false}
        useMesh
        theme={{ text: { fontSize: 11, fill: '#3f4a4a' }, grid: { line: { stroke: '#e5e8e7' } }, axis: { legend: { text: { fontSize: 11, fill: INK } } } }}
        layers={['grid', 'axes', AreasLayer, LinesLayer, PointsLayer, 'mesh']}
        onMouseEnter={(node) => onHover(node.data.id)}
        onMouseLeave={() => onHover(null)}
        onClick={(node) => onSelect(node.data.id)}
        tooltip={({ node }) => (
          <div className="rounded border border-neutral-300 bg-white px-2 py-1 text-xs shadow">
            <strong>{node.data.id}</strong> · {xLabel}: {node.data.x.toPrecision(4)} · {yLabel}: {node.data.y.toPrecision(4)}
          </div>
        )}
      />
    </div>
  );
}
