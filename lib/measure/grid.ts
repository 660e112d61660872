// Sampled uniformity: mean linear XYZ over a disc at each grid point of the rectified panel map,
// then luminance and colour uniformity figures from those points.

import type { GridLayout, GridPlacement, GridPoint, PanelMap, UniformityFigures } from '../types.js';
import { centreIndex, layoutPoints } from './layouts.js';

export interface GridOptions {
  layout: GridLayout;
  placement: GridPlacement;
  /** fraction of the panel, for the 'inset' placement (0.10 = 10 %) */
  insetFraction: number;
  /** spot radius in % of the panel diagonal */
  spotRadiusPct: number;
}

/** Default spot radius, % of the panel diagonal: a disc of 4 % of the diagonal across fits inside
 *  the largest measurement field FPDM 2.0 §301-2H allows (a rectangle of 10 % of the screen width and
 *  height) on panels from 4:3 up to an aspect of about 2.29:1
 *  (0.04·√(a² + 1) ≤ 0.1), which covers 16:9 and 16:10 but not quite 21:9. */
export const DEFAULT_SPOT_RADIUS_PCT = 2.0;

/** Coverage sub-samples per axis for pixels cut by the disc edge. */
const EDGE_SUBSAMPLES = 4;

export interface SpotMean {
  X: number;
  Y: number;
  Z: number;
  /** sum of coverage weights (map pixels) */
  pixels: number;
  /** fraction of the disc's area that had valid data */
  validFraction: number;
}

/**
 * Area-weighted mean of X, Y, Z over a disc centred at map coordinates (cx, cy) (pixel centres at
 * integer + 0.5 in map units, i.e. the continuous coordinate of map pixel i spans i..i+1) with radius r
 * in map pixels. Pixels cut by the circle count with their covered fraction.
 */
export function spotMean(map: PanelMap, cx: number, cy: number, r: number): SpotMean {
  const { width, height, X, Y, Z, valid } = map;
  const x0 = Math.max(0, Math.floor(cx - r));
  const x1 = Math.min(width - 1, Math.ceil(cx + r));
  const y0 = Math.max(0, Math.floor(cy - r));
  const y1 = Math.min(height - 1, Math.ceil(cy + r));
  const r2 = r * r;
  let sx = 0;
  let sy = 0;
  let sz = 0;
  let sw = 0;
  const n = EDGE_SUBSAMPLES;
  // farthest and nearest corner distance of a unit pixel from its centre
  const half = Math.SQRT1_2;
  for (let j = y0; j <= y1; j++) {
    const pyc = j + 0.5;
    for (let i = x0; i <= x1; i++) {
      const pxc = i + 0.5;
      const d = Math.hypot(pxc - cx, pyc - cy);
      let w: number;
      if (d + half <= r) w = 1;
      else if (d - half >= r) continue;
      else {
        let inside = 0;
        for (let a = 0; a < n; a++) {
          const sy_ = j + (a + 0.5) / n - cy;
          for (let b = 0; b < n; b++) {
            const sx_ = i + (b + 0.5) / n - cx;
            if (sx_ * sx_ + sy_ * sy_ <= r2) inside++;
          }
        }
        if (inside === 0) continue;
        w = inside / (n * n);
      }
      const k = j * width + i;
      if (!valid[k]) continue;
      sx += w * X[k];
      sy += w * Y[k];
      sz += w * Z[k];
      sw += w;
    }
  }
  const discArea = Math.PI * r2;
  return {
    X: sw > 0 ? sx / sw : NaN,
    Y: sw > 0 ? sy / sw : NaN,
    Z: sw > 0 ? sz / sw : NaN,
    pixels: sw,
    validFraction: discArea > 0 ? sw / discArea : 0,
  };
}

export function uvPrime(X: number, Y: number, Z: number): [number, number] {
  const d = X + 15 * Y + 3 * Z;
  if (!(d > 0)) return [NaN, NaN];
  return [(4 * X) / d, (9 * Y) / d];
}

/** Spot radius in map pixels for a given % of the panel diagonal. */
export function spotRadiusPx(map: PanelMap, spotRadiusPct: number): number {
  const diagMm = Math.hypot(map.widthMm, map.heightMm);
  return (spotRadiusPct / 100) * diagMm * map.pxPerMm;
}

/** Measure every grid point. Throws when a spot has too little valid data (the panel was not wholly in the photo). */
export function measureGrid(map: PanelMap, opts: GridOptions): GridPoint[] {
  const pts = layoutPoints(opts.layout, opts.placement, opts.insetFraction);
  const r = spotRadiusPx(map, opts.spotRadiusPct);
  if (!(r >= 0.5)) {
    throw new RangeError(`measurement spot of ${opts.spotRadiusPct} % of the diagonal is smaller than one map pixel`);
  }
  const means = pts.map((p) => {
    const m = spotMean(map, p.u * map.width, p.v * map.height, r);
    if (!(m.validFraction >= 0.9)) {
      throw new RangeError(
        `grid point at u=${p.u.toFixed(3)}, v=${p.v.toFixed(3)} has only ${(100 * m.validFraction).toFixed(0)} % of its spot inside the photo`,
      );
    }
    return m;
  });
  const ci = centreIndex(pts);
  const Yc = means[ci].Y;
  const [uc, vc] = uvPrime(means[ci].X, means[ci].Y, means[ci].Z);
  return pts.map((p, i) => {
    const m = means[i];
    const [up, vp] = uvPrime(m.X, m.Y, m.Z);
    return {
      index: i + 1,
      u: p.u,
      v: p.v,
      xMm: map.mmKnown ? p.u * map.widthMm : null,
      yMm: map.mmKnown ? p.v * map.heightMm : null,
      Y: m.Y,
      relative: m.Y / Yc,
      uprime: up,
      vprime: vp,
      duvFromCentre: Math.hypot(up - uc, vp - vc),
      pixels: m.pixels,
    };
  });
}

/** Uniformity figures from measured grid points (luminance values are the points' relative values). */
export function uniformityFigures(points: GridPoint[]): UniformityFigures {
  if (points.length === 0) throw new RangeError('no grid points');
  const L = points.map((p) => p.relative);
  const max = Math.max(...L);
  const min = Math.min(...L);
  const mean = L.reduce((a, b) => a + b, 0) / L.length;
  const variance = L.reduce((a, b) => a + (b - mean) * (b - mean), 0) / L.length;
  const centre = points.find((p) => Math.abs(p.u - 0.5) < 1e-9 && Math.abs(p.v - 0.5) < 1e-9) ?? points[0];
  let maxDev = 0;
  for (const p of points) {
    const dev = (100 * (p.relative - centre.relative)) / centre.relative;
    if (Math.abs(dev) > Math.abs(maxDev)) maxDev = dev;
  }
  let maxPair = 0;
  for (let i = 0; i < points.length; i++) {
    for (let j = i + 1; j < points.length; j++) {
      const d = Math.hypot(points[i].uprime - points[j].uprime, points[i].vprime - points[j].vprime);
      if (d > maxPair) maxPair = d;
    }
  }
  return {
    minOverMaxPct: (100 * min) / max,
    nonuniformityPct: (100 * (max - min)) / max,
    maxOverMin: max / min,
    cvPct: (100 * Math.sqrt(variance)) / mean,
    maxDeviationFromCentrePct: maxDev,
    maxDuvFromCentre: Math.max(...points.map((p) => p.duvFromCentre)),
    maxDuvAnyPair: maxPair,
  };
}
