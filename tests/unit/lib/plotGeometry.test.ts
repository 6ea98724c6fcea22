import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  confidenceBand,
  differenceGeometry,
  leverageGeometry,
  lineSegment,
  niceAxis,
  residualGeometry,
  scatterGeometry,
  weightFunctionGeometry,
} from '../../../src/lib/plotGeometry';
import { blandAltman } from '../../../src/lib/stats/blandAltman';
import { fitOlsLine } from '../../../src/lib/stats/ols';
import { fitPassingBablok } from '../../../src/lib/stats/passingBablok';

// Bland & Altman, Lancet 1986, peak expiratory flow, first readings (Wright x, mini Wright y), l/min.
const wright = [494, 395, 516, 434, 476, 557, 413, 442, 650, 433, 417, 656, 267, 478, 178, 423, 427];
const mini = [512, 430, 520, 428, 500, 600, 364, 380, 658, 445, 432, 626, 260, 477, 259, 350, 451];
const ids = wright.map((_, i) => `P${i + 1}`);
// R 4.2.2 and MASS 7.3.58.2 (tests/fixtures/plotGeometry/generate_reference.R).
const reference = JSON.parse(readFileSync('tests/fixtures/plotGeometry/reference.json', 'utf8'));

describe('axes', () => {
  it('covers the values with whole nice steps and ticks on them', () => {
    const axis = niceAxis([43.2, 465.9]);
    expect(axis.ticks).toEqual([0, 100, 200, 300, 400, 500]);
    expect(axis.domain).toEqual([0, 500]);
  });

  it('takes in the values to include and gives a single value some room', () => {
    expect(niceAxis([2, 3], { include: [-10] }).domain[0]).toBeLessThanOrEqual(-10);
    const single = niceAxis([50]);
    expect(single.domain[0]).toBeLessThan(50);
    expect(single.domain[1]).toBeGreaterThan(50);
  });

  it('has ticks without float noise', () => {
    const { ticks } = niceAxis([0.1, 0.7]);
    for (const tick of ticks) expect(String(tick).length).toBeLessThan(6);
  });
});

describe('scatter plot', () => {
  const ols = fitOlsLine(wright, mini);
  const geometry = scatterGeometry({ sampleIds: ids, comparative: wright, candidate: mini, fits: { ols }, methods: ['ols'], primary: 'ols' });

  it('shares one axis for x and y, so the identity line runs corner to corner', () => {
    const [lo, hi] = geometry.axis.domain;
    expect(geometry.identity).toEqual([{ x: lo, y: lo }, { x: hi, y: hi }]);
    expect(lo).toBeLessThanOrEqual(Math.min(...wright, ...mini));
    expect(hi).toBeGreaterThanOrEqual(Math.max(...wright, ...mini));
  });

  it('draws each fitted line across the axis', () => {
    expect(lineSegment(2, 1.5, [0, 10])).toEqual([{ x: 0, y: 2 }, { x: 10, y: 17 }]);
    expect(geometry.lines[0].segment[1].y).toBeCloseTo(ols.intercept + ols.slope * geometry.axis.domain[1], 10);
  });

  it("bands OLS with the mean-response interval of R's predict.lm (interval = 'confidence')", () => {
    const band = confidenceBand(ols, [200, 600], 2);
    expect(band.kind).toBe('mean-response');
    band.lower.forEach((point, k) => {
      expect(point.x).toBe(reference.bandAt[k]);
      expect(point.y).toBeCloseTo(reference.bandLower[k], 6);
      expect(band.upper[k].y).toBeCloseTo(reference.bandUpper[k], 6);
    });
    expect(band.polygon).toHaveLength(6);
    expect(band.polygon[3]).toEqual(band.lower[2]);
  });

  it('bands Passing–Bablok by the lines through the ends of its CIs', () => {
    const pb = fitPassingBablok(wright, mini);
    const band = confidenceBand(pb, [200, 600], 1);
    expect(band.kind).toBe('interval-ends');
    const ends = pb.interceptCI.flatMap((a) => pb.slopeCI.map((b) => a + b * 600));
    expect(band.upper[1].y).toBe(Math.max(...ends));
    expect(band.lower[1].y).toBe(Math.min(...ends));
  });
});

describe('difference plot', () => {
  it('places the differences against the pair means with the limits of agreement of the 1986 paper', () => {
    const ba = blandAltman(wright, mini, { kind: 'absolute', multiplier: 2 });
    const geometry = differenceGeometry(ba, ids);
    expect(geometry.points[0]).toEqual({ id: 'P1', x: (494 + 512) / 2, y: 512 - 494 });
    // Bland & Altman 1986 report Wright − mini: mean −2.1, limits −79.7 to 75.5; y − x here is mini − Wright.
    expect(geometry.mean[0].y).toBeCloseTo(2.1, 1);
    expect(geometry.lowerLoA[0].y).toBeCloseTo(-75.5, 0);
    expect(geometry.upperLoA[1].y).toBeCloseTo(79.7, 0);
    expect(geometry.yAxis.domain[1]).toBeGreaterThanOrEqual(geometry.upperLoA[0].y);
  });
});

describe('residuals against fitted values', () => {
  it('is each residual y − (a + b·x) at its fitted value, with the weights given', () => {
    const geometry = residualGeometry(['A', 'B'], [10, 20], [12, 19], { intercept: 1, slope: 1 }, [1, 0.2]);
    expect(geometry.points).toEqual([
      { id: 'A', x: 11, y: 1, weight: 1 },
      { id: 'B', x: 21, y: -2, weight: 0.2 },
    ]);
  });
});

describe('leverage against studentized residual', () => {
  const ols = fitOlsLine(wright, mini);
  const residuals = wright.map((x, i) => mini[i] - ols.intercept - ols.slope * x);
  const hat = reference.hat as number[];
  const geometry = leverageGeometry(ids, residuals, hat);

  it("matches R's rstandard and cooks.distance", () => {
    geometry.points.forEach((point, i) => {
      expect(point.y).toBeCloseTo(reference.rstandard[i], 8);
      expect(point.cooksDistance).toBeCloseTo(reference.cooksDistance[i], 8);
    });
  });

  it("draws Cook's distance contours r² = D·p·(1 − h)/h for D = 0.5 and 1", () => {
    expect(geometry.contours.map((c) => c.level)).toEqual([0.5, 1]);
    for (const contour of geometry.contours) {
      expect(contour.upper.length).toBeGreaterThan(3);
      for (const point of contour.upper) {
        const d = (point.y * point.y * point.x) / (2 * (1 - point.x));
        expect(d).toBeCloseTo(contour.level, 10);
        expect(point.y).toBeLessThanOrEqual(Math.max(...geometry.yAxis.domain.map(Math.abs)));
      }
      expect(contour.lower[0].y).toBe(-contour.upper[0].y);
    }
    // The sample beyond D = 1 in R (P15, Cook's D 1.18) lies outside the D = 1 contour at its leverage.
    const p15 = geometry.points[14];
    expect(p15.y * p15.y).toBeGreaterThan((1 * 2 * (1 - p15.x)) / p15.x);
  });

  it('marks the high-leverage threshold 2p/n', () => {
    expect(geometry.leverageThreshold.value).toBeCloseTo(4 / 17, 12);
  });
});

describe('weight function', () => {
  const families = [
    ['huber', [1.345], 'huberWeight'],
    ['tukey', [4.685], 'bisquareWeight'],
    ['hampel', [2, 4, 8], 'hampelWeight'],
  ] as const;
  for (const [psi, tuning, key] of families) {
    it(`places samples on the ${psi} weight curve as MASS::psi.${key.replace('Weight', '')} weighs them`, () => {
      const u = reference.u as number[];
      // Residuals u·s about the line y = x with scale s = 2.
      const x = u.map((_, i) => 10 * (i + 1));
      const y = x.map((xi, i) => xi + 2 * u[i]);
      const geometry = weightFunctionGeometry(psi, tuning, u.map((_, i) => `U${i}`), x, y, { intercept: 0, slope: 1, scale: 2 });
      geometry.points.forEach((point, i) => {
        expect(point.x).toBeCloseTo(u[i], 12);
        expect(point.y).toBeCloseTo(reference[key][i], 10);
      });
      expect(geometry.curve[0].x).toBeLessThanOrEqual(-tuning[tuning.length - 1]);
      const middle = geometry.curve.find((p) => Math.abs(p.x) < 1e-9);
      expect(middle?.y).toBe(1);
    });
  }
});
