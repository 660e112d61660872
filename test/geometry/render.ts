// A tiny renderer of synthetic photos of a display for the geometry tests: a lit quadrilateral (the
// active area) inside a darker bezel quadrilateral on a background, with exact area coverage at the
// edges (supersampled only where an edge crosses the pixel), lens falloff, an additive glare blob,
// Gaussian blur and seeded noise. Pixel (x, y) covers x-0.5..x+0.5, y-0.5..y+0.5.

import type { Corners, Plane, Point } from '../../lib/types.js';

export interface Glare {
  x: number;
  y: number;
  sigma: number;
  amplitude: number;
}

export interface Scene {
  width: number;
  height: number;
  panel: Corners;
  /** outer outline of the bezel; without it everything outside the panel is bezel */
  bezel?: Corners;
  panelLevel: number;
  /** optional multiplicative pattern on the panel level (mura), evaluated at pixel centres */
  panelPattern?: (x: number, y: number) => number;
  bezelLevel: number;
  backgroundLevel?: number;
  /** fraction of light lost at the frame corners: V = 1 - falloff (r / rCorner)^2 */
  falloff?: number;
  glare?: Glare[];
  blurSigma?: number;
  /** additive Gaussian noise, standard deviation */
  noiseSigma?: number;
  /** shot-like noise: extra standard deviation shotScale * sqrt(value) */
  shotScale?: number;
  seed?: number;
  supersample?: number;
}

interface HalfPlane {
  nx: number;
  ny: number;
  c: number;
}

/** Outward half-planes of a screen-clockwise convex quadrilateral: inside where nx x + ny y - c < 0. */
function halfPlanes(q: Corners): HalfPlane[] {
  return q.map((a, i) => {
    const b = q[(i + 1) % 4];
    const dx = b[0] - a[0];
    const dy = b[1] - a[1];
    const len = Math.hypot(dx, dy);
    const nx = dy / len;
    const ny = -dx / len;
    return { nx, ny, c: nx * a[0] + ny * a[1] };
  });
}

function coverage(hp: HalfPlane[], x: number, y: number, S: number): number {
  let allIn = true;
  for (const h of hp) {
    const d = h.nx * x + h.ny * y - h.c;
    if (d > 0.7072) return 0;
    if (d > -0.7072) allIn = false;
  }
  if (allIn) return 1;
  let inside = 0;
  for (let j = 0; j < S; j++) {
    const yy = y - 0.5 + (j + 0.5) / S;
    for (let i = 0; i < S; i++) {
      const xx = x - 0.5 + (i + 0.5) / S;
      let ok = true;
      for (const h of hp) {
        if (h.nx * xx + h.ny * yy - h.c > 0) {
          ok = false;
          break;
        }
      }
      if (ok) inside++;
    }
  }
  return inside / (S * S);
}

/** Deterministic PRNG (mulberry32). */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function gaussianNoise(rand: () => number): () => number {
  return () => {
    const u = Math.max(rand(), 1e-12);
    const v = rand();
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
  };
}

/** Separable Gaussian blur, kernel sampled at integer offsets to ±4σ, edges clamped. */
export function gaussianBlur(p: Plane, sigma: number): Plane {
  const { width: W, height: H } = p;
  const r = Math.ceil(4 * sigma);
  const k = new Float64Array(2 * r + 1);
  let s = 0;
  for (let i = -r; i <= r; i++) {
    k[i + r] = Math.exp((-i * i) / (2 * sigma * sigma));
    s += k[i + r];
  }
  for (let i = 0; i < k.length; i++) k[i] /= s;
  const tmp = new Float32Array(W * H);
  const out = new Float32Array(W * H);
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      let acc = 0;
      for (let i = -r; i <= r; i++) {
        const xx = Math.min(W - 1, Math.max(0, x + i));
        acc += k[i + r] * p.data[y * W + xx];
      }
      tmp[y * W + x] = acc;
    }
  }
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      let acc = 0;
      for (let i = -r; i <= r; i++) {
        const yy = Math.min(H - 1, Math.max(0, y + i));
        acc += k[i + r] * tmp[yy * W + x];
      }
      out[y * W + x] = acc;
    }
  }
  return { width: W, height: H, data: out };
}

export function renderScene(s: Scene): Plane {
  const { width: W, height: H } = s;
  const S = s.supersample ?? 16;
  const hpPanel = halfPlanes(s.panel);
  const hpBezel = s.bezel ? halfPlanes(s.bezel) : null;
  const bg = s.backgroundLevel ?? s.bezelLevel;
  const data = new Float32Array(W * H);
  const cx = (W - 1) / 2;
  const cy = (H - 1) / 2;
  const rCorner2 = cx * cx + cy * cy;
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const cp = coverage(hpPanel, x, y, S);
      const cb = hpBezel ? coverage(hpBezel, x, y, S) : 1;
      const pl = s.panelLevel * (s.panelPattern ? s.panelPattern(x, y) : 1);
      let v = cp * pl + (cb - cp) * s.bezelLevel + (1 - cb) * bg;
      if (s.falloff) v *= 1 - (s.falloff * ((x - cx) * (x - cx) + (y - cy) * (y - cy))) / rCorner2;
      if (s.glare) {
        for (const g of s.glare) {
          const d2 = (x - g.x) * (x - g.x) + (y - g.y) * (y - g.y);
          v += g.amplitude * Math.exp(-d2 / (2 * g.sigma * g.sigma));
        }
      }
      data[y * W + x] = v;
    }
  }
  let img: Plane = { width: W, height: H, data };
  if (s.blurSigma && s.blurSigma > 0) img = gaussianBlur(img, s.blurSigma);
  if (s.noiseSigma || s.shotScale) {
    const gauss = gaussianNoise(rng(s.seed ?? 1));
    const d = img.data;
    for (let i = 0; i < d.length; i++) {
      const sd = Math.sqrt((s.noiseSigma ?? 0) ** 2 + (s.shotScale ?? 0) ** 2 * Math.max(0, d[i]));
      d[i] += sd * gauss();
    }
  }
  return img;
}

export interface ViewSpec {
  /** panel active-area size, any length unit */
  panelWidth: number;
  panelHeight: number;
  /** rotation about the panel's vertical axis, its horizontal axis, and the camera axis, degrees */
  yawDeg: number;
  pitchDeg: number;
  rollDeg: number;
  /** distance of the panel centre along the camera axis, same unit as the panel size */
  distance: number;
  /** lateral offset of the panel centre (camera x right, y down), same unit */
  offsetX?: number;
  offsetY?: number;
  focalPx: number;
  cx: number;
  cy: number;
}

/** Rotation R = Rz(roll) Ry(yaw) Rx(pitch), row-major. */
export function rotation(yawDeg: number, pitchDeg: number, rollDeg: number): number[] {
  const r = Math.PI / 180;
  const [a, b, c] = [pitchDeg * r, yawDeg * r, rollDeg * r];
  const Rx = [1, 0, 0, 0, Math.cos(a), -Math.sin(a), 0, Math.sin(a), Math.cos(a)];
  const Ry = [Math.cos(b), 0, Math.sin(b), 0, 1, 0, -Math.sin(b), 0, Math.cos(b)];
  const Rz = [Math.cos(c), -Math.sin(c), 0, Math.sin(c), Math.cos(c), 0, 0, 0, 1];
  const mul = (p: number[], q: number[]) => {
    const o = new Array<number>(9).fill(0);
    for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) for (let k = 0; k < 3; k++) o[i * 3 + j] += p[i * 3 + k] * q[k * 3 + j];
    return o;
  };
  return mul(Rz, mul(Ry, Rx));
}

/** Pinhole projection (camera x right, y down, z forward) of a point given in panel coordinates (u, v in 0..1). */
export function projectPanelPoint(v: ViewSpec, u: number, w: number): Point {
  const R = rotation(v.yawDeg, v.pitchDeg, v.rollDeg);
  const X = (u - 0.5) * v.panelWidth;
  const Y = (w - 0.5) * v.panelHeight;
  const px = R[0] * X + R[1] * Y + (v.offsetX ?? 0);
  const py = R[3] * X + R[4] * Y + (v.offsetY ?? 0);
  const pz = R[6] * X + R[7] * Y + v.distance;
  return [v.cx + (v.focalPx * px) / pz, v.cy + (v.focalPx * py) / pz];
}

/** Corners TL, TR, BR, BL of the panel seen through the pinhole camera. */
export function projectPanel(v: ViewSpec): Corners {
  return [projectPanelPoint(v, 0, 0), projectPanelPoint(v, 1, 0), projectPanelPoint(v, 1, 1), projectPanelPoint(v, 0, 1)];
}

/** Outline grown outward by `margin` panel units on every side (for a bezel). */
export function projectBezel(v: ViewSpec, margin: number): Corners {
  const mu = margin / v.panelWidth;
  const mv = margin / v.panelHeight;
  return [
    projectPanelPoint(v, -mu, -mv),
    projectPanelPoint(v, 1 + mu, -mv),
    projectPanelPoint(v, 1 + mu, 1 + mv),
    projectPanelPoint(v, -mu, 1 + mv),
  ];
}

/** Largest corner distance between two corner sets. */
export function maxCornerError(a: Corners, b: Corners): number {
  let m = 0;
  for (let i = 0; i < 4; i++) m = Math.max(m, Math.hypot(a[i][0] - b[i][0], a[i][1] - b[i][1]));
  return m;
}
