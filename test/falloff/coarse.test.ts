import { describe, expect, it } from 'vitest';
import {
  applyCoarseTransmissionWithLuminance,
  applyTransmissionWithLuminance,
  channelTransmissionFromProfile,
  coarseCornerTransmission,
  coarseTransmission,
  coarseTransmissionAt,
  cornerTransmission,
  cos4Transmission,
} from '../../lib/falloff/index.js';
import type { FalloffProfile } from '../../lib/falloff/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import { makeProfile } from './profiles.js';
import type { Plane, RgbImage } from '../../lib/types.js';

// The coarse grid is checked against the transmission evaluated at every pixel. The tolerance comes from
// the error of linear interpolation, |f − p| ≤ h²/8 · max|f''| between nodes h apart, and
// |x (x − 1)| / 2 · h² · max|f''| when extrapolating by x steps (standard numerical analysis, common
// practice); bilinear interpolation adds the two axes' terms. For cos⁴ at 24 mm equivalent on a
// 2000-pixel-wide work image (focal length 1333 work pixels) |T''| ≤ 4 / 1333² = 2.25e-6 per pixel² along
// either axis (at the centre), so with h = 8 the grid stays within 2 · 8 · 2.25e-6 = 3.6e-5. The outer
// pixels are extrapolated by 0.44 of a step (factor 0.31 h² instead of h² / 8) where the curvature is under
// a third of the centre's, so the bound holds there too.

const W = 2000;
const H = 1500;
const SCALE = 2;
const FULL = { width: W * SCALE, height: H * SCALE };

function maxAbsDiff(T: Plane, at: (x: number, y: number) => number): number {
  let worst = 0;
  for (let y = 0; y < T.height; y++) {
    for (let x = 0; x < T.width; x++) worst = Math.max(worst, Math.abs(at(x, y) - T.data[y * T.width + x]));
  }
  return worst;
}

// strong falloff (corners near half the centre's light), a tilted surface and per-channel terms
function profile(): FalloffProfile {
  return makeProfile({
    centre: [0.1, -0.2],
    radial: [-0.7, 0.15],
    surfaceOrder: 3,
    surface: [
      [2, 0, 0.05],
      [0, 3, 0.02],
    ],
    channels: { r: [[2, 0, 0.01]], g: [], b: [[1, 1, -0.01]] },
  });
}

describe('coarse transmission grid', () => {
  it('stays within the interpolation bound of the cos⁴ plane evaluated at every pixel (24 mm equivalent)', () => {
    const model = { focal35mm: 24, fullWidth: FULL.width, fullHeight: FULL.height };
    const full = cos4Transmission(W, H, model, SCALE);
    const coarse = coarseTransmission(W, H, (c, r, f) => cos4Transmission(c, r, model, SCALE * f));
    expect(coarse.cols * coarse.rows).toBeLessThan((W * H) / 50);
    const worst = maxAbsDiff(full, (x, y) => coarseTransmissionAt(coarse, x, y));
    expect(worst).toBeLessThan(3.6e-5);
    expect(worst).toBeGreaterThan(0); // it is an approximation, not the same plane
    expect(coarseCornerTransmission(coarse)).toBeCloseTo(cornerTransmission(full), 4);
    // the corners of a 24 mm lens keep about a third of the centre's light (cos⁴ of 42°: common practice)
    expect(cornerTransmission(full)).toBeGreaterThan(0.3);
    expect(cornerTransmission(full)).toBeLessThan(0.36);
  });

  it('corrects an image as the full per-channel planes do, luminance included', () => {
    const p = profile();
    const full = channelTransmissionFromProfile(p, W, H, SCALE, FULL);
    const coarse = coarseTransmission(W, H, (c, r, f) => channelTransmissionFromProfile(p, c, r, SCALE * f, FULL));
    expect(coarse.planes).toHaveLength(3);
    const n = W * H;
    const a: RgbImage = { width: W, height: H, data: new Float32Array(3 * n) };
    let seed = 7;
    for (let i = 0; i < 3 * n; i++) {
      seed = (seed * 1103515245 + 12345) >>> 0;
      a.data[i] = 0.05 + 0.9 * (seed / 2 ** 32);
    }
    const b: RgbImage = { width: W, height: H, data: a.data.slice() };
    const ra = applyTransmissionWithLuminance(a, full);
    const rb = applyCoarseTransmissionWithLuminance(b, coarse);
    expect(rb.clamped).toBe(ra.clamped);
    let worst = 0;
    for (let i = 0; i < 3 * n; i++) worst = Math.max(worst, Math.abs(b.data[i] / a.data[i] - 1));
    let worstLum = 0;
    for (let i = 0; i < n; i++) worstLum = Math.max(worstLum, Math.abs(rb.luminance.data[i] / ra.luminance.data[i] - 1));
    // relative error: the profile's curvature is below the cos⁴ case's above, and its transmission stays
    // above 0.36, so 3.6e-5 / 0.36 = 1e-4 bounds it
    expect(worst).toBeLessThan(1e-4);
    expect(worstLum).toBeLessThan(1e-4);
  });

  it('refuses an image of another size', () => {
    const model = { focal35mm: 28, fullWidth: FULL.width, fullHeight: FULL.height };
    const coarse = coarseTransmission(W, H, (c, r, f) => cos4Transmission(c, r, model, SCALE * f));
    const img: RgbImage = { width: W / 2, height: H / 2, data: new Float32Array((3 * W * H) / 4) };
    expect(() => applyCoarseTransmissionWithLuminance(img, coarse)).toThrow(EvenfieldError);
  });
});
