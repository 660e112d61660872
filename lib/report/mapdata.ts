// Numbers derived from the panel maps for drawing: the colour scale's range, centre profiles and
// the colour bar raster.

import type { Plane } from '../types.js';
import { type ColourMap, type RgbRaster } from './colourmaps.js';
import { niceTicks } from './plots.js';

/** Quantile of the finite values of a plane (a strided sample of at most ~40 000 values). */
export function planeQuantiles(plane: Plane, qs: number[]): number[] {
  const n = plane.data.length;
  const stride = Math.max(1, Math.floor(n / 40000));
  const buf = new Float64Array(Math.ceil(n / stride));
  let m = 0;
  for (let i = 0; i < n; i += stride) {
    const v = plane.data[i]!;
    if (Number.isFinite(v)) buf[m++] = v;
  }
  if (m === 0) return qs.map(() => NaN);
  const vals = buf.subarray(0, m).sort();
  return qs.map((q) => vals[Math.min(m - 1, Math.max(0, Math.round(q * (m - 1))))]!);
}

/**
 * Range of a luminance colour scale: the 0.5th to 99.5th percentile of the map, widened to take
 * in every extra value given (grid points) and rounded out to tick steps.
 */
export function luminanceRange(plane: Plane, extra: number[] = []): { range: [number, number]; clipped: boolean } {
  const [p0, p1, min, max] = planeQuantiles(plane, [0.005, 0.995, 0, 1]);
  const finiteExtra = extra.filter(Number.isFinite);
  let lo = Math.min(p0!, ...finiteExtra);
  let hi = Math.max(p1!, ...finiteExtra);
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) {
    lo = 0;
    hi = 1;
  }
  const t = niceTicks(lo, hi, 5);
  return { range: [t.lo, t.hi], clipped: (min as number) < t.lo || (max as number) > t.hi };
}

/** Symmetric range for a signed contrast map in %, at least ±1 %. */
export function contrastRange(plane: Plane): { range: [number, number]; clipped: boolean } {
  const [p0, p1, min, max] = planeQuantiles(plane, [0.002, 0.998, 0, 1]);
  let m = Math.max(Math.abs(p0!), Math.abs(p1!), 1);
  if (!Number.isFinite(m)) m = 1;
  const t = niceTicks(-m, m, 6);
  const r = Math.max(Math.abs(t.lo), Math.abs(t.hi));
  return { range: [-r, r], clipped: (min as number) < -r || (max as number) > r };
}

export interface Profile {
  /** positions along the axis, in the same units as `length` (0..length) */
  pos: Float64Array;
  value: Float64Array;
  /** band averaged across the line, as fraction of the other dimension */
  band: [number, number];
}

/**
 * Mean of the finite values in a band across the centre line: horizontal = the rows within
 * ±halfBand of v = 0.5, averaged per column; vertical likewise per row.
 */
export function centreProfile(plane: Plane, axis: 'horizontal' | 'vertical', length: number, halfBand = 0.015): Profile {
  const { width: W, height: H, data } = plane;
  const across = axis === 'horizontal' ? H : W;
  const along = axis === 'horizontal' ? W : H;
  const c = (across - 1) / 2;
  const half = Math.max(0.5, halfBand * across);
  const first = Math.max(0, Math.ceil(c - half));
  const last = Math.min(across - 1, Math.floor(c + half));
  const pos = new Float64Array(along);
  const value = new Float64Array(along);
  for (let i = 0; i < along; i++) {
    let s = 0;
    let n = 0;
    for (let j = first; j <= last; j++) {
      const v = axis === 'horizontal' ? data[j * W + i]! : data[i * W + j]!;
      if (Number.isFinite(v)) {
        s += v;
        n++;
      }
    }
    pos[i] = ((i + 0.5) / along) * length;
    value[i] = n > 0 ? s / n : NaN;
  }
  return { pos, value, band: [first / across, (last + 1) / across] };
}

/** Colour bar raster, high values at the top. */
export function colourBarRaster(map: ColourMap, width = 4): RgbRaster {
  const height = 256;
  const rgb = new Uint8Array(width * height * 3);
  for (let y = 0; y < height; y++) {
    const i = (255 - y) * 3;
    for (let x = 0; x < width; x++) {
      const o = (y * width + x) * 3;
      rgb[o] = map.lut[i]!;
      rgb[o + 1] = map.lut[i + 1]!;
      rgb[o + 2] = map.lut[i + 2]!;
    }
  }
  return { width, height, rgb };
}

/** A copy of the plane with every value multiplied by k. */
export function scalePlane(plane: Plane, k: number): Plane {
  const data = new Float32Array(plane.data.length);
  for (let i = 0; i < data.length; i++) data[i] = plane.data[i]! * k;
  return { width: plane.width, height: plane.height, data };
}
