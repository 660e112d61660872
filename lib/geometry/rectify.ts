// Rectification: resample the panel's active area onto an outWidth x outHeight map with area averaging.
//
// Map pixel (i, j) has its centre at panel coordinates u = (i + 0.5)/outWidth, v = (j + 0.5)/outHeight,
// which the panel-to-camera homography sends to a camera point (x, y). Its footprint in the camera
// image is the parallelogram spanned by the two columns of the map's local Jacobian; we average the
// camera image (taken as constant over each pixel's square) over an axis-aligned box centred on (x, y)
// with sides equal to the footprint's extent along x and along y (root-sum-square of the Jacobian
// entries, which keeps the area for small rotations), using exact fractional coverage of the border
// pixels. Boxes narrower than one pixel are widened to one pixel, which makes the average equal to
// bilinear interpolation when the map is finer than the camera. Nothing is point-sampled, so fine
// structure near the camera's Nyquist limit (panel pixel grid, moiré) averages out instead of aliasing.

import { EvenfieldError } from '../errors.js';
import type { Corners, Plane, RgbImage } from '../types.js';
import { panelToCamera } from './homography.js';

export interface RectifyOptions {
  /**
   * Multiplier on the averaging box relative to the map pixel's footprint. Default 1 (each map pixel
   * averages exactly its own footprint); larger values trade resolution for stronger moiré suppression.
   */
  footprintScale?: number;
}

export interface RectifiedRgb {
  rgb: RgbImage;
  /** 1 where the map pixel's whole averaging box lies inside the photo, 0 otherwise (values there are 0) */
  valid: Uint8Array;
  /** camera pixels per map pixel at the panel centre (square root of the footprint area) */
  cameraPxPerMapPx: number;
}

export interface RectifiedPlane {
  plane: Plane;
  valid: Uint8Array;
  cameraPxPerMapPx: number;
}

function checkSize(outWidth: number, outHeight: number): void {
  if (!Number.isInteger(outWidth) || !Number.isInteger(outHeight) || outWidth < 1 || outHeight < 1) {
    throw new EvenfieldError('internal', `rectify: bad map size ${outWidth}x${outHeight}`);
  }
}

/** Camera pixels per map pixel at panel coordinates (u, v): sqrt |det J|. */
export function footprintAt(H: readonly number[], u: number, v: number, outWidth: number, outHeight: number): number {
  const w = H[6] * u + H[7] * v + H[8];
  const x = (H[0] * u + H[1] * v + H[2]) / w;
  const y = (H[3] * u + H[4] * v + H[5]) / w;
  const ax = (H[0] - x * H[6]) / w / outWidth;
  const ay = (H[3] - y * H[6]) / w / outWidth;
  const bx = (H[1] - x * H[7]) / w / outHeight;
  const by = (H[4] - y * H[7]) / w / outHeight;
  return Math.sqrt(Math.abs(ax * by - ay * bx));
}

/** Shared kernel for interleaved data with nc channels. */
function rectifyInterleaved(
  data: Float32Array,
  W: number,
  Hh: number,
  nc: number,
  corners: Corners,
  outWidth: number,
  outHeight: number,
  opts: RectifyOptions,
): { out: Float32Array; valid: Uint8Array; cameraPxPerMapPx: number } {
  checkSize(outWidth, outHeight);
  const scale = opts.footprintScale ?? 1;
  if (!(scale > 0)) throw new EvenfieldError('internal', 'rectify: footprintScale must be positive');
  // typed, so the per-pixel reads of its entries stay cheap
  const H = Float64Array.from(panelToCamera(corners));
  const out = new Float32Array(outWidth * outHeight * nc);
  const valid = new Uint8Array(outWidth * outHeight);
  let wxs = new Float64Array(64);
  let wys = new Float64Array(64);
  const acc = new Float64Array(nc);
  const xMin = -0.5;
  const yMin = -0.5;
  const xMax = W - 0.5;
  const yMax = Hh - 0.5;
  for (let j = 0; j < outHeight; j++) {
    const v = (j + 0.5) / outHeight;
    for (let i = 0; i < outWidth; i++) {
      const u = (i + 0.5) / outWidth;
      const w = H[6] * u + H[7] * v + H[8];
      const x = (H[0] * u + H[1] * v + H[2]) / w;
      const y = (H[3] * u + H[4] * v + H[5]) / w;
      // Jacobian columns per map pixel
      const ax = (H[0] - x * H[6]) / w / outWidth;
      const ay = (H[3] - y * H[6]) / w / outWidth;
      const bx = (H[1] - x * H[7]) / w / outHeight;
      const by = (H[4] - y * H[7]) / w / outHeight;
      const wx = Math.max(1, scale * Math.sqrt(ax * ax + bx * bx));
      const wy = Math.max(1, scale * Math.sqrt(ay * ay + by * by));
      const x0 = x - wx / 2;
      const x1 = x + wx / 2;
      const y0 = y - wy / 2;
      const y1 = y + wy / 2;
      if (!(x0 >= xMin && x1 <= xMax && y0 >= yMin && y1 <= yMax)) continue;
      // x0 + 0.5 and y0 + 0.5 are ≥ 0 here and far below 2^31, so truncation is the floor
      const k0 = (x0 + 0.5) | 0;
      const k1 = Math.min(W - 1, (x1 + 0.5) | 0);
      const l0 = (y0 + 0.5) | 0;
      const l1 = Math.min(Hh - 1, (y1 + 0.5) | 0);
      const nk = k1 - k0 + 1;
      const nl = l1 - l0 + 1;
      if (nc === 3 && nk <= 3 && nl <= 3) {
        // the usual box of up to 3 × 3 camera pixels, written out: the same weights and sums in the same
        // order as the general loops below (so the same bits), without their weight arrays
        let c0 = Math.min(k0 + 0.5, x1) - Math.max(k0 - 0.5, x0);
        if (!(c0 > 0)) c0 = 0;
        let c1 = 0;
        let c2 = 0;
        if (nk > 1) {
          c1 = Math.min(k0 + 1.5, x1) - Math.max(k0 + 0.5, x0);
          if (!(c1 > 0)) c1 = 0;
        }
        if (nk > 2) {
          c2 = Math.min(k0 + 2.5, x1) - Math.max(k0 + 1.5, x0);
          if (!(c2 > 0)) c2 = 0;
        }
        const sx = c0 + c1 + c2;
        let sy = 0;
        let a0 = 0;
        let a1 = 0;
        let a2 = 0;
        for (let l = l0; l <= l1; l++) {
          let wl = Math.min(l + 0.5, y1) - Math.max(l - 0.5, y0);
          if (!(wl > 0)) wl = 0;
          sy += wl;
          if (wl === 0) continue;
          const b = (l * W + k0) * 3;
          let r0 = c0 * data[b];
          let r1 = c0 * data[b + 1];
          let r2 = c0 * data[b + 2];
          if (nk > 1) {
            r0 += c1 * data[b + 3];
            r1 += c1 * data[b + 4];
            r2 += c1 * data[b + 5];
          }
          if (nk > 2) {
            r0 += c2 * data[b + 6];
            r1 += c2 * data[b + 7];
            r2 += c2 * data[b + 8];
          }
          a0 += wl * r0;
          a1 += wl * r1;
          a2 += wl * r2;
        }
        const norm = 1 / (sx * sy);
        const o = (j * outWidth + i) * 3;
        out[o] = a0 * norm;
        out[o + 1] = a1 * norm;
        out[o + 2] = a2 * norm;
        valid[j * outWidth + i] = 1;
        continue;
      }
      if (nk > wxs.length) wxs = new Float64Array(2 * nk);
      if (nl > wys.length) wys = new Float64Array(2 * nl);
      let sx = 0;
      for (let k = k0; k <= k1; k++) {
        const wk = Math.min(k + 0.5, x1) - Math.max(k - 0.5, x0);
        wxs[k - k0] = wk > 0 ? wk : 0;
        sx += wxs[k - k0];
      }
      let sy = 0;
      for (let l = l0; l <= l1; l++) {
        const wl = Math.min(l + 0.5, y1) - Math.max(l - 0.5, y0);
        wys[l - l0] = wl > 0 ? wl : 0;
        sy += wys[l - l0];
      }
      const norm = 1 / (sx * sy);
      const o = (j * outWidth + i) * nc;
      if (nc === 3) {
        let a0 = 0;
        let a1 = 0;
        let a2 = 0;
        for (let l = l0; l <= l1; l++) {
          const wl = wys[l - l0];
          if (wl === 0) continue;
          let r0 = 0;
          let r1 = 0;
          let r2 = 0;
          let base = (l * W + k0) * 3;
          for (let k = 0; k < nk; k++, base += 3) {
            const wk = wxs[k];
            r0 += wk * data[base];
            r1 += wk * data[base + 1];
            r2 += wk * data[base + 2];
          }
          a0 += wl * r0;
          a1 += wl * r1;
          a2 += wl * r2;
        }
        out[o] = a0 * norm;
        out[o + 1] = a1 * norm;
        out[o + 2] = a2 * norm;
      } else if (nc === 1) {
        let a0 = 0;
        for (let l = l0; l <= l1; l++) {
          const wl = wys[l - l0];
          if (wl === 0) continue;
          let r0 = 0;
          const base = l * W + k0;
          for (let k = 0; k < nk; k++) r0 += wxs[k] * data[base + k];
          a0 += wl * r0;
        }
        out[o] = a0 * norm;
      } else {
        for (let c = 0; c < nc; c++) acc[c] = 0;
        for (let l = l0; l <= l1; l++) {
          const wl = wys[l - l0];
          if (wl === 0) continue;
          const rowBase = l * W;
          for (let k = k0; k <= k1; k++) {
            const wgt = wl * wxs[k - k0];
            const base = (rowBase + k) * nc;
            for (let c = 0; c < nc; c++) acc[c] += wgt * data[base + c];
          }
        }
        for (let c = 0; c < nc; c++) out[o + c] = acc[c] * norm;
      }
      valid[j * outWidth + i] = 1;
    }
  }
  return { out, valid, cameraPxPerMapPx: footprintAt(Array.from(H), 0.5, 0.5, outWidth, outHeight) };
}

/**
 * Map the panel's active area (given by its corners in the image's pixel coordinates) onto an
 * outWidth x outHeight RGB map by area averaging.
 */
export function rectifyRgb(
  img: RgbImage,
  corners: Corners,
  outWidth: number,
  outHeight: number,
  opts: RectifyOptions = {},
): RectifiedRgb {
  if (img.data.length !== img.width * img.height * 3) {
    throw new EvenfieldError('internal', 'rectifyRgb: data length does not match width x height x 3');
  }
  const r = rectifyInterleaved(img.data, img.width, img.height, 3, corners, outWidth, outHeight, opts);
  return { rgb: { width: outWidth, height: outHeight, data: r.out }, valid: r.valid, cameraPxPerMapPx: r.cameraPxPerMapPx };
}

/** Single-channel variant of rectifyRgb. */
export function rectifyPlane(
  plane: Plane,
  corners: Corners,
  outWidth: number,
  outHeight: number,
  opts: RectifyOptions = {},
): RectifiedPlane {
  if (plane.data.length !== plane.width * plane.height) {
    throw new EvenfieldError('internal', 'rectifyPlane: data length does not match width x height');
  }
  const r = rectifyInterleaved(plane.data, plane.width, plane.height, 1, corners, outWidth, outHeight, opts);
  return {
    plane: { width: outWidth, height: outHeight, data: r.out },
    valid: r.valid,
    cameraPxPerMapPx: r.cameraPxPerMapPx,
  };
}
