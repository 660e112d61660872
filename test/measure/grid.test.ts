import { describe, expect, it } from 'vitest';
import { layoutPoints, measureGrid, spotMean, uniformityFigures, uvPrime } from '../../lib/measure/index.js';
import type { GridPoint, PanelMap } from '../../lib/types.js';

function makeMap(w: number, h: number, pxPerMm: number, f: (x: number, y: number) => [number, number, number]): PanelMap {
  const n = w * h;
  const X = new Float32Array(n);
  const Y = new Float32Array(n);
  const Z = new Float32Array(n);
  for (let j = 0; j < h; j++)
    for (let i = 0; i < w; i++) {
      const [a, b, c] = f(i + 0.5, j + 0.5);
      X[j * w + i] = a;
      Y[j * w + i] = b;
      Z[j * w + i] = c;
    }
  return { width: w, height: h, pxPerMm, widthMm: w / pxPerMm, heightMm: h / pxPerMm, mmKnown: true, X, Y, Z, valid: new Uint8Array(n).fill(1) };
}

describe('grid layouts', () => {
  it('9-point cells use the n×n cell-centre rule 1/6, 1/2, 5/6 (field notes §2, computed)', () => {
    const pts = layoutPoints(9, 'cells');
    expect(pts).toHaveLength(9);
    const us = [...new Set(pts.map((p) => p.u.toFixed(6)))];
    expect(us).toEqual([(1 / 6).toFixed(6), '0.500000', (5 / 6).toFixed(6)]);
    // reading order: first row left to right
    expect(pts[0]).toEqual({ u: 1 / 6, v: 1 / 6 });
    expect(pts[2]).toEqual({ u: 5 / 6, v: 1 / 6 });
    expect(pts[4]).toEqual({ u: 0.5, v: 0.5 });
  });

  it('5-point cells: centre plus (W/4, H/4) .. (3W/4, 3H/4), as in a 14-inch panel datasheet (field notes §2, DS-14in note 6)', () => {
    const pts = layoutPoints(5, 'cells');
    expect(pts.map((p) => [p.u, p.v])).toEqual([
      [0.25, 0.25],
      [0.75, 0.25],
      [0.5, 0.5],
      [0.25, 0.75],
      [0.75, 0.75],
    ]);
  });

  it('25-point cells at 10/30/50/70/90 % and 13-point inset 10 % = 9 at 10/50/90 plus four at 30/70 (field notes §2, from memory)', () => {
    const p25 = layoutPoints(25, 'cells');
    expect([...new Set(p25.map((p) => p.u.toFixed(3)))]).toEqual(['0.100', '0.300', '0.500', '0.700', '0.900']);
    const p13 = layoutPoints(13, 'inset', 0.1);
    const coords = p13.map((p) => `${p.u.toFixed(2)},${p.v.toFixed(2)}`).sort();
    expect(coords).toEqual(
      ['0.10,0.10', '0.50,0.10', '0.90,0.10', '0.10,0.50', '0.50,0.50', '0.90,0.50', '0.10,0.90', '0.50,0.90', '0.90,0.90', '0.30,0.30', '0.70,0.30', '0.30,0.70', '0.70,0.70'].sort(),
    );
    // inset 25 with 10 % equals the cell-centre 25 (both 0.1..0.9 in steps of 0.2)
    const i25 = layoutPoints(25, 'inset', 0.1);
    i25.forEach((p, k) => {
      expect(p.u).toBeCloseTo(p25[k].u, 12);
      expect(p.v).toBeCloseTo(p25[k].v, 12);
    });
  });

  it('rejects an inset of 50 % or more', () => {
    expect(() => layoutPoints(9, 'inset', 0.5)).toThrow(/inset/);
  });
});

describe('spot means', () => {
  it('a linear ramp averages to its value at the disc centre (symmetry; common practice)', () => {
    const map = makeMap(300, 200, 2, (x, y) => [0.5, 0.2 + 0.001 * x + 0.002 * y, 0.5]);
    const m = spotMean(map, 123.4, 87.9, 21.3);
    // 4 decimals: edge pixels are weighted by 4×4 sub-samples, which shifts the disc's centroid by
    // ~0.005 px, i.e. ~1e-5 of this ramp.
    expect(m.Y).toBeCloseTo(0.2 + 0.001 * 123.4 + 0.002 * 87.9, 4);
    // coverage weights sum to the disc area within a fraction of a pixel per edge pixel
    expect(Math.abs(m.pixels - Math.PI * 21.3 * 21.3) / (Math.PI * 21.3 * 21.3)).toBeLessThan(0.003);
  });

  it('u\'v\' of the D65 white point XYZ (0.9504559, 1, 1.0890578) is (0.197830, 0.468320) (CIE 1976 UCS; field notes §1 table)', () => {
    const [u, v] = uvPrime(0.9504559, 1, 1.0890578);
    expect(u).toBeCloseTo(0.19783, 5);
    expect(v).toBeCloseTo(0.46832, 5);
  });

  it('measures relative luminance and Δu\'v\' against the centre on a known field', () => {
    // Y falls linearly to the right; the colour drifts in X
    const map = makeMap(400, 300, 1, (x) => [0.95 * (1 - 0.0005 * x) + 0.0001 * x, 1 - 0.0005 * x, 1.089 * (1 - 0.0005 * x)]);
    const pts = measureGrid(map, { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 });
    const c = pts[4];
    expect(c.relative).toBe(1);
    for (const p of pts) {
      const x = p.u * 400;
      expect(p.relative).toBeCloseTo((1 - 0.0005 * x) / (1 - 0.0005 * 200), 4);
    }
    expect(pts[3].duvFromCentre).toBeGreaterThan(0);
  });
});

describe('uniformity figures', () => {
  function pts(values: number[]): GridPoint[] {
    return values.map((relative, i) => ({ index: i + 1, u: i === 0 ? 0.5 : 0.1 * i, v: i === 0 ? 0.5 : 0.1, xMm: null, yMm: null, Y: relative, relative, uprime: 0.1978, vprime: 0.4683, duvFromCentre: 0, pixels: 100 }));
  }
  it('uniformity 75 % ⇔ max/min 1.333 ⇔ non-uniformity 25 % (field notes §2, computed)', () => {
    const f = uniformityFigures(pts([1, 0.75, 0.9, 0.8]));
    expect(f.minOverMaxPct).toBeCloseTo(75, 10);
    expect(f.maxOverMin).toBeCloseTo(4 / 3, 10);
    expect(f.nonuniformityPct).toBeCloseTo(25, 10);
    expect(f.maxDeviationFromCentrePct).toBeCloseTo(-25, 10);
  });
  it('coefficient of variation is the population standard deviation over the mean (common practice)', () => {
    const f = uniformityFigures(pts([1, 0.8]));
    expect(f.cvPct).toBeCloseTo((100 * 0.1) / 0.9, 10);
  });
});
