// Grid layouts for sampled uniformity (5, 9, 13, 25 points).
//
// Two placements:
//  - 'cells': points at the centres of an equal-cell array (the n×n cell-centre rule (2k−1)/(2n));
//  - 'inset': points inset from the active-area edges by a given fraction.
// Points are numbered 1.. in reading order: row by row, top to bottom, left to right.

import type { GridLayout, GridPlacement } from '../types.js';

export interface LayoutPoint {
  u: number;
  v: number;
}

export const GRID_LAYOUTS: readonly GridLayout[] = [5, 9, 13, 25];

function cellCentres(n: number): number[] {
  const out: number[] = [];
  for (let k = 1; k <= n; k++) out.push((2 * k - 1) / (2 * n));
  return out;
}

function square(axis: number[]): LayoutPoint[] {
  const pts: LayoutPoint[] = [];
  for (const v of axis) for (const u of axis) pts.push({ u, v });
  return pts;
}

function readingOrder(points: LayoutPoint[]): LayoutPoint[] {
  const eps = 1e-9;
  return [...points].sort((a, b) => (Math.abs(a.v - b.v) > eps ? a.v - b.v : a.u - b.u));
}

/**
 * The points of a layout in panel coordinates (u right, v down, 0..1).
 * @param insetFraction used by 'inset' only, e.g. 0.10 for 10 % from each edge.
 */
export function layoutPoints(layout: GridLayout, placement: GridPlacement, insetFraction = 0.1): LayoutPoint[] {
  if (placement === 'inset' && !(insetFraction > 0 && insetFraction < 0.5)) {
    throw new RangeError(`inset must be between 0 and 50 % of the panel, got ${insetFraction * 100} %`);
  }
  const p = insetFraction;
  const c = 0.5;
  let pts: LayoutPoint[];
  if (placement === 'cells') {
    switch (layout) {
      case 25:
        pts = square(cellCentres(5));
        break;
      case 9:
        pts = square(cellCentres(3));
        break;
      case 13:
        pts = [...square(cellCentres(3)), ...square(cellCentres(2))];
        break;
      case 5:
        pts = [{ u: c, v: c }, ...square(cellCentres(2))];
        break;
    }
  } else {
    const nine = square([p, c, 1 - p]);
    switch (layout) {
      case 25: {
        const axis = [0, 1, 2, 3, 4].map((k) => p + (k * (1 - 2 * p)) / 4);
        pts = square(axis);
        break;
      }
      case 9:
        pts = nine;
        break;
      case 13: {
        const m = (p + c) / 2;
        const m2 = (1 - p + c) / 2;
        pts = [...nine, ...square([m, m2])];
        break;
      }
      case 5:
        pts = [{ u: c, v: c }, ...square([p, 1 - p])];
        break;
    }
  }
  return readingOrder(pts);
}

/** Index (0-based) of the centre point (0.5, 0.5) of a layout. */
export function centreIndex(points: LayoutPoint[]): number {
  const i = points.findIndex((p) => Math.abs(p.u - 0.5) < 1e-9 && Math.abs(p.v - 0.5) < 1e-9);
  if (i < 0) throw new Error('layout has no centre point');
  return i;
}
