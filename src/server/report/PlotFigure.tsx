/**
 * A plot drawn as PDF vectors (react-pdf's Svg primitives) from geometry in data units: axes with ticks,
 * points, straight lines (identity, fits, limits of agreement) and a shaded band (a fit's confidence band).
 */
import { Circle, G, Line, Path, Svg, Text as SvgText } from '@react-pdf/renderer';
import { fixed } from './format';

export interface PlotPoint {
  x: number;
  y: number;
  /** Drawn open and larger: an excluded-from-fit, outlying or otherwise named sample. */
  marked?: boolean;
}

export interface PlotLine {
  from: [number, number];
  to: [number, number];
  style: 'identity' | 'primary' | 'secondary' | 'limit' | 'mean' | 'zero';
}

export interface PlotSpec {
  xLabel: string;
  yLabel: string;
  xDomain: [number, number];
  yDomain: [number, number];
  points: PlotPoint[];
  lines: PlotLine[];
  /** Closed polygon in data units (upper edge left to right, then lower edge back). */
  band?: [number, number][];
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

const LINE_LOOK: Record<PlotLine['style'], { stroke: string; width: number; dash?: string }> = {
  identity: { stroke: '#7b8794', width: 0.8, dash: '3 2' },
  primary: { stroke: BRAND, width: 1.4 },
  secondary: { stroke: '#52606d', width: 0.8, dash: '1 1.5' },
  limit: { stroke: ATTENTION, width: 1, dash: '4 2' },
  mean: { stroke: BRAND, width: 1.2 },
  zero: { stroke: '#7b8794', width: 0.6 },
};

/**
 * "Nice" tick values covering a domain (steps of 1, 2 or 5 × 10^k), about `count` of them.
 *
 * @example
 * niceTicks([0, 97], 5); // [0, 20, 40, 60, 80]
 */
export function niceTicks(domain: [number, number], count = 5): number[] {
  const [lo, hi] = domain;
  const raw = (hi - lo) / count;
  if (!(raw > 0)) return [lo];
  const power = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * power).find((s) => s >= raw) ?? 10 * power;
  const ticks: number[] = [];
  for (let t = Math.ceil(lo / step) * step; t <= hi + step * 1e-9; t += step) ticks.push(Number(t.toPrecision(12)));
  return ticks;
}

function tickDecimals(ticks: number[]): number {
  const step = ticks.length > 1 ? ticks[1] - ticks[0] : 1;
  return Math.max(0, Math.min(4, -Math.floor(Math.log10(step))));
}

/** One plot with its axes, as vectors. */
export function PlotFigure({ spec }: { spec: PlotSpec }) {
  const plotW = WIDTH - MARGIN.left - MARGIN.right;
  const plotH = HEIGHT - MARGIN.top - MARGIN.bottom;
  const [x0, x1] = spec.xDomain;
  const [y0, y1] = spec.yDomain;
  const sx = (x: number) => MARGIN.left + ((x - x0) / (x1 - x0)) * plotW;
  const sy = (y: number) => MARGIN.top + plotH - ((y - y0) / (y1 - y0)) * plotH;
  const xTicks = niceTicks(spec.xDomain);
  const yTicks = niceTicks(spec.yDomain);
  const xd = tickDecimals(xTicks);
  const yd = tickDecimals(yTicks);
  const band = spec.band && spec.band.length > 2 ? `M ${spec.band.map(([x, y]) => `${sx(x).toFixed(2)} ${sy(y).toFixed(2)}`).join(' L ')} Z` : null;
  return (
    <Svg width={WIDTH} height={HEIGHT} viewBox={`0 0 ${WIDTH} ${HEIGHT}`}>
      {yTicks.map((t) => (
        <G key={`y${t}`}>
          <Line x1={MARGIN.left} y1={sy(t)} x2={MARGIN.left + plotW} y2={sy(t)} stroke={GRID} strokeWidth={0.4} />
          <SvgText x={MARGIN.left - 3} y={sy(t) + 2} style={TICK_TEXT} fill={INK} textAnchor="end">
            {fixed(t, yd)}
          </SvgText>
        </G>
      ))}
      {xTicks.map((t) => (
        <G key={`x${t}`}>
          <Line x1={sx(t)} y1={MARGIN.top} x2={sx(t)} y2={MARGIN.top + plotH} stroke={GRID} strokeWidth={0.4} />
          <SvgText x={sx(t)} y={MARGIN.top + plotH + 8} style={TICK_TEXT} fill={INK} textAnchor="middle">
            {fixed(t, xd)}
          </SvgText>
        </G>
      ))}
      {band ? <Path d={band} fill={BRAND} fillOpacity={0.15} stroke="none" /> : null}
      {spec.lines.map((line, i) => {
        const look = LINE_LOOK[line.style];
        return (
          <Line
            key={`l${i}`}
            x1={sx(line.from[0])}
            y1={sy(line.from[1])}
            x2={sx(line.to[0])}
            y2={sy(line.to[1])}
            stroke={look.stroke}
            strokeWidth={look.width}
            {...(look.dash ? { strokeDasharray: look.dash } : {})}
          />
        );
      })}
      {spec.points.map((p, i) =>
        p.marked ? (
          <Circle key={`p${i}`} cx={sx(p.x)} cy={sy(p.y)} r={2.4} fill="none" stroke={ATTENTION} strokeWidth={0.9} />
        ) : (
          <Circle key={`p${i}`} cx={sx(p.x)} cy={sy(p.y)} r={1.5} fill={INK} fillOpacity={0.75} />
        ),
      )}
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
