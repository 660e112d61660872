// A lens transmission kept on a coarse grid of nodes and interpolated bilinearly where it is applied.
//
// The transmission of a lens is smooth: between nodes h work pixels apart bilinear interpolation is off by
// at most h²/8 times the sum of its second derivatives along the two axes (the usual bound for linear
// interpolation). A wide lens (cos⁴ law at 24 mm equivalent, a third of the centre's light in the corners)
// on a 2000-pixel-wide work image has |T''| ≤ 2.25e-6 per pixel² along either axis, so nodes 8 pixels
// apart stay within 3.6e-5 of the plane evaluated at every pixel (3.3e-5 measured), far below the
// smallest contrast the mura analysis resolves (about 0.1 %).
// The full planes (three of them for per-channel profiles: 36 MB for a 12-megapixel photo at its working
// scale) are what a worker would otherwise keep between the photos of a lot.

import { EvenfieldError } from '../errors.js';
import type { Plane, RgbImage } from '../types.js';
import type { ApplyOptions, Transmission } from './profile.js';
import { divideWithLuminance, isChannelTransmission } from './profile.js';

/** Default distance between nodes, in work pixels. */
export const COARSE_TRANSMISSION_STEP = 8;

export interface CoarseTransmission {
  /** the image size (work pixels) the transmission is for */
  width: number;
  height: number;
  /** node spacing in work pixels; node (i, j) sits at work pixel ((i + 0.5) step − 0.5, (j + 0.5) step − 0.5) */
  step: number;
  cols: number;
  rows: number;
  /** one plane (same transmission for R, G, B) or three, cols × rows each, row by row */
  planes: Float32Array[];
}

/**
 * Builds the coarse grid from an evaluator of the transmission on a decoded grid: `evaluate(cols, rows,
 * factor)` must return the transmission of a cols × rows image decoded at `factor` times the work image's
 * decode scale (cos4Transmission and channelTransmissionFromProfile take exactly that). The grid reaches one
 * node beyond the image on the right and bottom so that every pixel lies between nodes.
 */
export function coarseTransmission(
  width: number,
  height: number,
  evaluate: (cols: number, rows: number, factor: number) => Transmission,
  step = COARSE_TRANSMISSION_STEP,
): CoarseTransmission {
  if (!Number.isInteger(step) || step < 1) throw new EvenfieldError('falloff', `transmission node step must be a positive integer, got ${step}`);
  const cols = Math.ceil(width / step) + 1;
  const rows = Math.ceil(height / step) + 1;
  const t = evaluate(cols, rows, step);
  const planes = isChannelTransmission(t) ? [t.r, t.g, t.b] : [t];
  for (const p of planes) {
    if (p.width !== cols || p.height !== rows) throw new EvenfieldError('falloff', `transmission evaluator gave ${p.width}×${p.height}, expected ${cols}×${rows}`);
  }
  return { width, height, step, cols, rows, planes: planes.map((p) => p.data) };
}

/** Node index and weight of the next node along one axis, for work pixel x (linear extrapolation before node 0). */
function axisWeights(n: number, step: number, nodes: number): { i0: Int32Array; f: Float32Array } {
  const i0 = new Int32Array(n);
  const f = new Float32Array(n);
  for (let x = 0; x < n; x++) {
    const g = (x + 0.5) / step - 0.5;
    const i = Math.max(0, Math.min(nodes - 2, Math.floor(g)));
    i0[x] = i;
    f[x] = g - i;
  }
  return { i0, f };
}

/** Interpolated transmission of one plane along work row y into `out` (length width). */
function rowInto(T: CoarseTransmission, plane: Float32Array, y: number, ax: { i0: Int32Array; f: Float32Array }, coarseRow: Float64Array, out: Float32Array): void {
  const g = (y + 0.5) / T.step - 0.5;
  const j = Math.max(0, Math.min(T.rows - 2, Math.floor(g)));
  const fy = g - j;
  const a = j * T.cols;
  const b = a + T.cols;
  for (let i = 0; i < T.cols; i++) coarseRow[i] = plane[a + i] + fy * (plane[b + i] - plane[a + i]);
  for (let x = 0; x < T.width; x++) {
    const i = ax.i0[x];
    const c0 = coarseRow[i];
    out[x] = c0 + ax.f[x] * (coarseRow[i + 1] - c0);
  }
}

/** The transmission at work pixel (x, y) (fractional allowed), luminance-weighted for per-channel grids. */
export function coarseTransmissionAt(T: CoarseTransmission, x: number, y: number): number {
  const at = (p: Float32Array): number => {
    const gx = (x + 0.5) / T.step - 0.5;
    const gy = (y + 0.5) / T.step - 0.5;
    const i = Math.max(0, Math.min(T.cols - 2, Math.floor(gx)));
    const j = Math.max(0, Math.min(T.rows - 2, Math.floor(gy)));
    const fx = gx - i;
    const fy = gy - j;
    const k = j * T.cols + i;
    const top = p[k] + fx * (p[k + 1] - p[k]);
    const bottom = p[k + T.cols] + fx * (p[k + T.cols + 1] - p[k + T.cols]);
    return top + fy * (bottom - top);
  };
  if (T.planes.length === 1) return at(T.planes[0]);
  return 0.2126 * at(T.planes[0]) + 0.7152 * at(T.planes[1]) + 0.0722 * at(T.planes[2]);
}

/** Smallest transmission at the four corner pixels (the green plane of a per-channel grid), as cornerTransmission. */
export function coarseCornerTransmission(T: CoarseTransmission): number {
  const p = T.planes.length === 3 ? T.planes[1] : T.planes[0];
  const one: CoarseTransmission = { ...T, planes: [p] };
  const w = T.width - 1;
  const h = T.height - 1;
  return Math.min(coarseTransmissionAt(one, 0, 0), coarseTransmissionAt(one, w, 0), coarseTransmissionAt(one, 0, h), coarseTransmissionAt(one, w, h));
}

/**
 * Divides a linear image by a coarse transmission, in place, and returns the luminance of the corrected
 * image made in the same pass (as applyTransmissionWithLuminance does with full planes). Transmissions below
 * the floor (default 0.02) count as the floor, so noise is not blown up.
 */
export function applyCoarseTransmissionWithLuminance(img: RgbImage, T: CoarseTransmission, opts: ApplyOptions = {}): { clamped: number; luminance: Plane } {
  const floor = opts.floor ?? 0.02;
  if (T.width !== img.width || T.height !== img.height) {
    throw new EvenfieldError('falloff', `transmission is ${T.width}×${T.height} but the image is ${img.width}×${img.height}`);
  }
  const w = img.width;
  const ax = axisWeights(w, T.step, T.cols);
  const coarseRow = new Float64Array(T.cols);
  // rows of transmission as float32, as the full planes hold it
  const rowT = [new Float32Array(w), new Float32Array(w), new Float32Array(w)];
  const chan = T.planes.length === 3 ? [0, 1, 2] : [0, 0, 0];
  const lum = new Float32Array(w * img.height);
  let clamped = 0;
  for (let y = 0; y < img.height; y++) {
    for (let c = 0; c < T.planes.length; c++) rowInto(T, T.planes[c], y, ax, coarseRow, rowT[c]);
    clamped += divideWithLuminance(img.data, lum, y * w, y * w + w, rowT[chan[0]], rowT[chan[1]], rowT[chan[2]], floor);
  }
  return { clamped, luminance: { width: w, height: img.height, data: lum } };
}
