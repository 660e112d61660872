// Photo quality gates: a photo that cannot be measured honestly is refused with a named reason,
// never measured badly. Limits are options with documented defaults.

import { EvenfieldError } from '../errors.js';
import { srgbDecode } from '../photometry/index.js';
import type { Corners, Plane, RgbImage } from '../types.js';

export interface QualityLimits {
  /** linear value at or above which a channel counts as clipped (sRGB code 0.98 ≈ linear 0.955) */
  clipLinear: number;
  /** largest fraction of the panel's pixels that may be clipped */
  maxClippedFraction: number;
  /** smallest median panel code value (sRGB-encoded, 0..1) for the photo to be measurable */
  minPanelCode: number;
  /** largest 10–90 % edge width of the panel outline, in full-size camera pixels, before the photo counts as blurred */
  maxEdgeWidthPx: number;
}

export const DEFAULT_QUALITY_LIMITS: QualityLimits = {
  clipLinear: srgbDecode(0.98),
  maxClippedFraction: 0.001,
  // 8 code values of 255: below that, 8-bit quantisation alone is a ±6 % step (common practice)
  minPanelCode: 8 / 255,
  maxEdgeWidthPx: 25,
};

/** 1 where any channel is at or above the clip level. */
export function nearWhiteMask(img: RgbImage, clipLinear: number): Uint8Array {
  const n = img.width * img.height;
  const out = new Uint8Array(n);
  const d = img.data;
  for (let i = 0, k = 0; i < n; i++, k += 3) {
    if (d[k] >= clipLinear || d[k + 1] >= clipLinear || d[k + 2] >= clipLinear) out[i] = 1;
  }
  return out;
}

/** Is (x, y) inside the convex quadrilateral (corners in order)? */
export function insideQuad(c: Corners, x: number, y: number): boolean {
  let sign = 0;
  for (let i = 0; i < 4; i++) {
    const [x0, y0] = c[i];
    const [x1, y1] = c[(i + 1) % 4];
    const cross = (x1 - x0) * (y - y0) - (y1 - y0) * (x - x0);
    if (cross !== 0) {
      const s = Math.sign(cross);
      if (sign === 0) sign = s;
      else if (s !== sign) return false;
    }
  }
  return true;
}

export interface QualityInput {
  rawLum: Plane;
  clipMask: Uint8Array;
  corners: Corners; // working-scale pixels
  edgeWidthPx: number | null; // full-size pixels
  scale: number;
}

/** Throws EvenfieldError for an unmeasurable photo; returns warnings for marginal ones. */
export function checkPanelQuality(file: string, q: QualityInput, limits: QualityLimits): { warnings: string[]; clippedFraction: number; medianCode: number } {
  const { rawLum, clipMask, corners } = q;
  const w = rawLum.width;
  const h = rawLum.height;
  // shrink the outline 3 % towards its centre so edge pixels do not count
  const cx = corners.reduce((a, p) => a + p[0], 0) / 4;
  const cy = corners.reduce((a, p) => a + p[1], 0) / 4;
  const inner = corners.map(([x, y]) => [cx + 0.97 * (x - cx), cy + 0.97 * (y - cy)]) as Corners;
  const xs = inner.map((p) => p[0]);
  const ys = inner.map((p) => p[1]);
  const x0 = Math.max(0, Math.floor(Math.min(...xs)));
  const x1 = Math.min(w - 1, Math.ceil(Math.max(...xs)));
  const y0 = Math.max(0, Math.floor(Math.min(...ys)));
  const y1 = Math.min(h - 1, Math.ceil(Math.max(...ys)));
  const step = Math.max(1, Math.floor(Math.sqrt(((x1 - x0) * (y1 - y0)) / 250_000)));
  let n = 0;
  let clipped = 0;
  const sample: number[] = [];
  for (let y = y0; y <= y1; y += step) {
    for (let x = x0; x <= x1; x += step) {
      if (!insideQuad(inner, x, y)) continue;
      const k = y * w + x;
      n++;
      if (clipMask[k]) clipped++;
      sample.push(rawLum.data[k]);
    }
  }
  const warnings: string[] = [];
  if (n === 0) throw new EvenfieldError('no-panel', 'the panel outline encloses no pixels', file);
  sample.sort((a, b) => a - b);
  const median = sample[Math.floor(sample.length / 2)];
  const medianCode = median <= 0.0031308 ? 12.92 * median : 1.055 * Math.pow(median, 1 / 2.4) - 0.055;
  const clippedFraction = clipped / n;
  if (clippedFraction > limits.maxClippedFraction) {
    throw new EvenfieldError(
      'clipped',
      `${(100 * clippedFraction).toFixed(2)} % of the panel is clipped (limit ${(100 * limits.maxClippedFraction).toFixed(2)} %): shorten the exposure`,
      file,
    );
  }
  if (medianCode < limits.minPanelCode) {
    throw new EvenfieldError(
      'too-dark',
      `the panel is too dark to measure (median code ${(255 * medianCode).toFixed(1)} of 255, need ${(255 * limits.minPanelCode).toFixed(0)}): lengthen the exposure`,
      file,
    );
  }
  if (q.edgeWidthPx !== null && q.edgeWidthPx > limits.maxEdgeWidthPx) {
    throw new EvenfieldError(
      'blurred',
      `the panel outline is blurred (edge ${q.edgeWidthPx.toFixed(1)} px wide, limit ${limits.maxEdgeWidthPx} px): refocus or steady the camera`,
      file,
    );
  }
  if (clipped > 0) warnings.push(`${(100 * clippedFraction).toFixed(3)} % of the panel pixels are at the clip level`);
  return { warnings, clippedFraction, medianCode };
}
