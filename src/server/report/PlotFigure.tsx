/**
 * A plot drawn as PDF vectors (react-pdf's Svg primitives) from the shared plot geometry in data units: axes with
 * their ticks, points, lines and curves (identity, fits, limits of agreement, Cook's contours) and a shaded band
 * (the primary fit's confidence band), all clipped to the plot area.
 */
import { Circle, ClipPath, Defs, G, Line, Path, Rect, Svg, Text as SvgText } from '@react-pdf/renderer';
import type { Axis, Point } from '../../lib/plotGeometry';
import { fixed } from './format';

export interface PlotPoint extends Point {
  /** Drawn open and larger: a sample the ESD screen calls outlying. */
  marked?: boolean;
}

export type PlotStyle = 'identity' | 'primary' | 'secondary' | 'limit' | 'mean' | 'zero' | 'contour';

export interface PlotSpec {
  xLabel: string;
  yLabel: string;
  xAxis: Axis;
  yAxis: Axis;
  points: PlotPoint[];
  /** Straight segments and curves, in data units; drawn clipped to the plot area. */
  lines: { points: Point[]; style: PlotStyle }[];
  /** Closed polygon in data units (a fit's confidence band). */
  band?: Point[];
}

const WIDTH = 250;
const HEIGHT = 190;
const MARGIN = { left: 38, right: 8, top: 8, bottom: 28 };
const INK = '#1f2933';
const BRAND = '#0f5e5a';
const ATTENTION = '#b45309';
const GRID = '#d9dee3';
// Svg text does not inherit the page's font: name it, or the standard font drops the minus sign.
const TICK_TEXT = { fontSize: 6, fontFamily: 'Noto Sans' };
const LABEL_TEXT = { fontSize: 7, fontFamily: 'Noto Sans' };

const LINE_LOOK: Record<PlotStyle, { stroke: string; width: number; dash?: string }> = {
  identity: { stroke: '#7b8794', width: 0.8, dash: '3 2' },
  primary: { stroke: BRAND, width: 1.4 },
  secondary: { stroke: '#52606d', width: 0.8, dash: '1 1.5' },
  limit: { stroke: ATTENTION, width: 1, dash: '4 2' },
  mean: { stroke: BRAND, width: 1.2 },
  zero: { stroke: '#7b8794', width: 0.6 },
  contour: { stroke: ATTENTION, width: 0.7, dash: '2 1.5' },
};

function tickDecimals(ticks: number[]): number {
  const step = ticks.length > 1 ? Math.abs(ticks[1] - ticks[0]) : 1;
  return Math.max(0, Math.min(4, -Math.floor(Math.log10(step))));
}

/** One plot with its axes, as vectors. */
export function PlotFigure({ spec, id }: { spec: PlotSpec; id: string }) {
  const plotW = WIDTH - MARGIN.left - MARGIN.right;
  const plotH = HEIGHT - MARGIN.top - MARGIN.bottom;
  const [x0, x1] = spec.xAxis.domain;
  const [y0, y1] = spec.yAxis.domain;
  const sx = (x: number) => MARGIN.left + ((x - x0) / (x1 - x0)) * plotW;
  const sy = (y: number) => MARGIN.top + plotH - ((y - y0) / (y1 - y0)) * plotH;
  const xd = tickDecimals(spec.xAxis.ticks);
  const yd = tickDecimals(spec.yAxis.ticks);
  const path = (points: Point[]) => points.map((p, i) => `${i === 0 ? 'M' : 'L'} ${sx(p.x).toFixed(2)} ${sy(p.y).toFixed(2)}`).join(' ');
  const clip = `plot-area-${id}`;
  return (
    <Svg width={WIDTH} height={HEIGHT} viewBox={`0 0 ${WIDTH} ${HEIGHT}`}>
      <Defs>
        <ClipPath id={clip}>
          <Rect x={MARGIN.left} y={MARGIN.top} width={plotW} height={plotH} />
        </ClipPath>
      </Defs>
      {spec.yAxis.ticks.map((t) => (
        <G key={`y${t}`}>
          <Line x1={MARGIN.left} y1={sy(t)} x2={MARGIN.left + plotW} y2={sy(t)} stroke={GRID} strokeWidth={0.4} />
          <SvgText x={MARGIN.left - 3} y={sy(t) + 2} style={TICK_TEXT} fill={INK} textAnchor="end">
            {fixed(t, yd)}
          </SvgText>
        </G>
      ))}
      {spec.xAxis.ticks.map((t) => (
        <G key={`x${t}`}>
          <Line x1={sx(t)} y1={MARGIN.top} x2={sx(t)} y2={MARGIN.top + plotH} stroke={GRID} strokeWidth={0.4} />
          <SvgText x={sx(t)} y={MARGIN.top + plotH + 8} style={TICK_TEXT} fill={INK} textAnchor="middle">
            {fixed(t, xd)}
          </SvgText>
        </G>
      ))}
      <G clipPath={`url(#${clip})`}>
        {spec.band && spec.band.length > 2 ? <Path d={`${path(spec.band)} Z`} fill={BRAND} fillOpacity={0.15} stroke="none" /> : null}
        {spec.lines.map((line, i) => {
          const look = LINE_LOOK[line.style];
          return <Path key={`l${i}`} d={path(line.points)} fill="none" stroke={look.stroke} strokeWidth={look.width} {...(look.dash ? { strokeDasharray: look.dash } : {})} />;
        })}
        {spec.points.map((p, i) =>
          p.marked ? (
            <Circle key={`p${i}`} cx={sx(p.x)} cy={sy(p.y)} r={2.4} fill="none" stroke={ATTENTION} strokeWidth={0.9} />
          ) : (
            <Circle key={`p${i}`} cx={sx(p.x)} cy={sy(p.y)} r={1.5} fill={INK} fillOpacity={0.75} />
          ),
        )}
      </G>
      <Line x1={MARGIN.left} y1={MARGIN.top + plotH} x2={MARGIN.left + plotW} y2={MARGIN.top + plotH} stroke={INK} strokeWidth={0.6} />
      <Line x1={MARGIN.left} y1={MARGIN.top} x2={MARGIN.left} y2={MARGIN.top + plotH} stroke={INK} strokeWidth={0.6} />
      <SvgText x={MARGIN.left + plotW / 2} y={HEIGHT - 4} style={LABEL_TEXT} fill={INK} textAnchor="middle">
        {spec.xLabel}
      </SvgText>
      <SvgText x={8} y={MARGIN.top + plotH / 2} style={LABEL_TEXT} fill={INK} textAnchor="middle" transform={`rotate(-90 8 ${MARGIN.top + plotH / 2})`}>
        {spec.yLabel}
      </SvgText>
    </Svg>
  );
}
