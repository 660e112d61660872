// Falloff calibration from flat frames: photos of a uniform diffuse source filling the frame.
//
// 1. The frames (linear light, same size) are scaled to a common level and averaged pixel by pixel;
//    with three or more frames, values further than `frameClipSigma` frame-to-frame sigmas from the
//    per-pixel median are dropped first (dust, flicker, a passing reflection). Clipped values are dropped.
// 2. The average is reduced to blocks (about `fitColumns` across) for the fit.
// 3. In the log domain each block is fitted, by weighted least squares with iterative outlier
//    rejection, as
//        log Y = a + (source tilt: b u + c v) + sum g_i t^i + sum c_ij P_i(u) P_j(v)
//    with t = r^2 about the optical centre and 2 <= i + j <= surfaceOrder; the surface terms carry a
//    small ridge so that anything radially symmetric goes into the radial part.
// 4. The log-domain radial curve is converted to the stored form 1 + k1 r^2 + ... (see profile.ts).
//
// Source tilt vs a decentred lens. A linear ramp across the source and a lens whose optical centre
// is off the image centre are the same to first order: moving the centre of 1 + k1 r^2 by d adds the
// ramp -2 k1 (p . d). We keep the two apart like this:
//  - by default the optical centre is FITTED (Gauss-Newton, with a weak prior towards the image
//    centre, sd `centrePriorSigma`), and every remaining linear ramp is attributed to the source and
//    removed (reported as removedTiltPct). The centre is then fixed by the higher-order terms of the
//    falloff (r^4 and up; cos^4 has strong ones), which a source ramp cannot mimic. With weak falloff
//    (long lenses) the centre is poorly determined: its standard error is reported.
//  - `centre: 'image'` or an explicit centre fixes it; all linear ramps then go to the source.
//  - `sourceTilt: false` declares the source uniform: linear ramps then belong to the lens.
//  - Frames taken with the camera rolled 180° about its axis (meta.orientations) separate the two
//    exactly: the source ramp changes sign in camera coordinates, the lens's does not. Then both a
//    source tilt and a lens ramp are fitted.

import { EvenfieldError } from '../errors.js';
import type { ExposureRecord, RgbImage } from '../types.js';
import {
  type FrameGeometry,
  type SurfaceTerm,
  farthestCornerDistance,
  legendreInto,
  normU,
  normV,
  surfaceTerms,
} from './basis.js';
import { inverseColumns, logRadialToPolynomial, median, robustSigma, solveSymmetric } from './lsq.js';
import {
  type FalloffModel,
  type FalloffProfile,
  PROFILE_FORMAT,
  PROFILE_VERSION,
  modelCornerTransmission,
} from './profile.js';

/** Luminance weights of linear BT.709/sRGB RGB [IEC 61966-2-1]. */
const WR = 0.2126;
const WG = 0.7152;
const WB = 0.0722;

export interface FlatMeta {
  /** EXIF of the flat frames (camera, lens, focal length, aperture), recorded in the profile */
  exposure?: ExposureRecord | null;
  /** full-size image dimensions; default width * scale, height * scale */
  fullWidth?: number;
  fullHeight?: number;
  /** decode scale of the frames (1, 2, 4, 8); default 1 */
  scale?: number;
  /** frame names for messages (file names) */
  names?: string[];
  /** roll of each frame's camera about its axis relative to the first frame: 0 or 180 degrees */
  orientations?: (0 | 180)[];
  createdAt?: string | null;
}

export interface FlatOptions {
  /** 'fit' (default), 'image' (image centre), or a normalised centre [cu, cv] */
  centre?: 'fit' | 'image' | [number, number];
  /** sd of the prior that pulls a fitted centre towards the image centre, normalised units (default 0.1) */
  centrePriorSigma?: number;
  /** fit and remove a linear tilt of the source (default true) */
  sourceTilt?: boolean;
  /** number of log-domain radial terms t..t^n (default 5) */
  radialTerms?: number;
  /** number of stored radial coefficients k1..kn (default max(5, radialTerms)) */
  storedRadialTerms?: number;
  /** highest total order of the non-radial Legendre surface, 0 = none (default 4) */
  surfaceOrder?: number;
  /** ridge weight on the surface terms, relative to the total data weight (default 1e-3) */
  surfaceRidge?: number;
  /** blocks across the frame for the fit (default 96) */
  fitColumns?: number;
  /** per-pixel rejection threshold across frames, in frame-to-frame sigmas (default 4) */
  frameClipSigma?: number;
  /** rejection threshold for fit residuals, in robust sigmas (default 3.5) */
  robustSigma?: number;
  /** linear values at or above this are clipped and ignored (default 0.98) */
  clipLevel?: number;
  /** per-channel models: 'auto' (when channels differ by more than channelThresholdPct), 'always', 'never' */
  perChannel?: 'auto' | 'always' | 'never';
  /** highest total order of the channel log-ratio surfaces (default 4) */
  channelOrder?: number;
  /** 'auto' stores channel models when any channel's shading differs from luminance by more than this, % (default 0.3) */
  channelThresholdPct?: number;
  /** the frames are refused when the fit leaves more than this rms residual, % (default 2: flat frames of
   *  a diffuser or a light box leave well under 1 %, the demo's 0.04-0.07 %; a photo of a panel with
   *  its bezel among them left 14 %; common practice) */
  maxResidualRmsPct?: number;
}

export interface FlatCalibration {
  profile: FalloffProfile;
  /** each frame's central level relative to the median frame of its orientation group */
  frameLevels: number[];
  /** fraction of pixel values dropped as outliers across frames */
  rejectedPixelFraction: number;
  /** frame-to-frame relative noise per pixel, % (null with fewer than 3 frames in every group) */
  frameNoisePct: number | null;
  warnings: string[];
}

interface Blocks {
  n: number;
  u: Float64Array;
  v: Float64Array;
  R: Float64Array;
  G: Float64Array;
  B: Float64Array;
  w: Float64Array;
  group: Int32Array;
}

function frameName(meta: FlatMeta, k: number): string {
  return meta.names?.[k] ?? `flat frame ${k + 1}`;
}

/** Mean linear Y over the central quarter of a frame (strided). */
function centralLevel(img: RgbImage): number {
  const { width: w, height: h, data } = img;
  const x0 = Math.floor(w * 0.375);
  const x1 = Math.ceil(w * 0.625);
  const y0 = Math.floor(h * 0.375);
  const y1 = Math.ceil(h * 0.625);
  const step = Math.max(1, Math.floor((x1 - x0) / 64));
  let s = 0;
  let n = 0;
  for (let y = y0; y < y1; y += step) {
    for (let x = x0; x < x1; x += step) {
      const i = (y * w + x) * 3;
      s += WR * data[i] + WG * data[i + 1] + WB * data[i + 2];
      n++;
    }
  }
  return s / n;
}

/**
 * Frames of an orientation group of three or more whose coarse luminance pattern (32 x 24 block means,
 * each frame over its own median) departs from the group's block-by-block median by more than 3 % rms
 * and three times the group's median departure: the frames that are not like the others.
 */
function framesUnlikeTheOthers(frames: RgbImage[], orientations: readonly (0 | 180)[], clipLevel: number): number[] {
  const out: number[] = [];
  for (const o of new Set(orientations)) {
    const idx = frames.map((_, k) => k).filter((k) => orientations[k] === o);
    if (idx.length < 3) continue;
    const maps = idx.map((k) => coarseLogLuminance(frames[k], 32, 24, clipLevel));
    const n = maps[0].length;
    const mid = new Float64Array(n);
    for (let i = 0; i < n; i++) mid[i] = median(maps.map((m) => m[i]).filter(Number.isFinite));
    const dev = maps.map((m) => {
      let ss = 0;
      let c = 0;
      for (let i = 0; i < n; i++) {
        if (!Number.isFinite(m[i]) || !Number.isFinite(mid[i])) continue;
        ss += (m[i] - mid[i]) ** 2;
        c++;
      }
      return c > 0 ? Math.sqrt(ss / c) : 0;
    });
    const typical = median(dev);
    dev.forEach((d, j) => {
      if (d > 0.03 && d > 3 * typical) out.push(idx[j]);
    });
  }
  return out.sort((a, b) => a - b);
}

/** ln(block mean Y / frame median) on a cols x rows grid of blocks; NaN for blocks with clipped pixels. */
function coarseLogLuminance(img: RgbImage, cols: number, rows: number, clipLevel: number): Float64Array {
  const { width: w, height: h, data } = img;
  const sum = new Float64Array(cols * rows);
  const cnt = new Float64Array(cols * rows);
  const bad = new Uint8Array(cols * rows);
  const step = Math.max(1, Math.floor(Math.min(w / cols, h / rows) / 8));
  for (let y = 0; y < h; y += step) {
    const by = Math.min(rows - 1, Math.floor((y * rows) / h));
    for (let x = 0; x < w; x += step) {
      const bx = Math.min(cols - 1, Math.floor((x * cols) / w));
      const i = (y * w + x) * 3;
      const j = by * cols + bx;
      if (data[i] >= clipLevel || data[i + 1] >= clipLevel || data[i + 2] >= clipLevel) bad[j] = 1;
      sum[j] += WR * data[i] + WG * data[i + 1] + WB * data[i + 2];
      cnt[j]++;
    }
  }
  const out = new Float64Array(cols * rows);
  for (let j = 0; j < out.length; j++) out[j] = !bad[j] && cnt[j] > 0 && sum[j] > 0 ? Math.log(sum[j] / cnt[j]) : Number.NaN;
  const m = median(Array.from(out).filter(Number.isFinite));
  for (let j = 0; j < out.length; j++) out[j] -= m;
  return out;
}

/** Robust frame-to-frame relative sigma of one pixel value, from pairs of frames (strided sample). */
function frameSigma(frames: RgbImage[], factors: number[], clipLevel: number): number {
  const { width: w, height: h } = frames[0];
  const step = Math.max(1, Math.floor(Math.sqrt((w * h) / 20000)));
  const d: number[] = [];
  for (let k = 0; k + 1 < frames.length; k++) {
    const a = frames[k].data;
    const b = frames[k + 1].data;
    for (let y = 0; y < h; y += step) {
      for (let x = 0; x < w; x += step) {
        const i = (y * w + x) * 3 + 1;
        if (a[i] >= clipLevel || b[i] >= clipLevel) continue;
        const va = a[i] * factors[k];
        const vb = b[i] * factors[k + 1];
        const m = 0.5 * (va + vb);
        if (m > 1e-4) d.push(Math.abs(va - vb) / m);
      }
    }
  }
  return (1.4826 * median(d)) / Math.SQRT2;
}

interface CombineStats {
  rejected: number;
  total: number;
}

/**
 * Averages one orientation group pixel by pixel (with rejection) straight into fit blocks.
 */
function combineIntoBlocks(
  frames: RgbImage[],
  factors: number[],
  sigmaRel: number,
  clipSigma: number,
  clipLevel: number,
  b: number,
  stats: CombineStats,
) {
  const { width: w, height: h } = frames[0];
  const nbx = Math.ceil(w / b);
  const nby = Math.ceil(h / b);
  const nb = nbx * nby;
  const sR = new Float64Array(nb);
  const sG = new Float64Array(nb);
  const sB = new Float64Array(nb);
  const cnt = new Float64Array(nb);
  const sx = new Float64Array(nb);
  const sy = new Float64Array(nb);
  const bad = new Uint8Array(nb);
  const n = frames.length;
  const vals = new Float64Array(n);
  const sorted = new Float64Array(n);
  const bx = new Int32Array(w);
  for (let x = 0; x < w; x++) bx[x] = Math.floor(x / b);
  const acc = new Float64Array(3);
  const datas = frames.map((f) => f.data);
  for (let y = 0; y < h; y++) {
    const rowBlock = Math.floor(y / b) * nbx;
    for (let x = 0; x < w; x++) {
      const p = (y * w + x) * 3;
      let ok = true;
      for (let c = 0; c < 3; c++) {
        let m = 0;
        for (let k = 0; k < n; k++) {
          const raw = datas[k][p + c];
          if (raw >= clipLevel || !Number.isFinite(raw)) continue;
          vals[m] = raw * factors[k];
          sorted[m] = vals[m];
          m++;
        }
        if (m === 0) {
          ok = false;
          break;
        }
        if (m >= 3) {
          // insertion sort of the few values for the median
          for (let i = 1; i < m; i++) {
            const v = sorted[i];
            let j = i - 1;
            while (j >= 0 && sorted[j] > v) {
              sorted[j + 1] = sorted[j];
              j--;
            }
            sorted[j + 1] = v;
          }
          const med = m % 2 ? sorted[m >> 1] : 0.5 * (sorted[(m >> 1) - 1] + sorted[m >> 1]);
          const lim = clipSigma * sigmaRel * Math.abs(med) + 1e-7;
          let s = 0;
          let a = 0;
          for (let k = 0; k < m; k++) {
            if (Math.abs(vals[k] - med) <= lim) {
              s += vals[k];
              a++;
            }
          }
          stats.rejected += m - a;
          stats.total += m;
          acc[c] = a ? s / a : med;
        } else {
          let s = 0;
          for (let k = 0; k < m; k++) s += vals[k];
          stats.total += m;
          acc[c] = s / m;
        }
      }
      const bi = rowBlock + bx[x];
      if (!ok) {
        bad[bi] = 1;
        continue;
      }
      sR[bi] += acc[0];
      sG[bi] += acc[1];
      sB[bi] += acc[2];
      cnt[bi]++;
      sx[bi] += x;
      sy[bi] += y;
    }
  }
  return { nb, sR, sG, sB, cnt, sx, sy, bad };
}

interface LumFit {
  centre: [number, number];
  g: number[];
  surface: SurfaceTerm[];
  tilt: [number, number] | null;
  mask: Uint8Array;
  residual: Float64Array;
  centreSe: [number, number] | null;
  notes: string[];
}

interface FitSetup {
  groups: number;
  groupSign: number[];
  sourceTilt: boolean;
  lensLinear: boolean;
  radialTerms: number;
  surf: [number, number][];
  ridge: number;
  fitCentre: boolean;
  centre0: [number, number];
  priorSigma: number;
  robustK: number;
  geom: FrameGeometry;
  /** use this outlier mask and never update it */
  frozenMask?: Uint8Array;
}

/** Legendre values P_0..P_order at each sample's u and v. */
function legendreTable(vals: Float64Array, n: number, order: number): Float64Array {
  const nb = order + 1;
  const out = new Float64Array(n * nb);
  const tmp = new Float64Array(nb);
  for (let s = 0; s < n; s++) {
    legendreInto(vals[s], order, tmp);
    for (let i = 0; i < nb; i++) out[s * nb + i] = tmp[i];
  }
  return out;
}

function fitLuminance(bl: Blocks, y: Float64Array, setup: FitSetup): LumFit {
  // While the centre is being found, only even-order surface terms are allowed: odd-order terms
  // (u^3, u v^2, ...) can mimic a decentred radial falloff and would leave the centre undetermined.
  // The final solve at the found centre (below) uses the full surface.
  let st = setup.fitCentre ? { ...setup, surf: setup.surf.filter(([i, j]) => (i + j) % 2 === 0) } : setup;
  const n = bl.n;
  const order = Math.max(1, ...st.surf.map(([i, j]) => Math.max(i, j)));
  const nbL = order + 1;
  const PU = legendreTable(bl.u, n, order);
  const PV = legendreTable(bl.v, n, order);
  const G = st.groups;
  const iTilt = G;
  const iLin = iTilt + (st.sourceTilt ? 2 : 0);
  const iRad = iLin + (st.lensLinear ? 2 : 0);
  const iSurf = iRad + st.radialTerms;
  const iCen = iSurf + st.surf.length;
  const hw = st.geom.fullWidth / 2;
  const hh = st.geom.fullHeight / 2;

  let centre: [number, number] = [...st.centre0];
  let g: number[] | null = null;
  const mask = st.frozenMask ? Uint8Array.from(st.frozenMask) : new Uint8Array(n);
  if (!st.frozenMask) for (let s = 0; s < n; s++) mask[s] = bl.w[s] > 0 ? 1 : 0;
  const residual = new Float64Array(n);
  const t = new Float64Array(n);
  let sigma0sq = 0;
  let centreSe: [number, number] | null = null;
  let sol: Float64Array = new Float64Array(0);
  const notes: string[] = [];
  const maxIter = st.fitCentre ? 25 : 8;
  let sumW = 0;
  for (let s = 0; s < n; s++) sumW += bl.w[s];

  for (let it = 0; it < maxIter; it++) {
    const useCentreCols = st.fitCentre && g !== null;
    const m = iCen + (useCentreCols ? 2 : 0);
    const rMax = farthestCornerDistance(centre, st.geom);
    const N = new Float64Array(m * m);
    const rhs = new Float64Array(m);
    const row = new Float64Array(m);
    for (let s = 0; s < n; s++) {
      const du = (bl.u[s] - centre[0]) * hw;
      const dv = (bl.v[s] - centre[1]) * hh;
      t[s] = (du * du + dv * dv) / (rMax * rMax);
    }
    const fillRow = (s: number) => {
      row.fill(0);
      row[bl.group[s]] = 1;
      const sg = st.groupSign[bl.group[s]];
      if (st.sourceTilt) {
        row[iTilt] = sg * bl.u[s];
        row[iTilt + 1] = sg * bl.v[s];
      }
      if (st.lensLinear) {
        row[iLin] = bl.u[s];
        row[iLin + 1] = bl.v[s];
      }
      let p = 1;
      for (let i = 0; i < st.radialTerms; i++) {
        p *= t[s];
        row[iRad + i] = p;
      }
      for (let q = 0; q < st.surf.length; q++) {
        const [i, j] = st.surf[q];
        row[iSurf + q] = PU[s * nbL + i] * PV[s * nbL + j];
      }
      if (useCentreCols && g) {
        // d/dc of sum g_i t^i with t = |p - c|^2 / rMax^2 (rMax held fixed within the step)
        let dG = 0;
        let tp = 1;
        for (let i = 0; i < g.length; i++) {
          dG += (i + 1) * g[i] * tp;
          tp *= t[s];
        }
        const r2 = rMax * rMax;
        row[iCen] = dG * ((-2 * (bl.u[s] - centre[0]) * hw * hw) / r2);
        row[iCen + 1] = dG * ((-2 * (bl.v[s] - centre[1]) * hh * hh) / r2);
      }
    };
    for (let s = 0; s < n; s++) {
      if (!mask[s]) continue;
      fillRow(s);
      const w = bl.w[s];
      const ys = y[s];
      for (let a = 0; a < m; a++) {
        const ra = row[a];
        if (ra === 0) continue;
        const wa = w * ra;
        rhs[a] += wa * ys;
        for (let c = a; c < m; c++) N[a * m + c] += wa * row[c];
      }
    }
    for (let a = 0; a < m; a++) for (let c = 0; c < a; c++) N[a * m + c] = N[c * m + a];
    for (let q = 0; q < st.surf.length; q++) N[(iSurf + q) * (m + 1)] += st.ridge * sumW;
    if (useCentreCols) {
      const lam = (sigma0sq > 0 ? sigma0sq : 1e-8) / (st.priorSigma * st.priorSigma);
      N[iCen * (m + 1)] += lam;
      N[(iCen + 1) * (m + 1)] += lam;
      rhs[iCen] -= lam * centre[0];
      rhs[iCen + 1] -= lam * centre[1];
    }
    sol = solveSymmetric(N, rhs, m);

    // residuals and robust weights
    let ssr = 0;
    let used = 0;
    for (let s = 0; s < n; s++) {
      fillRow(s);
      let f = 0;
      for (let a = 0; a < iCen; a++) f += row[a] * sol[a];
      if (useCentreCols) f += row[iCen] * sol[iCen] + row[iCen + 1] * sol[iCen + 1];
      residual[s] = y[s] - f;
      if (mask[s]) {
        ssr += bl.w[s] * residual[s] * residual[s];
        used++;
      }
    }
    sigma0sq = ssr / Math.max(1, used - m);
    const sig = Math.max(robustSigma(residual, mask), 1e-5);
    let changed = false;
    if (it < 6 && !st.frozenMask) {
      for (let s = 0; s < n; s++) {
        if (bl.w[s] <= 0) continue;
        const keep = Math.abs(residual[s]) <= st.robustK * sig ? 1 : 0;
        if (keep !== mask[s]) {
          mask[s] = keep;
          changed = true;
        }
      }
    }
    g = Array.from(sol.subarray(iRad, iRad + st.radialTerms));
    if (useCentreCols) {
      let dc0 = sol[iCen];
      let dc1 = sol[iCen + 1];
      const step = Math.hypot(dc0, dc1);
      if (step > 0.05) {
        dc0 *= 0.05 / step;
        dc1 *= 0.05 / step;
      }
      centre = [centre[0] + dc0, centre[1] + dc1];
      const inv = inverseColumns(N, m, [iCen, iCen + 1]);
      centreSe = [Math.sqrt(sigma0sq * inv.get(iCen, 0)), Math.sqrt(sigma0sq * inv.get(iCen + 1, 1))];
      if (Math.abs(centre[0]) > 0.5 || Math.abs(centre[1]) > 0.5) {
        notes.push('fitted optical centre ran far from the image centre; fell back to the image centre');
        centre = [...st.centre0];
        st = { ...setup, fitCentre: false };
        g = null;
        centreSe = null;
        continue;
      }
      if (step < 1e-6 && !changed && it >= 2) break;
    } else if (!st.fitCentre && !changed && it >= 1) {
      break;
    }
  }
  // The last solve used the centre before its final (tiny) update; the radial terms stay consistent
  // to first order. Re-solve once at the final centre without centre columns for exact consistency.
  if (st.fitCentre) {
    const lf = fitLuminance(bl, y, { ...setup, fitCentre: false, centre0: centre, frozenMask: mask });
    return { ...lf, centreSe, notes: [...notes, ...lf.notes] };
  }
  const surface: SurfaceTerm[] = [];
  if (st.lensLinear) {
    surface.push([1, 0, sol[iLin]], [0, 1, sol[iLin + 1]]);
  }
  for (let q = 0; q < st.surf.length; q++) surface.push([st.surf[q][0], st.surf[q][1], sol[iSurf + q]]);
  return {
    centre,
    g: Array.from(sol.subarray(iRad, iRad + st.radialTerms)),
    surface,
    tilt: st.sourceTilt ? [sol[iTilt], sol[iTilt + 1]] : null,
    mask,
    residual,
    centreSe,
    notes,
  };
}

/** Weighted least squares of a channel's log ratio on group constants, tilts and a Legendre surface. */
function fitChannel(bl: Blocks, y: Float64Array, mask: Uint8Array, st: FitSetup, order: number): SurfaceTerm[] {
  const n = bl.n;
  const surf = surfaceTerms(2, order);
  const ord = Math.max(1, order);
  const nbL = ord + 1;
  const PU = legendreTable(bl.u, n, ord);
  const PV = legendreTable(bl.v, n, ord);
  const G = st.groups;
  const iTilt = G;
  const iLin = iTilt + (st.sourceTilt ? 2 : 0);
  const iSurf = iLin + (st.lensLinear ? 2 : 0);
  const m = iSurf + surf.length;
  const N = new Float64Array(m * m);
  const rhs = new Float64Array(m);
  const row = new Float64Array(m);
  let sumW = 0;
  for (let s = 0; s < n; s++) {
    if (!mask[s]) continue;
    row.fill(0);
    row[bl.group[s]] = 1;
    const sg = st.groupSign[bl.group[s]];
    if (st.sourceTilt) {
      row[iTilt] = sg * bl.u[s];
      row[iTilt + 1] = sg * bl.v[s];
    }
    if (st.lensLinear) {
      row[iLin] = bl.u[s];
      row[iLin + 1] = bl.v[s];
    }
    for (let q = 0; q < surf.length; q++) row[iSurf + q] = PU[s * nbL + surf[q][0]] * PV[s * nbL + surf[q][1]];
    const w = bl.w[s];
    sumW += w;
    for (let a = 0; a < m; a++) {
      if (row[a] === 0) continue;
      rhs[a] += w * row[a] * y[s];
      for (let c = 0; c < m; c++) N[a * m + c] += w * row[a] * row[c];
    }
  }
  for (let q = 0; q < surf.length; q++) N[(iSurf + q) * (m + 1)] += 1e-9 * sumW;
  const sol = solveSymmetric(N, rhs, m);
  const out: SurfaceTerm[] = [];
  if (st.lensLinear) out.push([1, 0, sol[iLin]], [0, 1, sol[iLin + 1]]);
  for (let q = 0; q < surf.length; q++) out.push([surf[q][0], surf[q][1], sol[iSurf + q]]);
  return out;
}

/** Spread (max - min) of a log surface over the samples, as a fraction. */
function surfaceSpread(terms: SurfaceTerm[], bl: Blocks, mask: Uint8Array): number {
  const ord = Math.max(1, ...terms.map(([i, j]) => Math.max(i, j)));
  const pu = new Float64Array(ord + 1);
  const pv = new Float64Array(ord + 1);
  let lo = Infinity;
  let hi = -Infinity;
  for (let s = 0; s < bl.n; s++) {
    if (!mask[s]) continue;
    legendreInto(bl.u[s], ord, pu);
    legendreInto(bl.v[s], ord, pv);
    let v = 0;
    for (const [i, j, c] of terms) v += c * pu[i] * pv[j];
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  return hi > lo ? Math.exp(hi - lo) - 1 : 0;
}

/**
 * Builds a falloff profile from flat frames. Throws EvenfieldError('falloff') when the frames differ
 * in size, are too small, or are unusable (clipped or dark).
 */
export function calibrateFromFlats(frames: RgbImage[], meta: FlatMeta = {}, opts: FlatOptions = {}): FlatCalibration {
  if (frames.length === 0) throw new EvenfieldError('falloff', 'no flat frames given');
  const { width, height } = frames[0];
  for (let k = 0; k < frames.length; k++) {
    const f = frames[k];
    if (f.width !== width || f.height !== height) {
      throw new EvenfieldError(
        'falloff',
        `${frameName(meta, k)} is ${f.width}×${f.height} but ${frameName(meta, 0)} is ${width}×${height}; ` +
          'all flat frames must be the same size',
        meta.names?.[k] ?? null,
      );
    }
    if (f.data.length !== width * height * 3) {
      throw new EvenfieldError('falloff', `${frameName(meta, k)} has ${f.data.length} values, expected ${width * height * 3}`);
    }
  }
  const scale = meta.scale ?? 1;
  const fullWidth = meta.fullWidth ?? width * scale;
  const fullHeight = meta.fullHeight ?? height * scale;
  if (Math.abs(width * scale - fullWidth) >= scale || Math.abs(height * scale - fullHeight) >= scale) {
    throw new EvenfieldError(
      'falloff',
      `flat frames are ${width}×${height} at decode scale 1/${scale}, which does not match a full size of ${fullWidth}×${fullHeight}`,
    );
  }
  if (width < 16 || height < 16) {
    throw new EvenfieldError('falloff', `flat frames are only ${width}×${height} pixels; need at least 16×16`);
  }
  const geom: FrameGeometry = { fullWidth, fullHeight };
  const orientations = meta.orientations ?? frames.map(() => 0 as const);
  if (orientations.length !== frames.length) {
    throw new EvenfieldError('falloff', `${orientations.length} orientations given for ${frames.length} flat frames`);
  }
  const clipLevel = opts.clipLevel ?? 0.98;
  const clipSigma = opts.frameClipSigma ?? 4;
  const fitColumns = opts.fitColumns ?? 96;
  const b = Math.max(1, Math.round(width / fitColumns));
  const warnings: string[] = [];

  // exposure levels and frame groups
  const levels = frames.map(centralLevel);
  levels.forEach((l, k) => {
    if (!(l > 1e-4)) {
      throw new EvenfieldError('falloff', `${frameName(meta, k)} is black (central level ${l.toExponential(2)}); cannot calibrate`, meta.names?.[k] ?? null);
    }
  });
  const groupKeys = [...new Set(orientations)].sort((a, b) => a - b);
  const groupIdx = orientations.map((o) => groupKeys.indexOf(o));
  const frameLevels = new Array<number>(frames.length).fill(1);
  const factors = new Array<number>(frames.length).fill(1);
  const stats: CombineStats = { rejected: 0, total: 0 };
  const sigmas: number[] = [];
  const samples: {
    u: number[];
    v: number[];
    R: number[];
    G: number[];
    B: number[];
    w: number[];
    group: number[];
  } = { u: [], v: [], R: [], G: [], B: [], w: [], group: [] };
  for (let gi = 0; gi < groupKeys.length; gi++) {
    const idx = frames.map((_, k) => k).filter((k) => groupIdx[k] === gi);
    const ref = median(idx.map((k) => levels[k]));
    for (const k of idx) {
      frameLevels[k] = levels[k] / ref;
      factors[k] = ref / levels[k];
      if (Math.abs(frameLevels[k] - 1) > 0.1) {
        warnings.push(`${frameName(meta, k)} is ${(100 * (frameLevels[k] - 1)).toFixed(1)} % off the other frames' level; scaled to match`);
      }
    }
    const gFrames = idx.map((k) => frames[k]);
    const gFactors = idx.map((k) => factors[k]);
    let sigmaRel = Infinity;
    if (gFrames.length >= 3) {
      sigmaRel = Math.max(frameSigma(gFrames, gFactors, clipLevel), 1e-4);
      sigmas.push(sigmaRel);
    }
    const blk = combineIntoBlocks(gFrames, gFactors, sigmaRel, clipSigma, clipLevel, b, stats);
    for (let i = 0; i < blk.nb; i++) {
      if (blk.bad[i] || blk.cnt[i] === 0) continue;
      const c = blk.cnt[i];
      const R = blk.sR[i] / c;
      const G = blk.sG[i] / c;
      const B = blk.sB[i] / c;
      const Y = WR * R + WG * G + WB * B;
      if (!(Y > 1e-5) || !(R > 0) || !(G > 0) || !(B > 0)) continue;
      samples.u.push(normU(blk.sx[i] / c, scale, fullWidth));
      samples.v.push(normV(blk.sy[i] / c, scale, fullHeight));
      samples.R.push(R);
      samples.G.push(G);
      samples.B.push(B);
      samples.w.push(c);
      samples.group.push(gi);
    }
  }
  if (groupKeys.every((o) => orientations.filter((x) => x === o).length < 3)) {
    warnings.push('fewer than 3 flat frames per orientation: no per-pixel outlier rejection across frames');
  }
  const bl: Blocks = {
    n: samples.u.length,
    u: Float64Array.from(samples.u),
    v: Float64Array.from(samples.v),
    R: Float64Array.from(samples.R),
    G: Float64Array.from(samples.G),
    B: Float64Array.from(samples.B),
    w: Float64Array.from(samples.w),
    group: Int32Array.from(samples.group),
  };
  const radialTerms = opts.radialTerms ?? 5;
  const surfaceOrder = opts.surfaceOrder ?? 4;
  const surf = surfaceTerms(2, surfaceOrder);
  const nParams = groupKeys.length + 4 + radialTerms + surf.length + 2;
  if (bl.n < 3 * nParams) {
    throw new EvenfieldError(
      'falloff',
      `only ${bl.n} usable blocks in the flat frames (need ${3 * nParams}); frames are too small, clipped or dark`,
    );
  }
  const totalBlocks = Math.ceil(width / b) * Math.ceil(height / b) * groupKeys.length;
  if (bl.n < 0.5 * totalBlocks) {
    warnings.push(`${(100 * (1 - bl.n / totalBlocks)).toFixed(0)} % of the flat frame area is clipped or dark and was ignored`);
  }

  const sourceTilt = opts.sourceTilt ?? true;
  const bothOrientations = groupKeys.length === 2;
  const centreOpt = opts.centre ?? 'fit';
  const st: FitSetup = {
    groups: groupKeys.length,
    groupSign: groupKeys.map((o) => (o === 180 ? -1 : 1)),
    sourceTilt,
    lensLinear: bothOrientations || !sourceTilt,
    radialTerms,
    surf,
    ridge: opts.surfaceRidge ?? 1e-3,
    fitCentre: centreOpt === 'fit',
    centre0: Array.isArray(centreOpt) ? [centreOpt[0], centreOpt[1]] : [0, 0],
    priorSigma: opts.centrePriorSigma ?? 0.1,
    robustK: opts.robustSigma ?? 3.5,
    geom,
  };
  const yLum = new Float64Array(bl.n);
  for (let s = 0; s < bl.n; s++) yLum[s] = Math.log(WR * bl.R[s] + WG * bl.G[s] + WB * bl.B[s]);
  const fit = fitLuminance(bl, yLum, st);

  // residual statistics (data / model - 1)
  let ss = 0;
  let mx = 0;
  let used = 0;
  for (let s = 0; s < bl.n; s++) {
    if (!fit.mask[s]) continue;
    const r = Math.expm1(fit.residual[s]);
    ss += r * r;
    mx = Math.max(mx, Math.abs(r));
    used++;
  }

  const residualRmsPct = 100 * Math.sqrt(ss / Math.max(1, used));
  const maxRms = opts.maxResidualRmsPct ?? 2;
  const named = framesUnlikeTheOthers(frames, orientations, clipLevel).map((k) => frameName(meta, k));
  if (residualRmsPct > maxRms) {
    throw new EvenfieldError(
      'falloff',
      `the flat frames do not fit one smooth lens falloff: the fit leaves ${residualRmsPct.toFixed(1)} % rms (largest ${(100 * mx).toFixed(0)} %), over the limit of ${maxRms} % rms` +
        (named.length ? `; unlike the other frames: ${named.join(', ')}` : '') +
        ': a frame that is not an even flat field (a photo of a panel with its bezel, a shadow, a reflection)? Look at each frame, or calibrate them one at a time',
      named.length === 1 ? named[0] : null,
    );
  }

  if (named.length) {
    warnings.push(
      `unlike the other flat frames: ${named.join(', ')} (not an even flat field?); the pixels where ${named.length > 1 ? 'they differ' : 'it differs'} were left out as outliers, but check ${named.length > 1 ? 'them' : 'it'}`,
    );
  }

  const storedTerms = opts.storedRadialTerms ?? Math.max(5, radialTerms);
  const conv = logRadialToPolynomial(fit.g, storedTerms);

  // per-channel shading
  let channels: FalloffModel['channels'] = null;
  const perChannel = opts.perChannel ?? 'auto';
  if (perChannel !== 'never') {
    const order = opts.channelOrder ?? 4;
    const surfs: SurfaceTerm[][] = [];
    let spread = 0;
    for (const ch of [bl.R, bl.G, bl.B]) {
      const yc = new Float64Array(bl.n);
      for (let s = 0; s < bl.n; s++) yc[s] = Math.log(ch[s]) - yLum[s];
      const terms = fitChannel(bl, yc, fit.mask, st, order);
      surfs.push(terms);
      spread = Math.max(spread, surfaceSpread(terms, bl, fit.mask));
    }
    const threshold = (opts.channelThresholdPct ?? 0.3) / 100;
    if (perChannel === 'always' || spread > threshold) {
      channels = { r: surfs[0], g: surfs[1], b: surfs[2] };
    }
  }

  const model: FalloffModel = {
    centre: fit.centre,
    radial: conv.k,
    surfaceOrder: Math.max(surfaceOrder, fit.surface.length ? 1 : 0, channels ? opts.channelOrder ?? 4 : 0),
    surface: fit.surface,
    channels,
  };
  const notes = [...fit.notes];
  if (st.fitCentre) {
    notes.push(
      'optical centre fitted; linear ramps attributed to the source' +
        (bothOrientations ? ' and the lens, separated by the 180° frames' : ''),
    );
  } else if (!sourceTilt) {
    notes.push('source assumed uniform: linear ramps kept as lens shading');
  } else {
    notes.push('optical centre fixed; linear ramps attributed to the source and removed');
  }
  const ex = meta.exposure ?? null;
  const profile: FalloffProfile = {
    format: PROFILE_FORMAT,
    version: PROFILE_VERSION,
    kind: 'flat-frames',
    createdAt: meta.createdAt ?? null,
    camera: {
      make: ex?.make ?? null,
      model: ex?.model ?? null,
      lens: ex?.lens ?? null,
      focalLengthMm: ex?.focalLengthMm ?? null,
      focal35mm: ex?.focalLength35mm ?? null,
      fNumber: ex?.fNumber ?? null,
      imageWidth: fullWidth,
      imageHeight: fullHeight,
    },
    model,
    fit: {
      frames: frames.length,
      samples: used,
      rejectedSamples: bl.n - used,
      residualRmsPct,
      residualMaxPct: 100 * mx,
      removedTiltPct: fit.tilt ? { x: 100 * Math.expm1(2 * fit.tilt[0]), y: 100 * Math.expm1(2 * fit.tilt[1]) } : null,
      radialConversionErrorPct: conv.maxErrorPct,
      cornerTransmission: modelCornerTransmission(model, geom),
      centreUncertainty: fit.centreSe,
      conditioning: null,
      notes,
    },
  };
  if (!ex) warnings.push('no EXIF for the flat frames: the profile cannot be checked against photos later');
  return {
    profile,
    frameLevels,
    rejectedPixelFraction: stats.total ? stats.rejected / stats.total : 0,
    frameNoisePct: sigmas.length ? 100 * median(sigmas) : null,
    warnings,
  };
}
