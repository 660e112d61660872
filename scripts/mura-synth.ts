// Synthetic rectified panel maps with known mura, for the mura tests and accuracy studies.
//
//   Y(x, y) = level * S(U, V) * max(0, 1 + sum_f c_f phi_f(x, y)) * (1 + noise)
//
// S is the smooth variation (a polynomial in U = 2u - 1, V = 2v - 1), phi_f a feature shape peaking
// at 1, c_f its peak contrast. Because features multiply the smooth field, the contrast of an isolated
// feature against it is exactly 100 c phi, at any contrast.
//
// Analytical half-peak truth of an elliptical Gaussian phi = exp(-x²/2sx² - y²/2sy²):
//   region phi >= 1/2  <=>  x²/sx² + y²/sy² <= 2 ln 2, an ellipse of area pi * 2 ln 2 * sx * sy;
//   mean of phi over it: with r² = x²/sx² + y²/sy², dA = sx sy 2 pi r dr,
//   (1/A) * integral_0^R exp(-r²/2) sx sy 2 pi r dr = 2 pi sx sy (1 - e^{-R²/2}) / (pi R² sx sy)
//   = 2 (1 - 1/2) / (2 ln 2) = 1 / (2 ln 2)  (R² = 2 ln 2), i.e. mean contrast = peak / (2 ln 2).

import type { PanelMap } from '../lib/types.js';

export type Edge = 'top' | 'bottom' | 'left' | 'right';
export type Corner = 'top-left' | 'top-right' | 'bottom-right' | 'bottom-left';

export type SynthFeature =
  | { kind: 'gauss'; xMm: number; yMm: number; sigmaMm: number; sigmaYMm?: number; contrastPct: number }
  /** band or line across the panel: cross-profile Gaussian (FWHM) or raised cosine (FWHM), optional extent */
  | {
      kind: 'band';
      axis: 'horizontal' | 'vertical';
      posMm: number;
      fwhmMm: number;
      profile: 'gauss' | 'cos';
      contrastPct: number;
      fromMm?: number;
      toMm?: number;
    }
  | { kind: 'edge-glow'; edge: Edge; decayMm: number; contrastPct: number; atMm?: number; fwhmAlongMm?: number }
  | { kind: 'corner-glow'; corner: Corner; decayMm: number; contrastPct: number }
  /** Gaussian zones of FWHM fwhmMm on a square lattice of pitchMm centred on the panel */
  | { kind: 'hotspots'; pitchMm: number; fwhmMm: number; contrastPct: number }
  /** level steps per tile (row by row) and Gaussian seam lines along the inner boundaries */
  | { kind: 'tiles'; cols: number; rows: number; stepsPct: number[]; seamFwhmMm: number; seamContrastPct: number };

export interface SynthSpec {
  widthMm: number;
  heightMm: number;
  pxPerMm: number;
  /** base luminance at the centre */
  level?: number;
  /** smooth variation: S = 1 + sum c[i][j] U^i V^j (c[0][0] ignored) */
  smooth?: number[][];
  /** roll-off from a peak at (u0, v0) (fractions of the panel, default the centre): S -= loss (d / half
   *  diagonal)^power, d the distance from the peak in mm */
  radial?: { loss: number; power: number; u0?: number; v0?: number };
  /** white Gaussian noise, % of the local level per map pixel */
  noisePct?: number;
  seed?: number;
  features?: SynthFeature[];
}

export const FWHM_PER_SIGMA = 2 * Math.sqrt(2 * Math.LN2);

/** Small seeded generator (mulberry32) with Gaussian draws (Box-Muller). */
export class SynthRng {
  private s: number;
  private spare: number | null = null;
  constructor(seed: number) {
    this.s = seed >>> 0 || 1;
  }
  next(): number {
    let t = (this.s = (this.s + 0x6d2b79f5) >>> 0);
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  }
  uniform(a: number, b: number): number {
    return a + (b - a) * this.next();
  }
  gauss(): number {
    if (this.spare !== null) {
      const v = this.spare;
      this.spare = null;
      return v;
    }
    let u = 0;
    while (u === 0) u = this.next();
    const v = this.next();
    const r = Math.sqrt(-2 * Math.log(u));
    this.spare = r * Math.sin(2 * Math.PI * v);
    return r * Math.cos(2 * Math.PI * v);
  }
}

function raisedCos(d: number, fwhm: number): number {
  const a = Math.abs(d);
  if (a >= fwhm) return 0;
  const c = Math.cos((Math.PI * a) / (2 * fwhm));
  return c * c;
}

/** 1 inside [a, b] with half-cosine ends of width r centred on a and b (0.5 at a and b). */
function soft(t: number, a: number, b: number, r: number): number {
  let f = 1;
  if (t <= a - r / 2 || t >= b + r / 2) return 0;
  if (t < a + r / 2) f *= 0.5 * (1 - Math.cos((Math.PI * (t - (a - r / 2))) / r));
  if (t > b - r / 2) f *= 0.5 * (1 - Math.cos((Math.PI * (b + r / 2 - t)) / r));
  return f;
}

/** Shape phi (peak 1) of one feature at (x, y) mm on a W x H mm panel. */
export function featureShape(f: SynthFeature, x: number, y: number, W: number, H: number): number {
  switch (f.kind) {
    case 'gauss': {
      const sy = f.sigmaYMm ?? f.sigmaMm;
      const dx = x - f.xMm;
      const dy = y - f.yMm;
      return Math.exp(-(dx * dx) / (2 * f.sigmaMm * f.sigmaMm) - (dy * dy) / (2 * sy * sy));
    }
    case 'band': {
      const across = f.axis === 'horizontal' ? y : x;
      const along = f.axis === 'horizontal' ? x : y;
      const L = f.axis === 'horizontal' ? W : H;
      const d = across - f.posMm;
      const s = f.fwhmMm / FWHM_PER_SIGMA;
      const prof = f.profile === 'gauss' ? Math.exp(-(d * d) / (2 * s * s)) : raisedCos(d, f.fwhmMm);
      const a = f.fromMm ?? -1e9;
      const b = f.toMm ?? 1e9;
      const r = Math.min(Math.max(2 * f.fwhmMm, 2), (Math.min(b, L) - Math.max(a, 0)) / 2);
      const ext = f.fromMm === undefined && f.toMm === undefined ? 1 : soft(along, a, b, r);
      return prof * ext;
    }
    case 'edge-glow': {
      const d = f.edge === 'left' ? x : f.edge === 'right' ? W - x : f.edge === 'top' ? y : H - y;
      const t = f.edge === 'left' || f.edge === 'right' ? y : x;
      let along = 1;
      if (f.fwhmAlongMm !== undefined) {
        const s = f.fwhmAlongMm / FWHM_PER_SIGMA;
        const at = f.atMm ?? (f.edge === 'left' || f.edge === 'right' ? H / 2 : W / 2);
        along = Math.exp(-((t - at) ** 2) / (2 * s * s));
      }
      return Math.exp(-d / f.decayMm) * along;
    }
    case 'corner-glow': {
      const cx = f.corner.endsWith('left') ? 0 : W;
      const cy = f.corner.startsWith('top') ? 0 : H;
      return Math.exp(-Math.hypot(x - cx, y - cy) / f.decayMm);
    }
    case 'hotspots': {
      const s = f.fwhmMm / FWHM_PER_SIGMA;
      const comb = (t: number, c: number): number => {
        // nearest lattice nodes only (zones are well separated in the studies)
        const k = Math.round((t - c) / f.pitchMm);
        let v = 0;
        for (let j = k - 1; j <= k + 1; j++) {
          const d = t - (c + j * f.pitchMm);
          v += Math.exp(-(d * d) / (2 * s * s));
        }
        return v;
      };
      return comb(x, W / 2) * comb(y, H / 2);
    }
    case 'tiles': {
      const tw = W / f.cols;
      const th = H / f.rows;
      const c = Math.min(f.cols - 1, Math.floor(x / tw));
      const r = Math.min(f.rows - 1, Math.floor(y / th));
      // tiles: phi carries the step directly (contrast 1 %); seams add on top (see contrastOf)
      return f.stepsPct[r * f.cols + c] ?? 0;
    }
  }
}

/** Contrast (fraction) a feature adds at (x, y). */
function featureContrast(f: SynthFeature, x: number, y: number, W: number, H: number): number {
  if (f.kind === 'tiles') {
    let v = featureShape(f, x, y, W, H) / 100;
    if (f.seamFwhmMm > 0) {
      const s = f.seamFwhmMm / FWHM_PER_SIGMA;
      for (let c = 1; c < f.cols; c++) v += (f.seamContrastPct / 100) * Math.exp(-((x - (c * W) / f.cols) ** 2) / (2 * s * s));
      for (let r = 1; r < f.rows; r++) v += (f.seamContrastPct / 100) * Math.exp(-((y - (r * H) / f.rows) ** 2) / (2 * s * s));
    }
    return v;
  }
  return (f.contrastPct / 100) * featureShape(f, x, y, W, H);
}

/** Render a synthetic panel map (X and Z follow Y with a D65-like white; valid everywhere). */
export function synthMap(spec: SynthSpec): PanelMap {
  const W = spec.widthMm;
  const H = spec.heightMm;
  const width = Math.round(W * spec.pxPerMm);
  const height = Math.round(H * spec.pxPerMm);
  const level = spec.level ?? 0.2;
  const rng = new SynthRng(spec.seed ?? 1);
  const noise = (spec.noisePct ?? 0) / 100;
  const feats = spec.features ?? [];
  const c = spec.smooth ?? [];
  const Y = new Float32Array(width * height);
  for (let j = 0; j < height; j++) {
    const y = ((j + 0.5) / height) * H;
    const V = (2 * y) / H - 1;
    for (let i = 0; i < width; i++) {
      const x = ((i + 0.5) / width) * W;
      const U = (2 * x) / W - 1;
      let s = 1;
      for (let a = 0; a < c.length; a++) for (let b = 0; b < c[a].length; b++) if (a + b > 0) s += c[a][b] * U ** a * V ** b;
      if (spec.radial) {
        const { loss, power, u0 = 0.5, v0 = 0.5 } = spec.radial;
        s -= loss * (Math.hypot(x - u0 * W, y - v0 * H) / Math.hypot(W / 2, H / 2)) ** power;
      }
      let f = 1;
      for (const ft of feats) f += featureContrast(ft, x, y, W, H);
      Y[j * width + i] = level * s * Math.max(0, f) * (1 + noise * rng.gauss());
    }
  }
  const X = new Float32Array(Y.length);
  const Z = new Float32Array(Y.length);
  for (let k = 0; k < Y.length; k++) {
    X[k] = 0.9505 * Y[k];
    Z[k] = 1.089 * Y[k];
  }
  return {
    width,
    height,
    pxPerMm: width / W,
    widthMm: W,
    heightMm: H,
    mmKnown: true,
    X,
    Y,
    Z,
    valid: new Uint8Array(Y.length).fill(1),
  };
}

export interface RegionTruth {
  areaMm2: number;
  contrastPct: number;
  peakContrastPct: number;
  xMm: number;
  yMm: number;
}

/** Half-peak truth of one feature, by fine sampling of its contrast (step mm) over the panel. */
export function sampledTruth(f: SynthFeature, W: number, H: number, step = 0.25): RegionTruth {
  const nx = Math.ceil(W / step);
  const ny = Math.ceil(H / step);
  let peak = 0;
  const val = (i: number, j: number): number => 100 * featureContrast(f, (i + 0.5) * step, (j + 0.5) * step, W, H);
  for (let j = 0; j < ny; j++) for (let i = 0; i < nx; i++) {
    const v = val(i, j);
    if (Math.abs(v) > Math.abs(peak)) peak = v;
  }
  let n = 0;
  let s = 0;
  let sx = 0;
  let sy = 0;
  for (let j = 0; j < ny; j++) for (let i = 0; i < nx; i++) {
    const v = val(i, j);
    if (Math.abs(v) < Math.abs(peak) / 2) continue;
    n++;
    s += v;
    sx += (i + 0.5) * step;
    sy += (j + 0.5) * step;
  }
  return { areaMm2: n * step * step, contrastPct: s / n, peakContrastPct: peak, xMm: sx / n, yMm: sy / n };
}
