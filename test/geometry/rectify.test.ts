import { describe, expect, it } from 'vitest';
import { rectifyPlane, rectifyRgb } from '../../lib/geometry/index.js';
import type { Corners, Plane, RgbImage } from '../../lib/types.js';

/**
 * Independent reference for where a map pixel lands: Heckbert 1989, "Fundamentals of texture mapping
 * and image warping", §2.2.3, closed-form square-to-quadrilateral mapping (formulas from that text).
 */
function heckbert(q: Corners): (u: number, v: number) => [number, number] {
  const [[x0, y0], [x1, y1], [x2, y2], [x3, y3]] = q;
  const sx = x0 - x1 + x2 - x3;
  const sy = y0 - y1 + y2 - y3;
  let a: number, b: number, c: number, d: number, e: number, f: number, g: number, h: number;
  if (sx === 0 && sy === 0) {
    [a, b, c, d, e, f, g, h] = [x1 - x0, x2 - x1, x0, y1 - y0, y2 - y1, y0, 0, 0];
  } else {
    const dx1 = x1 - x2;
    const dx2 = x3 - x2;
    const dy1 = y1 - y2;
    const dy2 = y3 - y2;
    const den = dx1 * dy2 - dx2 * dy1;
    g = (sx * dy2 - dx2 * sy) / den;
    h = (dx1 * sy - sx * dy1) / den;
    [a, b, c, d, e, f] = [x1 - x0 + g * x1, x3 - x0 + h * x3, x0, y1 - y0 + g * y1, y3 - y0 + h * y3, y0];
  }
  return (u, v) => {
    const w = g * u + h * v + 1;
    return [(a * u + b * v + c) / w, (d * u + e * v + f) / w];
  };
}

function makePlane(W: number, H: number, fn: (x: number, y: number) => number): Plane {
  const data = new Float32Array(W * H);
  for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) data[y * W + x] = fn(x, y);
  return { width: W, height: H, data };
}

const perspectiveQuad: Corners = [
  [52.4, 40.2],
  [561.8, 61.7],
  [540.3, 398.6],
  [70.9, 431.1],
];

describe('rectifyRgb / rectifyPlane', () => {
  it('keeps a uniform field uniform (to float precision) and marks everything valid inside the photo', () => {
    const W = 640;
    const H = 480;
    const rgb: RgbImage = { width: W, height: H, data: new Float32Array(W * H * 3) };
    for (let i = 0; i < W * H; i++) {
      rgb.data[3 * i] = 0.8;
      rgb.data[3 * i + 1] = 0.5;
      rgb.data[3 * i + 2] = 0.25;
    }
    const r = rectifyRgb(rgb, perspectiveQuad, 160, 120);
    expect(r.rgb.width).toBe(160);
    expect(r.rgb.height).toBe(120);
    let worst = 0;
    let validCount = 0;
    for (let i = 0; i < 160 * 120; i++) {
      validCount += r.valid[i];
      worst = Math.max(
        worst,
        Math.abs(r.rgb.data[3 * i] - 0.8),
        Math.abs(r.rgb.data[3 * i + 1] - 0.5),
        Math.abs(r.rgb.data[3 * i + 2] - 0.25),
      );
    }
    expect(validCount).toBe(160 * 120);
    expect(worst).toBeLessThan(1e-6);
  });

  it('maps a linear ramp to its values at the map-pixel centres (perspective quad)', () => {
    const W = 640;
    const H = 480;
    const alpha = 0.1;
    const beta = 0.0011;
    const gamma = -0.0007;
    const ramp = makePlane(W, H, (x, y) => alpha + beta * x + gamma * y);
    const outW = 170;
    const outH = 110;
    const r = rectifyPlane(ramp, perspectiveQuad, outW, outH);
    const map = heckbert(perspectiveQuad);
    // The camera image is a staircase (constant over each pixel). A box average of a linear function
    // equals its value at the box centre; the staircase's zero-mean sawtooth (amplitude slope/2)
    // integrates to at most slope/8 per unit box width, so the error is at most |slope|/(8 * box width)
    // per axis (computed). The box is at least 1 px wide, giving this bound:
    const bound = (Math.abs(beta) + Math.abs(gamma)) / 8 + 1e-6;
    let worst = 0;
    let invalid = 0;
    for (let j = 0; j < outH; j++) {
      for (let i = 0; i < outW; i++) {
        const [x, y] = map((i + 0.5) / outW, (j + 0.5) / outH);
        const expected = alpha + beta * x + gamma * y;
        worst = Math.max(worst, Math.abs(r.plane.data[j * outW + i] - expected));
        invalid += r.valid[j * outW + i] ? 0 : 1;
      }
    }
    expect(invalid).toBe(0);
    expect(worst).toBeLessThan(bound);
  });

  it('an affine view of a linear ramp comes out exactly linear in map coordinates', () => {
    // rotated rectangle: corners of a parallelogram, so the map is affine and the output is a plane
    const q: Corners = [
      [100, 60],
      [500, 90],
      [480, 370],
      [80, 340],
    ];
    const ramp = makePlane(600, 420, (x, y) => 0.2 + 0.001 * x + 0.0005 * y);
    const outW = 100;
    const outH = 70;
    const r = rectifyPlane(ramp, q, outW, outH);
    // second differences of a linear function vanish: check along rows and columns
    let worst = 0;
    for (let j = 0; j < outH; j++) {
      for (let i = 1; i < outW - 1; i++) {
        const d2 = r.plane.data[j * outW + i - 1] - 2 * r.plane.data[j * outW + i] + r.plane.data[j * outW + i + 1];
        worst = Math.max(worst, Math.abs(d2));
      }
    }
    for (let j = 1; j < outH - 1; j++) {
      for (let i = 0; i < outW; i++) {
        const d2 = r.plane.data[(j - 1) * outW + i] - 2 * r.plane.data[j * outW + i] + r.plane.data[(j + 1) * outW + i];
        worst = Math.max(worst, Math.abs(d2));
      }
    }
    // bound: each of the three values may carry the sawtooth error of the previous test (≤ 0.0015/8),
    // so a second difference is at most 4 times that (computed)
    expect(worst).toBeLessThan((4 * 0.0015) / 8);
  });

  it('averages a pixel-scale checkerboard to its mean instead of aliasing into stripes', () => {
    const W = 640;
    const H = 480;
    // The finest pattern a sensor can hold: alternate pixels (camera Nyquist), values 0 and 1.
    const checker = makePlane(W, H, (x, y) => ((x + y) % 2 === 0 ? 1 : 0));
    const outW = 140;
    const outH = 100;
    const r = rectifyPlane(checker, perspectiveQuad, outW, outH);
    let min = Infinity;
    let max = -Infinity;
    let sum = 0;
    for (const v of r.plane.data) {
      min = Math.min(min, v);
      max = Math.max(max, v);
      sum += v;
    }
    const mean = sum / r.plane.data.length;
    expect(mean).toBeCloseTo(0.5, 2);
    // A box average of the checkerboard deviates from 0.5 by 0.5 * |Σ(-1)^k wx_k| * |Σ(-1)^l wy_l| /
    // (box area); each alternating sum of the coverage weights is at most 1 (computed), and here each map
    // pixel covers about 3.4 x 3.4 camera pixels or more, so the deviation is under 0.5 / 3.3^2 ≈ 0.046.
    expect(max - 0.5).toBeLessThan(0.046);
    expect(0.5 - min).toBeLessThan(0.046);

    // The same map made by point sampling (bilinear interpolation at each map-pixel centre), the thing
    // area averaging replaces, swings over most of 0..1: this is the aliasing the test guards against.
    const map = heckbert(perspectiveQuad);
    let pmin = Infinity;
    let pmax = -Infinity;
    for (let j = 0; j < outH; j++) {
      for (let i = 0; i < outW; i++) {
        const [x, y] = map((i + 0.5) / outW, (j + 0.5) / outH);
        const x0 = Math.floor(x);
        const y0 = Math.floor(y);
        const fx = x - x0;
        const fy = y - y0;
        const at = (xx: number, yy: number) => checker.data[yy * W + xx];
        const v =
          (at(x0, y0) * (1 - fx) + at(x0 + 1, y0) * fx) * (1 - fy) + (at(x0, y0 + 1) * (1 - fx) + at(x0 + 1, y0 + 1) * fx) * fy;
        pmin = Math.min(pmin, v);
        pmax = Math.max(pmax, v);
      }
    }
    expect(pmax - pmin).toBeGreaterThan(0.5);
  });

  it('averages fine stripes near Nyquist (period 2.2 px) to their mean', () => {
    const W = 640;
    const H = 480;
    const period = 2.2;
    // pixel values are the exact area average of a 0/1 square wave over each pixel
    const column = new Float64Array(W);
    for (let x = 0; x < W; x++) {
      let s = 0;
      const n = 64;
      for (let k = 0; k < n; k++) {
        const xx = x - 0.5 + (k + 0.5) / n;
        s += ((xx / period) % 1 + 1) % 1 < 0.5 ? 1 : 0;
      }
      column[x] = s / n;
    }
    const stripes = makePlane(W, H, (x) => column[x]);
    const outW = 60; // about 8 camera pixels per map pixel across
    const outH = 45;
    const r = rectifyPlane(stripes, perspectiveQuad, outW, outH);
    let sum = 0;
    let ss = 0;
    for (const v of r.plane.data) {
      sum += v;
      ss += v * v;
    }
    const n = r.plane.data.length;
    const mean = sum / n;
    const sd = Math.sqrt(ss / n - mean * mean);
    expect(mean).toBeCloseTo(0.5, 2);
    // A box of width w over a square wave of period p leaves at most p/(4w) of the swing (at most a
    // quarter period uncancelled, computed): 2.2 / (4 * 7.5) ≈ 0.073 of the 0..1 swing at worst, and the
    // typical (sd) deviation is well under that.
    expect(sd).toBeLessThan(0.04);
  });

  it('marks map pixels that fall outside the photo as invalid, and reports the footprint', () => {
    const W = 300;
    const H = 200;
    const plane = makePlane(W, H, () => 1);
    // the right part of this quad runs off the image
    const q: Corners = [
      [50, 20],
      [400, 20],
      [400, 180],
      [50, 180],
    ];
    const r = rectifyPlane(plane, q, 70, 32);
    // map column i covers camera x from 50 + 5 i to 50 + 5 (i + 1): columns whose 5-px box ends beyond
    // x = 299.5 (the right edge of the last pixel) are invalid
    for (let i = 0; i < 70; i++) {
      const x1 = 50 + 5 * (i + 1);
      expect(r.valid[10 * 70 + i]).toBe(x1 <= 299.5 ? 1 : 0);
      if (!r.valid[10 * 70 + i]) expect(r.plane.data[10 * 70 + i]).toBe(0);
    }
    expect(r.cameraPxPerMapPx).toBeCloseTo(5, 9);
  });

  it('upsampling (map finer than the camera) interpolates linearly between pixel centres', () => {
    const plane = makePlane(4, 1, (x) => [0, 1, 4, 9][x]);
    // map 8 x 1 over the span of pixel centres 0..3 (x from 0 to 3 at map edges -> centres at 3/16 + 3k/8)
    const q: Corners = [
      [0, -0.25],
      [3, -0.25],
      [3, 0.25],
      [0, 0.25],
    ];
    const r = rectifyPlane(plane, q, 8, 1);
    for (let i = 0; i < 8; i++) {
      const x = (3 * (i + 0.5)) / 8;
      const k = Math.floor(x);
      const f = x - k;
      const expected = [0, 1, 4, 9][k] * (1 - f) + [0, 1, 4, 9][Math.min(3, k + 1)] * f;
      if (x - 0.5 >= -0.5 && x + 0.5 <= 3.5) expect(r.plane.data[i]).toBeCloseTo(expected, 6);
    }
  });
});
