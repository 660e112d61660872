import { describe, expect, it } from 'vitest';
import { checkQuadrilateral, cornerAngles, orderCorners, signedArea } from '../../lib/geometry/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import type { Corners, Point } from '../../lib/types.js';

const quad: Corners = [
  [120, 80],
  [700, 95],
  [690, 520],
  [110, 505],
];

function codeOf(fn: () => void): string | null {
  try {
    fn();
  } catch (e) {
    return e instanceof EvenfieldError ? e.code : 'other';
  }
  return null;
}

describe('quadrilateral helpers', () => {
  it('orders shuffled corners as top-left, top-right, bottom-right, bottom-left', () => {
    const perms: number[][] = [
      [0, 1, 2, 3],
      [2, 0, 3, 1],
      [3, 2, 1, 0],
      [1, 3, 0, 2],
    ];
    for (const p of perms) {
      const shuffled = p.map((i) => quad[i]) as Point[];
      expect(orderCorners(shuffled)).toEqual(quad);
    }
  });

  it('computes the shoelace area and interior angles (angles of a convex quadrilateral sum to 360°)', () => {
    // shoelace formula on a 4 x 3 rectangle listed clockwise on screen (y down): +12 (common practice)
    expect(
      signedArea([
        [0, 0],
        [4, 0],
        [4, 3],
        [0, 3],
      ]),
    ).toBe(12);
    const a = cornerAngles(quad);
    expect(a.reduce((s, v) => s + v, 0)).toBeCloseTo(360, 9);
    for (const v of a) expect(v).toBeGreaterThan(80);
  });

  it('accepts a plausible outline and rejects absurd ones with the right error code', () => {
    expect(codeOf(() => checkQuadrilateral(quad, 800, 600))).toBeNull();
    // a corner beyond the frame (the frame spans -0.5 .. width - 0.5)
    const out: Corners = [quad[0], [800.2, 95], quad[2], quad[3]];
    expect(codeOf(() => checkQuadrilateral(out, 800, 600))).toBe('partly-outside');
    // bow-tie (corners in the wrong order): not convex
    const bowtie: Corners = [quad[0], quad[2], quad[1], quad[3]];
    expect(codeOf(() => checkQuadrilateral(bowtie, 800, 600))).toBe('no-panel');
    // counter-clockwise listing is not the documented order
    const ccw: Corners = [quad[0], quad[3], quad[2], quad[1]];
    expect(codeOf(() => checkQuadrilateral(ccw, 800, 600))).toBe('no-panel');
    // convex, but with a 31° corner at the top-left
    const sliver: Corners = [
      [100, 280],
      [700, 100],
      [700, 320],
      [300, 330],
    ];
    expect(cornerAngles(sliver)[0]).toBeLessThan(35);
    expect(codeOf(() => checkQuadrilateral(sliver, 800, 600))).toBe('no-panel');
    // tiny: under 1 % of the frame
    const tiny: Corners = [
      [10, 10],
      [50, 10],
      [50, 40],
      [10, 40],
    ];
    expect(codeOf(() => checkQuadrilateral(tiny, 800, 600))).toBe('no-panel');
    expect(codeOf(() => checkQuadrilateral(tiny, 800, 600, { minAreaFraction: 0.001 }))).toBeNull();
  });
});
