// Small plane-geometry helpers for the panel outline: lines, intersections, and sanity checks of a
// quadrilateral given as corners top-left, top-right, bottom-right, bottom-left (camera pixels, y down).

import { EvenfieldError } from '../errors.js';
import type { Corners, Point } from '../types.js';

/** A line n·p = c with |n| = 1. */
export interface Line {
  nx: number;
  ny: number;
  c: number;
}

export function lineThrough(a: Point, b: Point): Line {
  const dx = b[0] - a[0];
  const dy = b[1] - a[1];
  const len = Math.hypot(dx, dy);
  const nx = dy / len;
  const ny = -dx / len;
  return { nx, ny, c: nx * a[0] + ny * a[1] };
}

/** Intersection of two lines; null when (nearly) parallel. */
export function intersectLines(a: Line, b: Line): Point | null {
  const det = a.nx * b.ny - a.ny * b.nx;
  if (Math.abs(det) < 1e-12) return null;
  return [(a.c * b.ny - a.ny * b.c) / det, (a.nx * b.c - a.c * b.nx) / det];
}

/** Signed area (shoelace). Positive for corners listed clockwise on screen (y down), as TL, TR, BR, BL are. */
export function signedArea(q: readonly Point[]): number {
  let s = 0;
  for (let i = 0; i < q.length; i++) {
    const [x0, y0] = q[i];
    const [x1, y1] = q[(i + 1) % q.length];
    s += x0 * y1 - x1 * y0;
  }
  return s / 2;
}

/** Interior angles in degrees, one per corner (in the corner order). */
export function cornerAngles(q: Corners): number[] {
  return q.map((p, i) => {
    const prev = q[(i + 3) % 4];
    const next = q[(i + 1) % 4];
    const ax = prev[0] - p[0];
    const ay = prev[1] - p[1];
    const bx = next[0] - p[0];
    const by = next[1] - p[1];
    const cos = (ax * bx + ay * by) / (Math.hypot(ax, ay) * Math.hypot(bx, by));
    return (Math.acos(Math.max(-1, Math.min(1, cos))) * 180) / Math.PI;
  });
}

/** True if the quadrilateral is strictly convex with corners in screen-clockwise order. */
export function isConvexClockwise(q: Corners): boolean {
  for (let i = 0; i < 4; i++) {
    const a = q[i];
    const b = q[(i + 1) % 4];
    const c = q[(i + 2) % 4];
    const cross = (b[0] - a[0]) * (c[1] - b[1]) - (b[1] - a[1]) * (c[0] - b[0]);
    if (!(cross > 0)) return false;
  }
  return true;
}

/**
 * Put four unordered points into the order top-left, top-right, bottom-right, bottom-left:
 * sort by angle about the centroid (clockwise on screen), then start at the point with the smallest x + y.
 * Meant for a panel that is upright in the photo (roll well under 45°).
 */
export function orderCorners(points: readonly Point[]): Corners {
  if (points.length !== 4) throw new EvenfieldError('usage', `expected 4 corner points, got ${points.length}`);
  const cx = (points[0][0] + points[1][0] + points[2][0] + points[3][0]) / 4;
  const cy = (points[0][1] + points[1][1] + points[2][1] + points[3][1]) / 4;
  const sorted = [...points].sort((a, b) => Math.atan2(a[1] - cy, a[0] - cx) - Math.atan2(b[1] - cy, b[0] - cx));
  let first = 0;
  for (let i = 1; i < 4; i++) {
    if (sorted[i][0] + sorted[i][1] < sorted[first][0] + sorted[first][1]) first = i;
  }
  const out = [0, 1, 2, 3].map((k) => {
    const p = sorted[(first + k) % 4];
    return [p[0], p[1]] as Point;
  });
  return out as Corners;
}

export interface QuadCheckOptions {
  /** Smallest allowed interior angle, degrees. Default 40. */
  minCornerAngleDeg?: number;
  /** Largest allowed interior angle, degrees. Default 140. */
  maxCornerAngleDeg?: number;
  /** Smallest allowed area as a fraction of the frame. Default 0.01. */
  minAreaFraction?: number;
}

/**
 * Throws EvenfieldError when the quadrilateral is not a plausible panel outline: 'partly-outside' when a
 * corner lies outside the frame (pixel centres at integers, so the frame spans -0.5..width-0.5), 'no-panel'
 * when it is not convex and clockwise, has an implausible corner angle, or is too small.
 */
export function checkQuadrilateral(q: Corners, width: number, height: number, opts: QuadCheckOptions = {}): void {
  const minA = opts.minCornerAngleDeg ?? 40;
  const maxA = opts.maxCornerAngleDeg ?? 140;
  const minFrac = opts.minAreaFraction ?? 0.01;
  for (const p of q) {
    if (!Number.isFinite(p[0]) || !Number.isFinite(p[1])) {
      throw new EvenfieldError('no-panel', 'panel outline has a corner at infinity (opposite edges parallel)');
    }
  }
  if (!isConvexClockwise(q)) throw new EvenfieldError('no-panel', 'panel outline is not a convex quadrilateral');
  const angles = cornerAngles(q);
  for (const a of angles) {
    if (a < minA || a > maxA) {
      throw new EvenfieldError(
        'no-panel',
        `panel outline has a corner angle of ${a.toFixed(1)}°, outside ${minA}..${maxA}°`,
      );
    }
  }
  const names = ['top-left', 'top-right', 'bottom-right', 'bottom-left'];
  for (let i = 0; i < 4; i++) {
    const [x, y] = q[i];
    if (x < -0.5 || y < -0.5 || x > width - 0.5 || y > height - 0.5) {
      throw new EvenfieldError(
        'partly-outside',
        `the panel's ${names[i]} corner (${x.toFixed(1)}, ${y.toFixed(1)}) lies outside the ${width}x${height} frame`,
      );
    }
  }
  const area = signedArea(q);
  if (area < minFrac * width * height) {
    throw new EvenfieldError(
      'no-panel',
      `panel outline covers only ${((100 * area) / (width * height)).toFixed(2)} % of the frame`,
    );
  }
}
