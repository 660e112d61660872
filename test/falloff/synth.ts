// Synthetic flat frames and shifted panel photos for the falloff tests. Independent of lib/falloff:
// the falloff here is written directly from the cos^4 law and a radial polynomial.
import type { Plane, RgbImage } from '../../lib/types.js';

/** Small seeded generator (mulberry32) with Gaussian draws (Box-Muller). */
export class TestRng {
  private s: number;
  constructor(seed: number) {
    this.s = seed >>> 0;
  }
  next(): number {
    let t = (this.s = (this.s + 0x6d2b79f5) >>> 0);
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  }
  gauss(): number {
    const u = Math.max(this.next(), 1e-12);
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * this.next());
  }
}

export interface LensSpec {
  /** 35 mm equivalent focal length */
  focal35: number;
  /** extra radial term 1 + k1 r^2 + k2 r^4, r = distance / half diagonal */
  k1?: number;
  k2?: number;
  /** optical centre offset in pixels (full size) */
  offsetPx?: [number, number];
  /** per-channel extra shading: channel gain 1 + c * (r^2) for R and B (colour shading) */
  colourRadial?: [number, number];
  /** lens-side linear shading 1 + tilt * (2x/W - 1) (e.g. a sensor tilted in its mount) */
  lensTilt?: number;
}

/** True transmission at full-size pixel (x, y) of a W x H image, 1 at the optical centre. */
export function trueT(lens: LensSpec, W: number, H: number, x: number, y: number): number {
  const f = (lens.focal35 / Math.hypot(36, 24)) * Math.hypot(W, H);
  const cx = (W - 1) / 2 + (lens.offsetPx?.[0] ?? 0);
  const cy = (H - 1) / 2 + (lens.offsetPx?.[1] ?? 0);
  const rho2 = (x - cx) ** 2 + (y - cy) ** 2;
  const c2 = 1 / (1 + rho2 / (f * f));
  const r2 = rho2 / ((W * W + H * H) / 4);
  const tilt = 1 + (lens.lensTilt ?? 0) * ((2 * (x + 0.5)) / W - 1);
  return c2 * c2 * (1 + (lens.k1 ?? 0) * r2 + (lens.k2 ?? 0) * r2 * r2) * tilt;
}

export interface FlatSpec {
  width: number;
  height: number;
  lens: LensSpec;
  /** source gradient: S = 1 + gx (x/W - 0.5) + gy (y/H - 0.5) */
  gradient?: [number, number];
  level?: number;
  /** relative Gaussian noise per pixel value */
  noise?: number;
  seed: number;
}

export function synthFlat(spec: FlatSpec): RgbImage {
  const { width: W, height: H, lens } = spec;
  const rng = new TestRng(spec.seed);
  const data = new Float32Array(W * H * 3);
  const [gx, gy] = spec.gradient ?? [0, 0];
  const level = spec.level ?? 0.6;
  const cr = lens.colourRadial ?? [0, 0];
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const T = trueT(lens, W, H, x, y);
      const S = 1 + gx * ((x + 0.5) / W - 0.5) + gy * ((y + 0.5) / H - 0.5);
      const r2 = ((x - (W - 1) / 2) ** 2 + (y - (H - 1) / 2) ** 2) / ((W * W + H * H) / 4);
      const gains = [1 + cr[0] * r2, 1, 1 + cr[1] * r2];
      for (let c = 0; c < 3; c++) {
        const v = level * T * S * gains[c];
        data[(y * W + x) * 3 + c] = v * (1 + (spec.noise ?? 0) * rng.gauss());
      }
    }
  }
  return { width: W, height: H, data };
}

/** Box-average an RGB image by an integer factor (area-averaging decode at reduced scale). */
export function boxDownsample(img: RgbImage, s: number): RgbImage {
  const w = Math.ceil(img.width / s);
  const h = Math.ceil(img.height / s);
  const out = new Float32Array(w * h * 3);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const acc = [0, 0, 0];
      let n = 0;
      for (let yy = y * s; yy < Math.min(img.height, (y + 1) * s); yy++) {
        for (let xx = x * s; xx < Math.min(img.width, (x + 1) * s); xx++) {
          for (let c = 0; c < 3; c++) acc[c] += img.data[(yy * img.width + xx) * 3 + c];
          n++;
        }
      }
      for (let c = 0; c < 3; c++) out[(y * w + x) * 3 + c] = acc[c] / n;
    }
  }
  return { width: w, height: h, data: out };
}

/** Largest |a / b - 1| after normalising the ratio to 1 at the image-centre pixel. */
export function maxRelativeError(est: Plane, truth: (x: number, y: number) => number): number {
  const { width: w, height: h } = est;
  const cx = Math.floor(w / 2);
  const cy = Math.floor(h / 2);
  const ref = est.data[cy * w + cx] / truth(cx, cy);
  let worst = 0;
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const e = Math.abs(est.data[y * w + x] / truth(x, y) / ref - 1);
      if (e > worst) worst = e;
    }
  }
  return worst;
}

/** A smooth, non-uniform panel pattern: a backlight that is 12 % darker at the corners (which looks
 *  like lens falloff), a tilt, a broad cloud and a darker corner (relative luminance). */
export function panelPattern(u: number, v: number): number {
  return (
    (1 - 0.06 * ((2 * u - 1) ** 2 + (2 * v - 1) ** 2)) *
    (1 + 0.06 * (u - 0.5) - 0.04 * (v - 0.5)) *
    (1 + 0.05 * Math.exp(-((u - 0.35) ** 2 + (v - 0.6) ** 2) / 0.02)) *
    (1 - 0.08 * Math.exp(-((u - 1) ** 2 + (v - 1) ** 2) / 0.05))
  );
}

export type Mat3 = number[];

/** Homography of the unit square onto the quadrilateral q (TL, TR, BR, BL): the closed form for a
 *  square-to-quad map [Heckbert 1989, "Fundamentals of texture mapping"; section number from memory]. */
export function squareToQuad(q: [number, number][]): Mat3 {
  const [[x0, y0], [x1, y1], [x2, y2], [x3, y3]] = q;
  const sx = x0 - x1 + x2 - x3;
  const sy = y0 - y1 + y2 - y3;
  const dx1 = x1 - x2;
  const dx2 = x3 - x2;
  const dy1 = y1 - y2;
  const dy2 = y3 - y2;
  const den = dx1 * dy2 - dx2 * dy1;
  const g = (sx * dy2 - dx2 * sy) / den;
  const h = (dx1 * sy - sx * dy1) / den;
  return [x1 - x0 + g * x1, x3 - x0 + h * x3, x0, y1 - y0 + g * y1, y3 - y0 + h * y3, y0, g, h, 1];
}

export interface ShiftedShot {
  /** panel corners in image pixels (TL, TR, BR, BL) */
  corners: [number, number][];
  exposure: number;
}

/** Photo of the panel (luminance plane): pattern x falloff x exposure + noise, dark surround. */
export function synthShifted(W: number, H: number, lens: LensSpec, shot: ShiftedShot, noise: number, seed: number): Plane {
  const rng = new TestRng(seed);
  const Hm = squareToQuad(shot.corners);
  // inverse by adjugate
  const [a, b, c, d, e, f, g, h, i] = Hm;
  const inv = [e * i - f * h, c * h - b * i, b * f - c * e, f * g - d * i, a * i - c * g, c * d - a * f, d * h - e * g, b * g - a * h, a * e - b * d];
  const data = new Float32Array(W * H);
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const wq = inv[6] * x + inv[7] * y + inv[8];
      const u = (inv[0] * x + inv[1] * y + inv[2]) / wq;
      const v = (inv[3] * x + inv[4] * y + inv[5]) / wq;
      const inside = u >= 0 && u <= 1 && v >= 0 && v <= 1;
      const L = inside ? panelPattern(u, v) : 0.02;
      const val = shot.exposure * 0.6 * L * trueT(lens, W, H, x, y);
      data[y * W + x] = val * (1 + noise * rng.gauss());
    }
  }
  return { width: W, height: H, data };
}

/** Panel corners for a panel of size pw x ph pixels centred at (cx, cy), with a little keystone. */
export function panelQuad(cx: number, cy: number, pw: number, ph: number, keystone = 0): [number, number][] {
  return [
    [cx - pw / 2 + keystone, cy - ph / 2],
    [cx + pw / 2 - keystone, cy - ph / 2],
    [cx + pw / 2, cy + ph / 2],
    [cx - pw / 2, cy + ph / 2],
  ];
}
