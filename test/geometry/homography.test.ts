import { describe, expect, it } from 'vitest';
import { Matrix, solve } from 'ml-matrix';
import {
  applyHomography,
  invertHomography,
  multiply3,
  reprojectionError,
  solveHomography,
  UNIT_SQUARE,
} from '../../lib/geometry/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import type { Corners, Point } from '../../lib/types.js';
import { gaussianNoise, rng } from './render.js';

/**
 * Closed-form square-to-quadrilateral projective mapping, Heckbert 1989, "Fundamentals of texture mapping
 * and image warping", §2.2.3 (formulas written out from that text; the mapping is also checked below to
 * send the unit square's corners to the quadrilateral). Returns row-major [a b c; d e f; g h 1] with
 * x = (a u + b v + c)/(g u + h v + 1), y = (d u + e v + f)/(g u + h v + 1).
 */
function heckbertSquareToQuad(q: Corners): number[] {
  const [[x0, y0], [x1, y1], [x2, y2], [x3, y3]] = q;
  const sx = x0 - x1 + x2 - x3;
  const sy = y0 - y1 + y2 - y3;
  if (sx === 0 && sy === 0) {
    return [x1 - x0, x2 - x1, x0, y1 - y0, y2 - y1, y0, 0, 0, 1];
  }
  const dx1 = x1 - x2;
  const dx2 = x3 - x2;
  const dy1 = y1 - y2;
  const dy2 = y3 - y2;
  const den = dx1 * dy2 - dx2 * dy1;
  const g = (sx * dy2 - dx2 * sy) / den;
  const h = (dx1 * sy - sx * dy1) / den;
  return [x1 - x0 + g * x1, x3 - x0 + h * x3, x0, y1 - y0 + g * y1, y3 - y0 + h * y3, y0, g, h, 1];
}

/** Independent solver: the 8 unknowns with h33 = 1, least squares with ml-matrix (general-purpose library). */
function leastSquares8(src: Point[], dst: Point[]): number[] {
  const rows: number[][] = [];
  const rhs: number[] = [];
  src.forEach(([x, y], i) => {
    const [xp, yp] = dst[i];
    rows.push([x, y, 1, 0, 0, 0, -x * xp, -y * xp]);
    rhs.push(xp);
    rows.push([0, 0, 0, x, y, 1, -x * yp, -y * yp]);
    rhs.push(yp);
  });
  const sol = solve(new Matrix(rows), Matrix.columnVector(rhs));
  return [...sol.getColumn(0), 1];
}

function expectHomographiesClose(a: number[], b: number[], rel: number): void {
  const scale = Math.max(...b.map(Math.abs));
  for (let k = 0; k < 9; k++) expect(Math.abs(a[k] - b[k])).toBeLessThanOrEqual(rel * scale);
}

const quads: Corners[] = [
  // a perspective view of a 16:9 panel in a 4000x3000 photo
  [
    [612.3, 488.1],
    [3391.7, 602.4],
    [3288.2, 2455.9],
    [701.6, 2611.3],
  ],
  // strongly keystoned
  [
    [100, 100],
    [700, 180],
    [650, 520],
    [140, 590],
  ],
  // a parallelogram (affine case of the closed form)
  [
    [10, 20],
    [310, 50],
    [330, 250],
    [30, 220],
  ],
];

describe('solveHomography', () => {
  it('matches the closed-form square-to-quadrilateral mapping (Heckbert 1989 §2.2.3)', () => {
    for (const q of quads) {
      const ref = heckbertSquareToQuad(q);
      // The reference itself sends the unit square's corners to the quadrilateral.
      UNIT_SQUARE.forEach((p, i) => {
        const m = applyHomography(ref, p);
        expect(m[0]).toBeCloseTo(q[i][0], 9);
        expect(m[1]).toBeCloseTo(q[i][1], 9);
      });
      const H = solveHomography(UNIT_SQUARE, q);
      expectHomographiesClose(H, ref, 1e-10);
    }
  });

  it('agrees with an ml-matrix least-squares solve of the 8-unknown system on exact data', () => {
    const rand = rng(7);
    for (const q of quads) {
      const Href = heckbertSquareToQuad(q);
      // 12 scattered points in panel coordinates, mapped exactly, then a camera -> panel solve (other direction)
      const uv: Point[] = Array.from({ length: 12 }, () => [rand(), rand()] as Point);
      const xy = uv.map((p) => applyHomography(Href, p));
      const H = solveHomography(xy, uv);
      const L = leastSquares8(xy, uv);
      expectHomographiesClose(H, L, 1e-8);
      expect(reprojectionError(H, xy, uv).max).toBeLessThan(1e-10);
    }
  });

  it('with noisy correspondences stays within the noise, like the least-squares solution', () => {
    const rand = rng(11);
    const gauss = gaussianNoise(rand);
    const Href = heckbertSquareToQuad(quads[0]);
    const uv: Point[] = [];
    for (let i = 0; i <= 6; i++) for (let j = 0; j <= 6; j++) uv.push([i / 6, j / 6]);
    const sigma = 0.5; // pixels
    const xy = uv.map((p) => {
      const m = applyHomography(Href, p);
      return [m[0] + sigma * gauss(), m[1] + sigma * gauss()] as Point;
    });
    const H = solveHomography(uv, xy);
    const L = leastSquares8(uv, xy);
    const rH = reprojectionError(H, uv, xy).rms;
    const rL = reprojectionError(L, uv, xy).rms;
    // Reprojection error is a 2-D distance, so its mean square is 2 sigma^2 less the fitted degrees of
    // freedom: rms ≈ sigma * sqrt(2) * sqrt(1 - 8/98) ≈ 0.678 px for 49 points (least-squares residual
    // degrees of freedom; common practice). Both solvers minimise algebraic, not geometric, error, and
    // one noise draw scatters: allow ±15 %.
    const expected = sigma * Math.SQRT2 * Math.sqrt(1 - 8 / 98);
    expect(rH).toBeGreaterThan(expected * 0.85);
    expect(rH).toBeLessThan(expected * 1.15);
    expect(Math.abs(rH - rL)).toBeLessThan(0.02);
    // and the fitted map is close to the truth in the middle of the panel
    const c = applyHomography(H, [0.5, 0.5]);
    const t = applyHomography(Href, [0.5, 0.5]);
    expect(Math.hypot(c[0] - t[0], c[1] - t[1])).toBeLessThan(0.3);
  });

  it('round trips through invertHomography and composes to the identity', () => {
    for (const q of quads) {
      const H = solveHomography(UNIT_SQUARE, q);
      const Hi = invertHomography(H);
      const I = multiply3(H, Hi);
      const s = I[8];
      expectHomographiesClose(
        I.map((v) => v / s),
        [1, 0, 0, 0, 1, 0, 0, 0, 1],
        1e-12,
      );
      for (const p of [
        [0.1, 0.2],
        [0.9, 0.7],
        [0.5, 0.5],
      ] as Point[]) {
        const back = applyHomography(Hi, applyHomography(H, p));
        expect(back[0]).toBeCloseTo(p[0], 12);
        expect(back[1]).toBeCloseTo(p[1], 12);
      }
      // solving the other way gives the inverse too
      const H2 = solveHomography(q, UNIT_SQUARE);
      expectHomographiesClose(H2, Hi, 1e-10);
    }
  });

  it('is invariant to translation and scaling of pixel coordinates thanks to normalisation', () => {
    const q = quads[1];
    const H = solveHomography(UNIT_SQUARE, q);
    const shifted = q.map(([x, y]) => [x * 10 + 1e5, y * 10 - 3e4] as Point) as Corners;
    const Hs = solveHomography(UNIT_SQUARE, shifted);
    for (const p of [
      [0.25, 0.75],
      [0.6, 0.1],
    ] as Point[]) {
      const a = applyHomography(H, p);
      const b = applyHomography(Hs, p);
      expect((b[0] - 1e5) / 10).toBeCloseTo(a[0], 7);
      expect((b[1] + 3e4) / 10).toBeCloseTo(a[1], 7);
    }
  });

  it('throws on degenerate input', () => {
    const collinear: Point[] = [
      [0, 0],
      [1, 1],
      [2, 2],
      [3, 3],
    ];
    expect(() => solveHomography(collinear, UNIT_SQUARE)).toThrow(EvenfieldError);
    expect(() => solveHomography(UNIT_SQUARE, collinear)).toThrow(/collinear/);
    const threeInLine: Point[] = [
      [0, 0],
      [1, 0],
      [2, 0],
      [0, 1],
    ];
    expect(() => solveHomography(threeInLine, UNIT_SQUARE)).toThrow(/collinear/);
    const coincident: Point[] = [
      [5, 5],
      [5, 5],
      [5, 5],
      [5, 5],
    ];
    expect(() => solveHomography(coincident, UNIT_SQUARE)).toThrow(EvenfieldError);
    expect(() => solveHomography(UNIT_SQUARE.slice(0, 3), UNIT_SQUARE.slice(0, 3))).toThrow(/at least 4/);
    expect(() => solveHomography(UNIT_SQUARE, [[0, 0], [1, 0], [1, Number.NaN], [0, 1]])).toThrow(/finite/);
    // many points on one line plus one off it: the map is not determined
    const lineAndOne: Point[] = [[0, 0], [1, 0], [2, 0], [3, 0], [4, 0], [0, 1]];
    expect(() => solveHomography(lineAndOne, lineAndOne)).toThrow(EvenfieldError);
  });
});
