// The camera's response: how an 8-bit code value relates to the light that made it.
//
// A camera's JPEG engine applies its own tone curve, seldom exactly the sRGB curve (IEC 61966-2-1)
// the files claim. Undoing the wrong curve scales every luminance ratio: a curve steeper than sRGB's
// at mid-tones makes a panel look less uniform than it is. The response is measured from an exposure
// bracket of a still scene (the same pixels at several known exposures) by the least-squares method
// of Debevec & Malik (1997): g(Z) = ln E + ln X, with g smooth, solved for g at every code value.
//
// Here one curve serves all three channels (camera JPEG engines apply one tone curve to R, G and B
// after white balance and colour matrixing), and the unknown ln E of each sample point is eliminated in
// closed form, so the normal equations are 256 × 256 whatever the number of points.

import { Matrix, solve } from 'ml-matrix';
import { srgbCodeStepPct, srgbDecode, srgbEncode } from './index.js';

/** A measured response: linear light (relative; code 255 gives 1) at every 8-bit code value, increasing. */
export interface ResponseCurve {
  /** short fingerprint of the table (for caches and the report) */
  id: string;
  /** 256 values, linear[255] = 1, strictly increasing */
  linear: number[];
  /** the camera it was measured on (EXIF make and model), when known */
  camera?: { make: string | null; model: string | null };
  /** the code values it was measured between (outside them the table is extended), when known */
  measuredCodes?: [number, number];
  /** 'profile': the tone curve of a file's embedded colour profile, not a measured response */
  source?: 'profile';
  /** a profile curve's own values at the 65536 16-bit codes (used for 16-bit files instead of
   *  interpolating the 256-entry table) */
  lut16?: Float32Array;
}

/** How code values become linear light. */
export type Transfer = 'srgb' | 'linear' | ResponseCurve;

export function transferName(t: Transfer): 'srgb' | 'linear' | 'response' | 'profile' {
  return typeof t === 'string' ? t : t.source === 'profile' ? 'profile' : 'response';
}

/** Linear light of a code value v given as a fraction of full scale (0..1; real). */
export function transferDecode(t: Transfer, v: number): number {
  if (t === 'srgb') return srgbDecode(v);
  if (t === 'linear') return v;
  const x = Math.min(255, Math.max(0, v * 255));
  const k = Math.min(254, Math.floor(x));
  const f = x - k;
  return t.linear[k]! + f * (t.linear[k + 1]! - t.linear[k]!);
}

/** Code value (fraction of full scale, real) that decodes to linear level l: the inverse of transferDecode. */
export function transferEncode(t: Transfer, l: number): number {
  if (t === 'srgb') return srgbEncode(l);
  if (t === 'linear') return l;
  const a = t.linear;
  if (l <= a[0]!) return 0;
  if (l >= a[255]!) return 1;
  let lo = 0;
  let hi = 255;
  while (hi - lo > 1) {
    const mid = (lo + hi) >> 1;
    if (a[mid]! <= l) lo = mid;
    else hi = mid;
  }
  return (lo + (l - a[lo]!) / (a[hi]! - a[lo]!)) / 255;
}

/**
 * Contrast (%) of one 8-bit code value at linear level y (0..1]: 100 × (dL/dV) / L with V in code values.
 * For sRGB this is srgbCodeStepPct's closed form; for a measured response, the slope of the table there.
 */
export function transferCodeStepPct(t: Transfer, y: number): number {
  if (!(y > 0 && y <= 1)) throw new RangeError(`linear level must be in (0, 1], got ${y}`);
  if (t === 'linear') return 100 / (255 * y);
  if (t === 'srgb') return srgbCodeStepPct(y);
  const v = 255 * transferEncode(t, y);
  const k = Math.min(254, Math.max(0, Math.floor(v)));
  return (100 * (t.linear[k + 1]! - t.linear[k]!)) / y;
}

/** Table of `size` entries: linear light of code i / (size − 1). */
export function transferTable(t: Transfer, size: number): Float32Array {
  const lut = new Float32Array(size);
  const max = size - 1;
  for (let i = 0; i < size; i++) lut[i] = transferDecode(t, i / max);
  return lut;
}

/** Fingerprint of a table of 256 values (FNV-1a over their float32 bits), 8 hex digits. */
export function responseId(linear: readonly number[]): string {
  const f = new Float32Array(linear);
  const b = new Uint8Array(f.buffer);
  let h = 0x811c9dc5;
  for (const x of b) {
    h ^= x;
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h.toString(16).padStart(8, '0');
}

// ---------------------------------------------------------------------------------------------
// Solving for the response from a bracket
// ---------------------------------------------------------------------------------------------

export interface ResponseSolveOptions {
  /** weight of the smoothness term (second derivative of g in ln z); default 0.1, chosen on generated samples (0.01–0.03 let noise through, 1 bends the toe; see test/photometry/response.test.ts and scripts/response-accuracy.ts) */
  smoothness?: number;
  /** codes at or above this are clipped and not used (default 254) */
  clipCode?: number;
  /** codes below this are lost in the floor and not used (default 3: the mean of a patch of codes 1–2 is mostly noise and JPEG rounding) */
  floorCode?: number;
}

export interface ResponseSolution {
  curve: ResponseCurve;
  /** lowest and highest code value with data (the table is measured between them, extended outside) */
  codeRange: [number, number];
  /** rms of the fit's residuals, % of linear light (ln units × 100) */
  fitRmsPct: number;
  /** points and observations used */
  points: number;
  observations: number;
  /** false when g does not rise over the measured range (the table is then not usable) */
  monotonic: boolean;
}

/**
 * Debevec & Malik's least squares for one curve g(Z) = ln f⁻¹(Z): for each point i seen at code Z_ij in
 * photo j of relative exposure X_j, w_ij (g(Z_ij) − ln E_i − ln X_j) ≈ 0, plus smoothness·g''(z) ≈ 0.
 * Codes are real (a point is the mean over a small patch); g is linear between whole codes.
 *
 * `codes[i]` holds point i's code in every photo (NaN where unusable); `lnExposure[j]` is ln X_j.
 * Weights: a hat over the code range (Debevec & Malik), kept at a floor so that dark codes still count.
 */
/** codes above this (or above the last measured codes less 5) follow the power law fitted below it */
const TOP_FIT_END = 240;

const WEIGHT = (z: number) => Math.max(0.05, Math.sqrt(z / 255)) * Math.min(1, (255 - z) / 3);

export function solveResponse(codes: Float64Array[], lnExposure: number[], opts: ResponseSolveOptions = {}): ResponseSolution {
  const P = lnExposure.length;
  const clip = opts.clipCode ?? 254;
  const floor = opts.floorCode ?? 3;
  const lambda = opts.smoothness ?? 0.1;
  const n = 256;
  const AtA = new Float64Array(n * n);
  const Atb = new Float64Array(n);
  const weight = WEIGHT;
  let zMin = Infinity;
  let zMax = -Infinity;
  let points = 0;
  let observations = 0;
  // per point: valid photos, their codes, weights
  const js: number[] = [];
  const zs: number[] = [];
  const ws: number[] = [];
  const addRow = (coef: Map<number, number>, rhs: number) => {
    for (const [a, ca] of coef) {
      Atb[a] += ca * rhs;
      for (const [b, cb] of coef) AtA[a * n + b] += ca * cb;
    }
  };
  const interp = (z: number): [number, number] => {
    const lo = Math.min(254, Math.floor(z));
    return [lo, z - lo];
  };
  for (const pt of codes) {
    js.length = 0;
    zs.length = 0;
    ws.length = 0;
    for (let j = 0; j < P; j++) {
      const z = pt[j]!;
      if (!(z >= floor && z < clip)) continue;
      js.push(j);
      zs.push(z);
      ws.push(weight(z));
    }
    if (js.length < 2) continue;
    points++;
    observations += js.length;
    let sw2 = 0;
    for (const w of ws) sw2 += w * w;
    // the point's own ln E at its weighted least squares: ā = Σ α_k a_k, b̄ = Σ α_k ln X_k
    let bBar = 0;
    const aBar = new Map<number, number>();
    for (let k = 0; k < js.length; k++) {
      const alpha = (ws[k]! * ws[k]!) / sw2;
      bBar += alpha * lnExposure[js[k]!]!;
      const [lo, f] = interp(zs[k]!);
      aBar.set(lo, (aBar.get(lo) ?? 0) + alpha * (1 - f));
      aBar.set(lo + 1, (aBar.get(lo + 1) ?? 0) + alpha * f);
      zMin = Math.min(zMin, zs[k]!);
      zMax = Math.max(zMax, zs[k]!);
    }
    for (let k = 0; k < js.length; k++) {
      const w = ws[k]!;
      const coef = new Map<number, number>();
      for (const [c, a] of aBar) coef.set(c, -a * w);
      const [lo, f] = interp(zs[k]!);
      coef.set(lo, (coef.get(lo) ?? 0) + w * (1 - f));
      coef.set(lo + 1, (coef.get(lo + 1) ?? 0) + w * f);
      addRow(coef, w * (lnExposure[js[k]!]! - bBar));
    }
  }
  if (points === 0) throw new RangeError('no point of the bracket is usable in two photos or more');
  // smoothness: the change of the slope d g / d ln z from one code value to the next. The slope is
  // constant for a power law (and so both for the linear toe of a camera curve and for its gamma-like
  // upper part); a penalty per code value (not per unit of ln z, which would crowd the upper codes and
  // flatten a shoulder) lets the data lead where they are dense. Scaled with the data's weight.
  const s = lambda * Math.sqrt(observations / n);
  for (let z = 2; z < n - 1; z++) {
    const h1 = Math.log(z) - Math.log(z - 1);
    const h2 = Math.log(z + 1) - Math.log(z);
    addRow(
      new Map([
        [z - 1, s / h1],
        [z, -s / h1 - s / h2],
        [z + 1, s / h2],
      ]),
      0,
    );
  }
  // code 0 has no logarithm: tied weakly to code 1 (the table is drawn straight to zero below the data)
  addRow(
    new Map([
      [0, 1e-3],
      [1, -1e-3],
    ]),
    0,
  );
  // the curve is fixed up to a constant: g(128) = 0
  AtA[128 * n + 128] += 1;
  const A = new Matrix(n, n);
  for (let a = 0; a < n; a++) for (let b = 0; b < n; b++) A.set(a, b, AtA[a * n + b]!);
  const g = solve(A, Matrix.columnVector(Array.from(Atb))).getColumn(0);

  // residuals (the same elimination of ln E)
  let ss = 0;
  let wsum = 0;
  const gAt = (z: number) => {
    const [lo, f] = interp(z);
    return (1 - f) * g[lo]! + f * g[lo + 1]!;
  };
  for (const pt of codes) {
    let sw = 0;
    let acc = 0;
    const vals: [number, number][] = [];
    for (let j = 0; j < P; j++) {
      const z = pt[j]!;
      if (!(z >= floor && z < clip)) continue;
      const w = weight(z);
      const e = gAt(z) - lnExposure[j]!;
      vals.push([w, e]);
      sw += w * w;
      acc += w * w * e;
    }
    if (vals.length < 2) continue;
    const lnE = acc / sw;
    for (const [w, e] of vals) {
      ss += w * w * (e - lnE) ** 2;
      wsum += w * w;
    }
  }
  const lo = Math.max(0, Math.floor(zMin));
  const hi = Math.min(255, Math.ceil(zMax));
  let monotonic = true;
  for (let z = lo; z < hi; z++) if (!(g[z + 1]! > g[z]!)) monotonic = false;

  // The table: exp(g) over the measured range; straight to zero below it (camera curves are linear near
  // black); above TOP_FIT_END (or the last measured codes) the power law fitted to g over the 50 codes
  // before, since the last few codes under the clip level are the least certain (a patch near white is
  // kept only when none of its pixels clipped, which favours low readings). Then code 255 -> 1.
  const linear = new Array<number>(n);
  for (let z = lo; z < n; z++) linear[z] = Math.exp(g[z]!);
  for (let z = 0; z < lo; z++) linear[z] = lo > 0 ? (linear[lo]! * z) / lo : 0;
  const end = Math.min(TOP_FIT_END, hi - 5);
  const start = Math.max(lo + 1, end - 50);
  if (end - start >= 10) {
    // least squares g = a + b ln z over start..end
    let sx = 0;
    let sy = 0;
    let sxx = 0;
    let sxy = 0;
    let m = 0;
    for (let z = start; z <= end; z++) {
      const x = Math.log(z);
      sx += x;
      sy += g[z]!;
      sxx += x * x;
      sxy += x * g[z]!;
      m++;
    }
    const b = (m * sxy - sx * sy) / (m * sxx - sx * sx);
    const a = (sy - b * sx) / m;
    // continuous at `end`: the extension starts from the table's own value there
    const shift = g[end]! - (a + b * Math.log(end));
    for (let z = end + 1; z < n; z++) linear[z] = Math.exp(a + shift + b * Math.log(z));
    if (!(b > 0)) monotonic = false;
  }
  for (let z = 1; z < n; z++) if (!(linear[z]! > linear[z - 1]!)) monotonic = false;
  const top = linear[255]!;
  for (let z = 0; z < n; z++) linear[z] = linear[z]! / top;
  return {
    curve: { id: responseId(linear), linear },
    codeRange: [zMin, zMax],
    fitRmsPct: 100 * Math.sqrt(ss / Math.max(wsum, 1e-300)),
    points,
    observations,
    monotonic,
  };
}

// ---------------------------------------------------------------------------------------------
// Sample points from a bracket
// ---------------------------------------------------------------------------------------------

export interface BracketFrame {
  width: number;
  height: number;
  /** 8-bit codes, interleaved RGB */
  data: Uint8Array;
}

export interface BracketSampling {
  /** patch centres across and down the frame (default 40 × 30) */
  cols?: number;
  rows?: number;
  /** patch side in pixels (default 8) */
  patchPx?: number;
  /** a patch is smooth enough when the standard deviation of its codes is at most
   *  maxStdCodes + maxStdShare × its mean (defaults 1.5 and 0.03; else it straddles an edge) */
  maxStdCodes?: number;
  maxStdShare?: number;
  /** a patch with any code at or above this is clipped in that frame (default 254) */
  clipCode?: number;
}

/**
 * The mean code of small patches on a lattice of one frame, per channel (patch by patch, R G B), NaN
 * where the patch is clipped or not smooth (it straddles an edge).
 */
export function framePatches(f: BracketFrame, opts: BracketSampling = {}): Float64Array {
  const { width: W, height: H } = f;
  const cols = opts.cols ?? 40;
  const rows = opts.rows ?? 30;
  const side = Math.max(1, Math.min(opts.patchPx ?? 8, Math.floor(W / cols), Math.floor(H / rows)));
  const maxStd = opts.maxStdCodes ?? 1.5;
  const maxShare = opts.maxStdShare ?? 0.03;
  const clip = opts.clipCode ?? 254;
  const out = new Float64Array(cols * rows * 3).fill(NaN);
  const n = side * side;
  for (let r = 0; r < rows; r++) {
    const y0 = Math.floor(((r + 0.5) * H) / rows - side / 2);
    for (let c = 0; c < cols; c++) {
      const x0 = Math.floor(((c + 0.5) * W) / cols - side / 2);
      for (let ch = 0; ch < 3; ch++) {
        let s = 0;
        let s2 = 0;
        let top = 0;
        for (let y = y0; y < y0 + side; y++) {
          for (let x = x0; x < x0 + side; x++) {
            const v = f.data[(y * W + x) * 3 + ch]!;
            s += v;
            s2 += v * v;
            if (v > top) top = v;
          }
        }
        const mean = s / n;
        const sd = Math.sqrt(Math.max(0, s2 / n - mean * mean));
        if (top < clip && sd <= maxStd + maxShare * mean) out[(r * cols + c) * 3 + ch] = mean;
      }
    }
  }
  return out;
}

/** Points for solveResponse from the framePatches of every frame of a bracket (one framing). */
export function bracketPoints(perFrame: Float64Array[]): Float64Array[] {
  const n = perFrame[0]?.length ?? 0;
  const out: Float64Array[] = [];
  for (let i = 0; i < n; i++) out.push(Float64Array.from(perFrame, (f) => f[i]!));
  return out;
}
