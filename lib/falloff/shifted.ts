// Falloff calibration from three or more photos of the same panel, with the camera moved between
// shots. The panel need not be uniform: its own pattern and the lens falloff are separated because
// the pattern moves with the panel while the falloff stays put in the frame.
//
// Model (log domain, one sample per image block k, x):
//
//   log I_k(x) = p(u, v) + f(x) + e_k
//
//   p      the panel's own log luminance, bilinear between nodes on a (cells + 1) grid over the panel
//          (u, v from the frame's panel -> image homography),
//   f(x)   log transmission: sum g_i phi_i(t), t = r^2 about the optical centre, with the radial basis
//          phi_i(t) = P_i(2t - 1) - P_i(-1) (shifted Legendre, 0 at the centre) for a well-conditioned
//          system, plus optionally even-order Legendre surface terms in (u, v) camera coordinates,
//   e_k    log exposure of photo k (e_0 = 0).
//
// This is the log-domain least-squares gain calibration of Kuhn, Lin and Loranz (1991) with the
// per-pixel gain replaced by a low-order radial model. Gauge: T = 1 at the optical centre, e_0 = 0
// and the panel pattern is normalised to mean 1 afterwards.
//
// What cannot be separated: a linear ramp of f is exactly a ramp of the panel plus a change of e_k
// for every camera translation, so f carries no linear terms and a lens ramp (such as the first-order
// effect of a decentred lens) stays in the panel estimate. A decentred lens is still handled: the
// centre is fitted (Gauss-Newton, weak prior towards the image centre) from the higher-order terms.
//
// How well the two are separated is measured on the normal equations: eliminating the panel and
// exposures leaves the Schur complement S of the falloff block F; the generalised eigenvalues of
// (S, F) are the fractions of each falloff direction's information that survive the unknown panel.
// The smallest is reported as `separability`; the calibration is refused when it is too small, when
// the camera hardly moved, or when the photos do not share enough of the panel.

import { CholeskyDecomposition, Matrix, inverse } from 'ml-matrix';
import { EvenfieldError } from '../errors.js';
import { applyHomography, invertHomography, panelToCamera } from '../geometry/index.js';
import type { Corners, ExposureRecord, Homography, Plane } from '../types.js';
import {
  type FrameGeometry,
  type SurfaceTerm,
  farthestCornerDistance,
  legendreDerivInto,
  legendreInto,
  normU,
  normV,
  surfaceTerms,
} from './basis.js';
import { inverseColumns, logCurveToPolynomial, median, robustSigma, solveSymmetric, symmetricEigenvalues } from './lsq.js';
import { type FalloffProfile, PROFILE_FORMAT, PROFILE_VERSION, modelCornerTransmission } from './profile.js';

export interface ShiftedFrame {
  /** linear luminance of the photo (decoded size; all frames the same size) */
  image: Plane;
  /** panel (u, v in 0..1) -> image pixel homography of this photo, or the four panel corners in image pixels */
  panelToImage: Homography | Corners;
  /** name for messages (file name) */
  name?: string;
}

export interface ShiftedMeta {
  exposure?: ExposureRecord | null;
  fullWidth?: number;
  fullHeight?: number;
  scale?: number;
  createdAt?: string | null;
}

export interface ShiftedOptions {
  /** cells of the panel-pattern grid across and down (default [24, 14]) */
  panelCells?: [number, number];
  /** number of radial terms (default 4) */
  radialTerms?: number;
  /** number of stored radial coefficients k1..kn (default 5) */
  storedRadialTerms?: number;
  /** highest order of even-order non-radial surface terms, 0 = none (default 0) */
  surfaceOrder?: number;
  /** 'fit' (default), 'image', or a normalised centre [cu, cv] */
  centre?: 'fit' | 'image' | [number, number];
  /** sd of the prior pulling a fitted centre to the image centre, normalised units (default 0.1) */
  centrePriorSigma?: number;
  /** blocks across the frame (default 96) */
  fitColumns?: number;
  /** panel border excluded from the fit, fraction of the panel (default 0.03) */
  margin?: number;
  /** values at or above this are clipped (default 0.98) */
  clipLevel?: number;
  /** fit residuals beyond this many robust sigmas are rejected (default 3.5) */
  robustSigma?: number;
  /** refuse when no two photos are this far apart (fraction of the frame, default 0.1) */
  minShiftFraction?: number;
  /** refuse when the separability is below this (default 0.02): systematic errors that differ between
   *  the photos (viewing-angle changes of the panel, reflections) are amplified by about
   *  1 / sqrt(separability), 7x at 0.02 */
  minSeparability?: number;
  /** refuse when less than this fraction of the seen panel is seen by two or more photos (default 0.25) */
  minOverlapFraction?: number;
}

export interface ShiftedCalibration {
  profile: FalloffProfile;
  /** the panel's own pattern on the node grid, mean 1 */
  panel: Plane;
  /** relative exposure of each photo, first = 1 */
  exposures: number[];
  /** largest camera shift between two photos, fraction of the frame */
  maxShiftFraction: number;
  /** fraction of the seen panel nodes seen in two or more photos */
  overlapFraction: number;
  /** fraction of the frame's blocks covered by the panel in at least one photo */
  frameCoverage: number;
  warnings: string[];
}

interface Samples {
  n: number;
  frame: Int32Array;
  node: Int32Array; // 4 per sample
  nw: Float64Array; // 4 per sample
  cu: Float64Array; // normalised camera coordinates
  cv: Float64Array;
  y: Float64Array;
  w: Float64Array;
}

function frameLabel(f: ShiftedFrame, k: number): string {
  return f.name ?? `photo ${k + 1}`;
}

function toHomography(h: Homography | Corners): Homography {
  if (h.length === 9 && typeof h[0] === 'number') return h as Homography;
  if (h.length === 4) return panelToCamera(h as Corners);
  throw new EvenfieldError('falloff', 'panelToImage must be 9 homography numbers or 4 corners');
}

/** Radial basis phi_i(t) = P_i(2t - 1) - P_i(-1), i = 1..R, and optionally d phi_i / dt. */
function radialBasis(t: number, R: number, p: Float64Array, dp: Float64Array, out: Float64Array, dOut: Float64Array | null) {
  legendreInto(2 * t - 1, R, p);
  for (let i = 1; i <= R; i++) out[i - 1] = p[i] - (i % 2 ? -1 : 1);
  if (dOut) {
    legendreDerivInto(p, R, dp);
    for (let i = 1; i <= R; i++) dOut[i - 1] = 2 * dp[i];
  }
}

interface SolveState {
  centre: [number, number];
  g: Float64Array | null;
  fitCentre: boolean;
}

interface SolveResult {
  sol: Float64Array;
  N: Float64Array;
  m: number;
  residual: Float64Array;
  sigma0sq: number;
}

/**
 * Calibrates the falloff from shifted photos of one panel. Throws EvenfieldError('falloff') when the
 * photos differ in size, do not overlap on the panel, or the shifts are too small to separate lens and
 * panel.
 */
export function calibrateFromShifted(
  frames: ShiftedFrame[],
  meta: ShiftedMeta = {},
  opts: ShiftedOptions = {},
): ShiftedCalibration {
  const K = frames.length;
  if (K < 3) {
    throw new EvenfieldError('falloff', `calibration from shifted photos needs at least 3 photos, got ${K}`);
  }
  const { width, height } = frames[0].image;
  frames.forEach((f, k) => {
    if (f.image.width !== width || f.image.height !== height) {
      throw new EvenfieldError(
        'falloff',
        `${frameLabel(f, k)} is ${f.image.width}×${f.image.height} but ${frameLabel(frames[0], 0)} is ${width}×${height}; ` +
          'all shifted photos must be the same size',
        f.name ?? null,
      );
    }
  });
  const scale = meta.scale ?? 1;
  const fullWidth = meta.fullWidth ?? width * scale;
  const fullHeight = meta.fullHeight ?? height * scale;
  const geom: FrameGeometry = { fullWidth, fullHeight };
  const [nu, nv] = opts.panelCells ?? [24, 14];
  const nU = nu + 1;
  const Np = nU * (nv + 1);
  const R = opts.radialTerms ?? 4;
  const surf = surfaceTerms(2, opts.surfaceOrder ?? 0).filter(([i, j]) => (i + j) % 2 === 0);
  const margin = opts.margin ?? 0.03;
  const clipLevel = opts.clipLevel ?? 0.98;
  const robustK = opts.robustSigma ?? 3.5;
  const b = Math.max(1, Math.round(width / (opts.fitColumns ?? 96)));
  const warnings: string[] = [];

  const Hs = frames.map((f) => toHomography(f.panelToImage));
  const Ginv = Hs.map((h) => invertHomography(h));

  // ---- samples
  const nbx = Math.ceil(width / b);
  const nby = Math.ceil(height / b);
  const covered = new Uint8Array(nbx * nby);
  const S = {
    frame: [] as number[],
    node: [] as number[],
    nw: [] as number[],
    cu: [] as number[],
    cv: [] as number[],
    y: [] as number[],
    w: [] as number[],
  };
  const perFrame = new Array<number>(K).fill(0);
  const lo = margin;
  const hi = 1 - margin;
  for (let k = 0; k < K; k++) {
    const img = frames[k].image.data;
    const G = Ginv[k];
    for (let by = 0; by < nby; by++) {
      const y0 = by * b;
      const y1 = Math.min(height, y0 + b);
      for (let bx = 0; bx < nbx; bx++) {
        const x0 = bx * b;
        const x1 = Math.min(width, x0 + b);
        // all four block corners must be well inside the panel
        let inside = true;
        for (const [cx, cy] of [
          [x0 - 0.5, y0 - 0.5],
          [x1 - 0.5, y0 - 0.5],
          [x0 - 0.5, y1 - 0.5],
          [x1 - 0.5, y1 - 0.5],
        ] as const) {
          const [pu, pv] = applyHomography(G, [cx, cy]);
          if (!(pu >= lo && pu <= hi && pv >= lo && pv <= hi)) {
            inside = false;
            break;
          }
        }
        if (!inside) continue;
        let s = 0;
        let c = 0;
        let bad = false;
        for (let y = y0; y < y1 && !bad; y++) {
          for (let x = x0; x < x1; x++) {
            const v = img[y * width + x];
            if (!(v > 0) || v >= clipLevel) {
              bad = true;
              break;
            }
            s += v;
            c++;
          }
        }
        if (bad || c === 0) continue;
        const xc = (x0 + x1 - 1) / 2;
        const yc = (y0 + y1 - 1) / 2;
        const [pu, pv] = applyHomography(G, [xc, yc]);
        const fu = pu * nu;
        const fv = pv * nv;
        const i0 = Math.min(nu - 1, Math.max(0, Math.floor(fu)));
        const j0 = Math.min(nv - 1, Math.max(0, Math.floor(fv)));
        const a = fu - i0;
        const bb = fv - j0;
        const n00 = j0 * nU + i0;
        S.node.push(n00, n00 + 1, n00 + nU, n00 + nU + 1);
        S.nw.push((1 - a) * (1 - bb), a * (1 - bb), (1 - a) * bb, a * bb);
        S.frame.push(k);
        S.cu.push(normU(xc, scale, fullWidth));
        S.cv.push(normV(yc, scale, fullHeight));
        S.y.push(Math.log(s / c));
        S.w.push(c);
        covered[by * nbx + bx] = 1;
        perFrame[k]++;
      }
    }
  }
  perFrame.forEach((c, k) => {
    if (c < 20) {
      throw new EvenfieldError(
        'falloff',
        `${frameLabel(frames[k], k)}: the panel covers too little of the photo (${c} usable blocks) or is clipped/black`,
        frames[k].name ?? null,
      );
    }
  });
  const sm: Samples = {
    n: S.frame.length,
    frame: Int32Array.from(S.frame),
    node: Int32Array.from(S.node),
    nw: Float64Array.from(S.nw),
    cu: Float64Array.from(S.cu),
    cv: Float64Array.from(S.cv),
    y: Float64Array.from(S.y),
    w: Float64Array.from(S.w),
  };

  // ---- overlap on the panel
  const seen = new Uint8Array(Np * K);
  const nodeWeight = new Float64Array(Np);
  for (let s = 0; s < sm.n; s++) {
    for (let q = 0; q < 4; q++) {
      const wq = sm.nw[s * 4 + q];
      if (wq <= 0) continue;
      const nd = sm.node[s * 4 + q];
      seen[nd * K + sm.frame[s]] = 1;
      nodeWeight[nd] += sm.w[s] * wq * wq;
    }
  }
  let seenAny = 0;
  let seenTwo = 0;
  for (let nd = 0; nd < Np; nd++) {
    let c = 0;
    for (let k = 0; k < K; k++) c += seen[nd * K + k];
    if (c >= 1) seenAny++;
    if (c >= 2) seenTwo++;
  }
  const overlapFraction = seenAny ? seenTwo / seenAny : 0;
  const minOverlap = opts.minOverlapFraction ?? 0.25;
  if (overlapFraction < minOverlap) {
    throw new EvenfieldError(
      'falloff',
      `the photos do not overlap on the panel: only ${(100 * overlapFraction).toFixed(0)} % of the panel seen is in two or more photos ` +
        `(need ${(100 * minOverlap).toFixed(0)} %); take the photos so that each shows most of the panel`,
    );
  }
  // every photo must share part of the panel with the others (else its exposure is undetermined)
  const parent = frames.map((_, k) => k);
  const find = (k: number): number => (parent[k] === k ? k : (parent[k] = find(parent[k])));
  for (let nd = 0; nd < Np; nd++) {
    let first = -1;
    for (let k = 0; k < K; k++) {
      if (!seen[nd * K + k]) continue;
      if (first < 0) first = k;
      else parent[find(k)] = find(first);
    }
  }
  for (let k = 1; k < K; k++) {
    if (find(k) !== find(0)) {
      throw new EvenfieldError(
        'falloff',
        `${frameLabel(frames[k], k)} shows no part of the panel that ${frameLabel(frames[0], 0)} and the others show; the photos must overlap`,
        frames[k].name ?? null,
      );
    }
  }

  // ---- camera shifts
  let maxShift = 0;
  for (let a = 0; a < K; a++) {
    for (let c = a + 1; c < K; c++) {
      let acc = 0;
      let n = 0;
      for (let i = 0; i <= 4; i++) {
        for (let j = 0; j <= 4; j++) {
          const P: [number, number] = [0.1 + 0.2 * i, 0.1 + 0.2 * j];
          const pa = applyHomography(Hs[a], P);
          const pc = applyHomography(Hs[c], P);
          acc += Math.hypot((pa[0] - pc[0]) / width, (pa[1] - pc[1]) / height);
          n++;
        }
      }
      maxShift = Math.max(maxShift, acc / n);
    }
  }
  const minShift = opts.minShiftFraction ?? 0.1;
  if (maxShift < minShift) {
    throw new EvenfieldError(
      'falloff',
      `the camera shifts are too small to separate lens falloff from the panel's own pattern: the largest move between ` +
        `photos is ${(100 * maxShift).toFixed(1)} % of the frame (need at least ${(100 * minShift).toFixed(0)} %); ` +
        'move the camera further between shots',
    );
  }

  // ---- least squares
  const iE = Np;
  const iRad = Np + K - 1;
  const iSurf = iRad + R;
  const iCen = iSurf + surf.length;
  const surfOrder = Math.max(1, ...surf.map(([i, j]) => Math.max(i, j)));
  const PU = new Float64Array(sm.n * (surfOrder + 1));
  const PV = new Float64Array(sm.n * (surfOrder + 1));
  {
    const tmp = new Float64Array(surfOrder + 1);
    for (let s = 0; s < sm.n; s++) {
      legendreInto(sm.cu[s], surfOrder, tmp);
      PU.set(tmp, s * (surfOrder + 1));
      legendreInto(sm.cv[s], surfOrder, tmp);
      PV.set(tmp, s * (surfOrder + 1));
    }
  }
  const medNodeW = median(Array.from(nodeWeight).filter((v) => v > 0));
  const weak = new Uint8Array(Np);
  for (let nd = 0; nd < Np; nd++) weak[nd] = nodeWeight[nd] < 1e-3 * medNodeW ? 1 : 0;
  const mask = new Uint8Array(sm.n).fill(1);
  const hw = fullWidth / 2;
  const hh = fullHeight / 2;
  const lp = new Float64Array(R + 1);
  const ldp = new Float64Array(R + 1);
  const phi = new Float64Array(R);
  const dphi = new Float64Array(R);
  const priorSigma = opts.centrePriorSigma ?? 0.1;

  const solve = (st: SolveState, sigmaPrev: number): SolveResult => {
    const useCen = st.fitCentre && st.g !== null;
    const m = iCen + (useCen ? 2 : 0);
    const N = new Float64Array(m * m);
    const rhs = new Float64Array(m);
    const idx = new Int32Array(4 + 1 + R + surf.length + 2);
    const val = new Float64Array(idx.length);
    const rMax = farthestCornerDistance(st.centre, geom);
    const r2 = rMax * rMax;
    const row = (s: number): number => {
      let q = 0;
      for (let c = 0; c < 4; c++) {
        idx[q] = sm.node[s * 4 + c];
        val[q++] = sm.nw[s * 4 + c];
      }
      const k = sm.frame[s];
      if (k > 0) {
        idx[q] = iE + k - 1;
        val[q++] = 1;
      }
      const du = (sm.cu[s] - st.centre[0]) * hw;
      const dv = (sm.cv[s] - st.centre[1]) * hh;
      const t = (du * du + dv * dv) / r2;
      radialBasis(t, R, lp, ldp, phi, useCen ? dphi : null);
      for (let i = 0; i < R; i++) {
        idx[q] = iRad + i;
        val[q++] = phi[i];
      }
      for (let a = 0; a < surf.length; a++) {
        idx[q] = iSurf + a;
        val[q++] = PU[s * (surfOrder + 1) + surf[a][0]] * PV[s * (surfOrder + 1) + surf[a][1]];
      }
      if (useCen && st.g) {
        let dG = 0;
        for (let i = 0; i < R; i++) dG += st.g[i] * dphi[i];
        idx[q] = iCen;
        val[q++] = (dG * (-2 * du * hw)) / r2;
        idx[q] = iCen + 1;
        val[q++] = (dG * (-2 * dv * hh)) / r2;
      }
      return q;
    };
    for (let s = 0; s < sm.n; s++) {
      if (!mask[s]) continue;
      const q = row(s);
      const w = sm.w[s];
      const ys = sm.y[s];
      for (let a = 0; a < q; a++) {
        const wa = w * val[a];
        const ia = idx[a] * m;
        rhs[idx[a]] += wa * ys;
        for (let c = 0; c < q; c++) N[ia + idx[c]] += wa * val[c];
      }
    }
    // tie weakly observed panel nodes to their neighbours (does not bias well-observed nodes)
    const lam = 1e-2 * medNodeW;
    const tie = (a: number, c: number) => {
      N[a * m + a] += lam;
      N[c * m + c] += lam;
      N[a * m + c] -= lam;
      N[c * m + a] -= lam;
    };
    for (let j = 0; j <= nv; j++) {
      for (let i = 0; i <= nu; i++) {
        const a = j * nU + i;
        if (i < nu && (weak[a] || weak[a + 1])) tie(a, a + 1);
        if (j < nv && (weak[a] || weak[a + nU])) tie(a, a + nU);
      }
    }
    for (let a = 0; a < m; a++) {
      N[a * m + a] += 1e-12 * (N[a * m + a] + 1);
      for (let c = 0; c < a; c++) {
        const v = 0.5 * (N[a * m + c] + N[c * m + a]);
        N[a * m + c] = v;
        N[c * m + a] = v;
      }
    }
    if (useCen) {
      const lc = sigmaPrev / (priorSigma * priorSigma);
      N[iCen * m + iCen] += lc;
      N[(iCen + 1) * m + iCen + 1] += lc;
      rhs[iCen] -= lc * st.centre[0];
      rhs[iCen + 1] -= lc * st.centre[1];
    }
    const sol = solveSymmetric(N, rhs, m);
    const residual = new Float64Array(sm.n);
    let ssr = 0;
    let used = 0;
    for (let s = 0; s < sm.n; s++) {
      const q = row(s);
      let f = 0;
      for (let a = 0; a < q; a++) f += val[a] * sol[idx[a]];
      residual[s] = sm.y[s] - f;
      if (mask[s]) {
        ssr += sm.w[s] * residual[s] * residual[s];
        used++;
      }
    }
    return { sol, N, m, residual, sigma0sq: ssr / Math.max(1, used - m) };
  };

  const centreOpt = opts.centre ?? 'fit';
  const fitCentre = centreOpt === 'fit';
  const state: SolveState = {
    centre: Array.isArray(centreOpt) ? [centreOpt[0], centreOpt[1]] : [0, 0],
    g: null,
    fitCentre,
  };
  let res = solve(state, 0);
  let centreSe: [number, number] | null = null;
  let lastCentreSolve: SolveResult | null = null;
  const notes: string[] = [];
  for (let it = 0; it < 20; it++) {
    const sig = Math.max(robustSigma(res.residual, mask), 1e-5);
    let changed = false;
    if (it < 5) {
      for (let s = 0; s < sm.n; s++) {
        const keep = Math.abs(res.residual[s]) <= robustK * sig ? 1 : 0;
        if (keep !== mask[s]) {
          mask[s] = keep;
          changed = true;
        }
      }
    }
    let step = 0;
    if (state.fitCentre && state.g !== null && res.m > iCen) {
      let d0 = res.sol[iCen];
      let d1 = res.sol[iCen + 1];
      step = Math.hypot(d0, d1);
      if (step > 0.05) {
        d0 *= 0.05 / step;
        d1 *= 0.05 / step;
      }
      state.centre = [state.centre[0] + d0, state.centre[1] + d1];
      lastCentreSolve = res;
      if (Math.abs(state.centre[0]) > 0.5 || Math.abs(state.centre[1]) > 0.5) {
        notes.push('fitted optical centre ran far from the image centre; fell back to the image centre');
        state.centre = [0, 0];
        state.fitCentre = false;
        lastCentreSolve = null;
      }
    }
    state.g = res.sol.slice(iRad, iRad + R);
    if (!state.fitCentre && !changed && it >= 1) break;
    if (state.fitCentre && it >= 2 && !changed && step < 1e-5) break;
    res = solve(state, res.sigma0sq);
  }
  if (lastCentreSolve) {
    const inv = inverseColumns(lastCentreSolve.N, lastCentreSolve.m, [iCen, iCen + 1]);
    const s2 = lastCentreSolve.sigma0sq;
    centreSe = [Math.sqrt(s2 * inv.get(iCen, 0)), Math.sqrt(s2 * inv.get(iCen + 1, 1))];
  }
  // final solve at the found centre without centre columns
  state.fitCentre = false;
  res = solve(state, res.sigma0sq);
  const { sol, N, m } = res;
  if (fitCentre && centreSe) notes.push('optical centre fitted from the higher-order falloff terms');
  notes.push('linear ramps of the lens cannot be told from ramps of the panel with shifted photos; they are left in the panel');

  // ---- conditioning of the falloff part
  const nb = iRad;
  const nf = m - nb;
  const Bm = new Matrix(nb, nb);
  const Cm = new Matrix(nb, nf);
  const Fm = new Matrix(nf, nf);
  for (let a = 0; a < nb; a++) {
    for (let c = 0; c < nb; c++) Bm.set(a, c, N[a * m + c]);
    for (let c = 0; c < nf; c++) Cm.set(a, c, N[a * m + nb + c]);
  }
  for (let a = 0; a < nf; a++) for (let c = 0; c < nf; c++) Fm.set(a, c, N[(nb + a) * m + nb + c]);
  const cholB = new CholeskyDecomposition(Bm);
  const X = cholB.isPositiveDefinite() ? cholB.solve(Cm) : inverse(Bm, true).mmul(Cm);
  const Sc = Fm.clone().sub(Cm.transpose().mmul(X));
  for (let a = 0; a < nf; a++) for (let c = 0; c < a; c++) {
    const v = 0.5 * (Sc.get(a, c) + Sc.get(c, a));
    Sc.set(a, c, v);
    Sc.set(c, a, v);
  }
  const Lf = new CholeskyDecomposition(Fm).lowerTriangularMatrix;
  const Linv = inverse(Lf);
  const Mgen = Linv.mmul(Sc).mmul(Linv.transpose());
  const genEig = symmetricEigenvalues(Mgen);
  const separability = Math.max(0, Math.min(1, genEig[0]));
  const dS = new Matrix(nf, nf);
  const dF = new Matrix(nf, nf);
  for (let a = 0; a < nf; a++) {
    for (let c = 0; c < nf; c++) {
      dS.set(a, c, Sc.get(a, c) / Math.sqrt(Sc.get(a, a) * Sc.get(c, c)));
      dF.set(a, c, Sc.get(a, c) / Math.sqrt(Fm.get(a, a) * Fm.get(c, c)));
    }
  }
  const eS = symmetricEigenvalues(dS);
  const eF = symmetricEigenvalues(dF);
  const conditionNumber = Math.sqrt(Math.max(eS[eS.length - 1], 0) / Math.max(eS[0], 1e-300));
  const smallestSingularValue = Math.sqrt(Math.max(eF[0], 0));
  // uncertainty of log T at the farthest corner
  const rMaxF = farthestCornerDistance(state.centre, geom);
  let worstVar = 0;
  const Sinv = inverse(Sc, true);
  for (const cu of [-1, 1]) {
    for (const cv of [-1, 1]) {
      const du = (cu - state.centre[0]) * hw;
      const dv = (cv - state.centre[1]) * hh;
      radialBasis((du * du + dv * dv) / (rMaxF * rMaxF), R, lp, ldp, phi, null);
      const bvec = new Float64Array(nf);
      for (let i = 0; i < R; i++) bvec[i] = phi[i];
      const pu = legendreInto(cu, surfOrder, new Float64Array(surfOrder + 1));
      const pv = legendreInto(cv, surfOrder, new Float64Array(surfOrder + 1));
      const pu0 = legendreInto(state.centre[0], surfOrder, new Float64Array(surfOrder + 1));
      const pv0 = legendreInto(state.centre[1], surfOrder, new Float64Array(surfOrder + 1));
      for (let a = 0; a < surf.length; a++) {
        bvec[R + a] = pu[surf[a][0]] * pv[surf[a][1]] - pu0[surf[a][0]] * pv0[surf[a][1]];
      }
      let v = 0;
      for (let a = 0; a < nf; a++) for (let c = 0; c < nf; c++) v += bvec[a] * Sinv.get(a, c) * bvec[c];
      worstVar = Math.max(worstVar, v);
    }
  }
  const cornerUncertaintyPct = 100 * Math.sqrt(res.sigma0sq * worstVar);
  const minSep = opts.minSeparability ?? 0.02;
  if (separability < minSep) {
    throw new EvenfieldError(
      'falloff',
      `the photos cannot separate lens falloff from the panel's own pattern (separability ${separability.toFixed(3)}, ` +
        `need ${minSep}); shift the camera further between shots or add photos with the panel in other parts of the frame`,
    );
  }

  // ---- results
  const g = Array.from(sol.subarray(iRad, iRad + R));
  const G = (t: number): number => {
    radialBasis(t, R, lp, ldp, phi, null);
    let s = 0;
    for (let i = 0; i < R; i++) s += g[i] * phi[i];
    return s;
  };
  const conv = logCurveToPolynomial(G, opts.storedRadialTerms ?? 5);
  const surface: SurfaceTerm[] = surf.map(([i, j], a) => [i, j, sol[iSurf + a]]);

  let ss = 0;
  let mx = 0;
  let used = 0;
  for (let s = 0; s < sm.n; s++) {
    if (!mask[s]) continue;
    const r = Math.expm1(res.residual[s]);
    ss += r * r;
    mx = Math.max(mx, Math.abs(r));
    used++;
  }
  // panel pattern, mean 1 over observed nodes; exposures relative to the first photo
  let lmean = 0;
  let ln = 0;
  for (let nd = 0; nd < Np; nd++) {
    if (!weak[nd]) {
      lmean += sol[nd];
      ln++;
    }
  }
  lmean /= Math.max(1, ln);
  // also remove the log-surface value at the centre from the pattern scale (T(centre) = 1)
  const panelData = new Float32Array(Np);
  let pm = 0;
  for (let nd = 0; nd < Np; nd++) {
    panelData[nd] = Math.exp(sol[nd] - lmean);
    if (!weak[nd]) pm += panelData[nd];
  }
  pm /= Math.max(1, ln);
  for (let nd = 0; nd < Np; nd++) panelData[nd] /= pm;
  const exposures = [1, ...Array.from(sol.subarray(iE, iE + K - 1), (v) => Math.exp(v))];

  let cov = 0;
  for (const c of covered) cov += c;
  const frameCoverage = cov / covered.length;
  if (frameCoverage < 0.6) {
    warnings.push(
      `the panel covered only ${(100 * frameCoverage).toFixed(0)} % of the frame across all photos; the falloff elsewhere (corners) is extrapolated`,
    );
  }

  const model = {
    centre: state.centre,
    radial: conv.k,
    surfaceOrder: surf.length ? Math.max(...surf.map(([i, j]) => i + j)) : 0,
    surface,
    channels: null,
  };
  const ex = meta.exposure ?? null;
  const profile: FalloffProfile = {
    format: PROFILE_FORMAT,
    version: PROFILE_VERSION,
    kind: 'shifted-photos',
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
      frames: K,
      samples: used,
      rejectedSamples: sm.n - used,
      residualRmsPct: 100 * Math.sqrt(ss / Math.max(1, used)),
      residualMaxPct: 100 * mx,
      removedTiltPct: null,
      radialConversionErrorPct: conv.maxErrorPct,
      cornerTransmission: modelCornerTransmission(model, geom),
      centreUncertainty: fitCentre ? centreSe : null,
      conditioning: { separability, conditionNumber, smallestSingularValue, cornerUncertaintyPct },
      notes,
    },
  };
  if (!ex) warnings.push('no EXIF for the photos: the profile cannot be checked against photos later');
  return {
    profile,
    panel: { width: nU, height: nv + 1, data: panelData },
    exposures,
    maxShiftFraction: maxShift,
    overlapFraction,
    frameCoverage,
    warnings,
  };
}
