// Sub-pixel refinement of the four panel edges from luminance profiles across each edge.
//
// Each profile is a run of samples along the edge normal (outward positive), averaged over a few taps
// along the edge. The inside and outside levels are straight-line fits to the two ends of the profile
// (so falloff and smooth glare gradients are followed), the profile is normalised to 1 inside and 0
// outside, and the edge position is found by the area method: for a step blurred by any symmetric
// spread, the integral of the normalised profile over a window equals the distance from the window's
// inside end to the edge. Integrating the linear interpolant of pixel values makes this free of the
// "pixel locking" bias of interpolated 50 % crossings. Edge lines are then fitted to the edge points by
// total least squares with Tukey biweights (IRLS).

import type { Plane, Point } from '../types.js';
import type { Line } from './quad.js';

export interface EdgeOptions {
  /** Largest number of profiles per edge. */
  maxProfilesPerEdge: number;
  /** Fraction of each side's length left out next to each corner. */
  cornerMargin: number;
  /** Half-width (pixels) of the along-edge averaging of each profile sample. */
  profileHalfWidthPx: number;
  /** A profile is used only if inside level >= minEdgeRatio * outside level. */
  minEdgeRatio: number;
  /** A profile is used only if its step exceeds this many times its own noise. */
  minStepSnr: number;
  /** A profile is dropped if its log contrast is below this fraction of the edge's median log contrast. */
  glareContrastFraction: number;
  /** Largest level gradient across an edge, as a fraction of the level per pixel (steeper is clamped). */
  maxLevelSlope: number;
}

export interface ProfileResult {
  /** point on the current line where the profile starts */
  base: Point;
  /** edge position along the outward normal, relative to base, pixels */
  offset: number;
  /** inside / outside levels at the edge */
  inside: number;
  outside: number;
  /** rms residual of the level fits (noise of one averaged sample) */
  noise: number;
  ok: boolean;
  /** the profile ran off the image */
  offFrame: boolean;
}

export interface EdgeFit {
  line: Line;
  /** outward unit normal (nx, ny) and unit direction along the edge */
  normal: Point;
  direction: Point;
  profiles: ProfileResult[];
  /** IRLS weights of the profiles (0 = rejected) */
  weights: Float64Array;
  /** rms perpendicular distance of the edge points kept in the fit (non-zero weight) to the line */
  residualRms: number;
  /** number of points with non-zero weight */
  inliers: number;
  /** median inside/outside ratio over the inliers */
  contrastRatio: number;
  /** median step / noise over the inliers */
  snr: number;
  /** number of profiles that ran off the image */
  offFrame: number;
  /** 'peak' mode: median full width at half maximum of the profiles' luminance drop (line spread), px */
  lsfFwhm: number;
}

/** Bilinear sample; NaN outside the span of pixel centres. */
function bilinear(p: Plane, x: number, y: number): number {
  const { width: W, height: H, data } = p;
  if (!(x >= 0 && y >= 0 && x <= W - 1 && y <= H - 1)) return Number.NaN;
  let x0 = Math.floor(x);
  let y0 = Math.floor(y);
  if (x0 >= W - 1) x0 = W - 2;
  if (y0 >= H - 1) y0 = H - 2;
  if (x0 < 0) x0 = 0;
  if (y0 < 0) y0 = 0;
  const fx = x - x0;
  const fy = y - y0;
  const k = y0 * W + x0;
  const a = data[k];
  const b = W > 1 ? data[k + 1] : a;
  const c = H > 1 ? data[k + W] : a;
  const d = W > 1 && H > 1 ? data[k + W + 1] : c;
  return (a * (1 - fx) + b * fx) * (1 - fy) + (c * (1 - fx) + d * fx) * fy;
}

function windowMean(v: Float64Array, i0: number, i1: number): number {
  let s = 0;
  for (let i = i0; i < i1; i++) s += v[i];
  return s / (i1 - i0);
}

/** Least-squares slope of v against d over samples [i0, i1). */
function windowSlope(d: Float64Array, v: Float64Array, i0: number, i1: number): number {
  const n = i1 - i0;
  let sd = 0;
  let sv = 0;
  for (let i = i0; i < i1; i++) {
    sd += d[i];
    sv += v[i];
  }
  const md = sd / n;
  const mv = sv / n;
  let sdd = 0;
  let sdv = 0;
  for (let i = i0; i < i1; i++) {
    sdd += (d[i] - md) * (d[i] - md);
    sdv += (d[i] - md) * (v[i] - mv);
  }
  return sdd > 0 ? sdv / sdd : 0;
}

/**
 * Level line with a given slope through samples [i0, i1): the intercept (value at d = 0) is the
 * interquartile mean of v - slope d, which shrugs off a stray structure (the far edge of a narrow
 * bezel, a speck) covering under a quarter of the window. Returns [intercept, rms residual].
 */
function levelWithSlope(
  d: Float64Array,
  v: Float64Array,
  i0: number,
  i1: number,
  slope: number,
  tmp: Float64Array,
): [number, number] {
  const n = i1 - i0;
  for (let i = 0; i < n; i++) tmp[i] = v[i0 + i] - slope * d[i0 + i];
  const sorted = tmp.subarray(0, n).sort();
  const lo = Math.floor(n / 4);
  const hi = n - lo;
  let s = 0;
  for (let i = lo; i < hi; i++) s += sorted[i];
  const a = s / (hi - lo);
  let ss = 0;
  for (let i = 0; i < n; i++) ss += (sorted[i] - a) * (sorted[i] - a);
  return [a, Math.sqrt(ss / Math.max(1, n - 1))];
}

/** Scratch buffers reused across profiles (no per-sample allocation). */
export class ProfileScratch {
  d: Float64Array;
  v: Float64Array;
  tmp: Float64Array;
  constructor(n: number) {
    this.d = new Float64Array(n);
    this.v = new Float64Array(n);
    this.tmp = new Float64Array(n);
  }
  ensure(n: number): void {
    if (this.d.length < n) {
      this.d = new Float64Array(n);
      this.v = new Float64Array(n);
    }
    if (this.tmp.length < 2 * n) this.tmp = new Float64Array(2 * n);
  }
}

const STEP = 0.5; // sample spacing along the normal, pixels

interface ProfileGeometry {
  nHalf: number;
  gi: number;
  n: number;
  inEnd: number;
  outStart: number;
  /** end (exclusive) of the outside level window; n unless a structure beyond the bezel cuts it short */
  outEnd: number;
}

function profileGeometry(g: number, R: number): ProfileGeometry {
  const nHalf = Math.round(R / STEP);
  const gi = Math.min(nHalf - 3, Math.round(g / STEP));
  const n = 2 * nHalf + 1;
  return { nHalf, gi, n, inEnd: nHalf - gi + 1, outStart: nHalf + gi, outEnd: n };
}

/**
 * Sample one profile into out[0..n): the mean of (2 taps + 1) bilinear samples along the edge at each
 * normal offset. Returns false if any sample falls outside the image.
 */
function sampleProfile(
  lum: Plane,
  base: Point,
  normal: Point,
  dir: Point,
  geo: ProfileGeometry,
  taps: number,
  out: Float64Array,
  offset: number,
): boolean {
  for (let i = 0; i < geo.n; i++) {
    const di = (i - geo.nHalf) * STEP;
    const px = base[0] + di * normal[0];
    const py = base[1] + di * normal[1];
    let s = 0;
    for (let t = -taps; t <= taps; t++) {
      const val = bilinear(lum, px + t * dir[0], py + t * dir[1]);
      if (Number.isNaN(val)) return false;
      s += val;
    }
    out[offset + i] = s / (2 * taps + 1);
  }
  return true;
}

/**
 * Where the outside level window should end for this edge. A bezel can be narrower than the window;
 * beyond it lies the wall, often far brighter than the bezel. Take the median over the edge's profiles of
 * each profile normalised by its own inside level, find the outside plateau just past the blur, and stop
 * the window one pixel before the median profile rises above the plateau by more than half the plateau
 * level (and 4 times the median profile's noise). Keeps at least 2 samples (1 px).
 */
function outsideWindowEnd(values: Float64Array, count: number, inFrame: Uint8Array, geo: ProfileGeometry): number {
  const { n, inEnd, outStart } = geo;
  const m = new Float64Array(n);
  const col: number[] = [];
  const scale = new Float64Array(count);
  let used = 0;
  for (let k = 0; k < count; k++) {
    if (!inFrame[k]) continue;
    const inside = windowMean(values.subarray(k * n, (k + 1) * n), 0, inEnd);
    scale[k] = inside > 0 ? 1 / inside : 0;
    if (scale[k] > 0) used++;
  }
  if (used < 5) return n;
  for (let i = outStart; i < n; i++) {
    col.length = 0;
    for (let k = 0; k < count; k++) if (scale[k] > 0) col.push(values[k * n + i] * scale[k]);
    m[i] = medianOf(col);
  }
  // noise of the median profile: spread of single normalised samples at the window start / sqrt(count)
  col.length = 0;
  for (let k = 0; k < count; k++) if (scale[k] > 0) col.push(values[k * n + outStart] * scale[k]);
  const spread = 1.4826 * medianOf(col.map((v) => Math.abs(v - m[outStart])));
  const noiseM = (1.2533 * spread) / Math.sqrt(used);
  const plateau = 0.5 * (m[outStart] + m[Math.min(n - 1, outStart + 1)]);
  const threshold = plateau + Math.max(0.5 * Math.abs(plateau), 4 * noiseM);
  let end = n;
  for (let i = outStart + 2; i < n; i++) {
    if (m[i] > threshold) {
      end = i - Math.round(1 / STEP); // one pixel back from the rise
      break;
    }
  }
  return Math.max(outStart + 2, Math.min(n, end));
}

/**
 * Rough edge position of one profile for the first pass: the steepest bright-to-dark drop (outward)
 * within the central window, found on the profile smoothed by a Gaussian of 1 px, refined by a parabola
 * through the derivative. Needs no level windows, so a bezel narrower than the window or a bright wall
 * beyond it does not matter. Also measures the drop's full width at half maximum.
 */
function locatePeak(
  base: Point,
  v: Float64Array,
  geo: ProfileGeometry,
  opts: EdgeOptions,
  tmp: Float64Array,
): ProfileResult & { fwhm: number } {
  const { n, nHalf, gi } = geo;
  const bad = { base, offset: 0, inside: 0, outside: 0, noise: 0, ok: false, offFrame: false, fwhm: Number.NaN };
  // smooth: Gaussian sigma = 1 px = 2 samples, taps to ±3 sigma
  const K = [0.0044, 0.054, 0.242, 0.399, 0.242, 0.054, 0.0044];
  const sm = tmp;
  for (let i = 0; i < n; i++) {
    let acc = 0;
    let wsum = 0;
    for (let j = -3; j <= 3; j++) {
      const ii = i + 2 * j;
      if (ii < 0 || ii >= n) continue;
      acc += K[j + 3] * v[ii];
      wsum += K[j + 3];
    }
    sm[n + i] = acc / wsum;
  }
  // derivative per sample (central difference); most negative in the central window
  const der = (i: number) => (sm[n + Math.min(n - 1, i + 1)] - sm[n + Math.max(0, i - 1)]) / (2 * STEP);
  let best = 0;
  let bi = -1;
  for (let i = Math.max(1, nHalf - gi); i <= Math.min(n - 2, nHalf + gi); i++) {
    const dv = der(i);
    if (dv < best) {
      best = dv;
      bi = i;
    }
  }
  if (bi < 0) return bad;
  const y0 = der(bi - 1);
  const y1 = best;
  const y2 = der(bi + 1);
  const den = y0 - 2 * y1 + y2;
  const frac = den !== 0 ? Math.max(-0.5, Math.min(0.5, (0.5 * (y0 - y2)) / den)) : 0;
  const offset = (bi + frac - nHalf) * STEP;
  // levels 3 px either side of the drop on the smoothed profile
  const at = (i: number) => sm[n + Math.max(0, Math.min(n - 1, i))];
  const inside = at(bi - Math.round(3 / STEP));
  const outside = at(bi + Math.round(3 / STEP));
  // full width at half maximum of the drop
  let lo = bi;
  while (lo > 0 && der(lo - 1) < best / 2) lo--;
  let hi = bi;
  while (hi < n - 1 && der(hi + 1) < best / 2) hi++;
  const fwhm = (hi - lo + 1) * STEP;
  const result = { base, offset, inside, outside, noise: 0, ok: false, offFrame: false, fwhm };
  if (!(inside > outside)) return result;
  if (outside > 0 && inside < opts.minEdgeRatio * outside) return result;
  result.ok = true;
  return result;
}

/**
 * Edge position of one sampled profile (values v at offsets d), given the slopes of the inside and
 * outside levels. Fills in a ProfileResult.
 */
function locateEdge(
  base: Point,
  d: Float64Array,
  v: Float64Array,
  geo: ProfileGeometry,
  slopeIn: number,
  slopeOut: number,
  opts: EdgeOptions,
  tmp: Float64Array,
): ProfileResult {
  const { inEnd, outStart, gi } = geo;
  const [ai, ri] = levelWithSlope(d, v, 0, inEnd, slopeIn, tmp);
  const [ao, ro] = levelWithSlope(d, v, outStart, geo.outEnd, slopeOut, tmp);
  const noise = Math.sqrt(0.5 * (ri * ri + ro * ro));
  const result: ProfileResult = { base, offset: 0, inside: ai, outside: ao, noise, ok: false, offFrame: false };
  const step = ai - ao;
  if (!(step > 0)) return result;
  if (ao > 0 && ai < opts.minEdgeRatio * ao) return result;
  if (step < opts.minStepSnr * noise) return result;
  // Area method over [-g, g] (trapezoid rule on the normalised profile).
  let area = 0;
  for (let i = inEnd - 1; i <= outStart; i++) {
    const li = ai + slopeIn * d[i];
    const lo = ao + slopeOut * d[i];
    const den = li - lo;
    if (!(den > 0)) return result;
    const q = (v[i] - lo) / den;
    const w = i === inEnd - 1 || i === outStart ? 0.5 : 1;
    area += w * q * STEP;
  }
  const offset = -gi * STEP + area;
  if (!(offset > -gi * STEP && offset < gi * STEP)) return result;
  result.offset = offset;
  result.ok = true;
  return result;
}

/**
 * Robust quadratic fit y ≈ c0 + c1 t + c2 t^2 over the points with use[k] set (least squares, then again
 * without points beyond 3 robust sigmas), evaluated at every t. Falls back to the median with < 6 points.
 */
function smoothAlongEdge(t: Float64Array, y: Float64Array, use: Uint8Array): Float64Array {
  const n = t.length;
  const out = new Float64Array(n);
  const idx: number[] = [];
  for (let k = 0; k < n; k++) if (use[k]) idx.push(k);
  if (idx.length === 0) return out;
  if (idx.length < 6) {
    out.fill(medianOf(idx.map((k) => y[k])));
    return out;
  }
  let keep = idx;
  let coef = [0, 0, 0];
  for (let round = 0; round < 2; round++) {
    // normal equations for 3 unknowns (t in 0..1, well conditioned)
    const M = [0, 0, 0, 0, 0, 0, 0, 0, 0];
    const b = [0, 0, 0];
    for (const k of keep) {
      const p = [1, t[k], t[k] * t[k]];
      for (let i = 0; i < 3; i++) {
        b[i] += p[i] * y[k];
        for (let j = 0; j < 3; j++) M[i * 3 + j] += p[i] * p[j];
      }
    }
    const sol = solve3(M, b);
    if (!sol) {
      out.fill(medianOf(keep.map((k) => y[k])));
      return out;
    }
    coef = sol;
    const res = idx.map((k) => Math.abs(y[k] - coef[0] - coef[1] * t[k] - coef[2] * t[k] * t[k]));
    const tol = 3 * 1.4826 * medianOf(res);
    const next = idx.filter((_, i) => res[i] <= tol);
    if (next.length < 6) break;
    keep = next;
  }
  for (let k = 0; k < n; k++) out[k] = coef[0] + coef[1] * t[k] + coef[2] * t[k] * t[k];
  // Shrink toward zero when the fitted curve is not clearly above its own noise (James-Stein style):
  // on a dim, noisy edge an unneeded slope only adds error, on a bright edge the slope is kept.
  const res = keep.map((k) => y[k] - out[k]);
  let ss = 0;
  for (const r of res) ss += r * r;
  const se2 = ((ss / Math.max(1, keep.length - 3)) * 3) / keep.length;
  let m2 = 0;
  for (const k of keep) m2 += out[k] * out[k];
  m2 /= keep.length;
  const shrink = m2 > 0 ? m2 / (m2 + se2) : 0;
  for (let k = 0; k < n; k++) out[k] *= shrink;
  return out;
}

/** Solve a 3x3 system (row-major) by Cramer's rule; null if singular. */
function solve3(M: number[], b: number[]): number[] | null {
  const det = (m: number[]) =>
    m[0] * (m[4] * m[8] - m[5] * m[7]) - m[1] * (m[3] * m[8] - m[5] * m[6]) + m[2] * (m[3] * m[7] - m[4] * m[6]);
  const D = det(M);
  if (!(Math.abs(D) > 1e-300)) return null;
  const out: number[] = [];
  for (let c = 0; c < 3; c++) {
    const m = [...M];
    for (let r = 0; r < 3; r++) m[r * 3 + c] = b[r];
    out.push(det(m) / D);
  }
  return out;
}

function medianOf(values: number[]): number {
  if (values.length === 0) return Number.NaN;
  const c = [...values].sort((a, b) => a - b);
  const n = c.length;
  return n % 2 ? c[(n - 1) / 2] : 0.5 * (c[n / 2 - 1] + c[n / 2]);
}

/** Weighted total-least-squares line through points. */
function tlsLine(px: Float64Array, py: Float64Array, w: Float64Array): Line | null {
  let sw = 0;
  let mx = 0;
  let my = 0;
  for (let i = 0; i < px.length; i++) {
    sw += w[i];
    mx += w[i] * px[i];
    my += w[i] * py[i];
  }
  if (!(sw > 0)) return null;
  mx /= sw;
  my /= sw;
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (let i = 0; i < px.length; i++) {
    const dx = px[i] - mx;
    const dy = py[i] - my;
    sxx += w[i] * dx * dx;
    sxy += w[i] * dx * dy;
    syy += w[i] * dy * dy;
  }
  // direction = principal eigenvector; normal = the other one
  const theta = 0.5 * Math.atan2(2 * sxy, sxx - syy);
  const nx = -Math.sin(theta);
  const ny = Math.cos(theta);
  return { nx, ny, c: nx * mx + ny * my };
}

/**
 * Profile one edge (from corner a to corner b, panel on the right-hand side when walking a -> b on a
 * y-down screen, i.e. outward normal (dy, -dx)), and fit a line to the edge points.
 * Returns null if too few profiles are usable.
 */
export function fitEdge(
  lum: Plane,
  a: Point,
  b: Point,
  g: number,
  R: number,
  opts: EdgeOptions,
  scratch: ProfileScratch,
  mode: 'area' | 'peak' = 'area',
): EdgeFit | null {
  const dx = b[0] - a[0];
  const dy = b[1] - a[1];
  const len = Math.hypot(dx, dy);
  if (!(len > 4)) return null;
  const dir: Point = [dx / len, dy / len];
  const normal: Point = [dir[1], -dir[0]];
  const usable = len * (1 - 2 * opts.cornerMargin);
  // Profiles at least (2 taps + 1) apart so their along-edge averages do not overlap.
  const minSpacing = 2 * Math.max(0, Math.round(opts.profileHalfWidthPx)) + 1;
  const count = Math.max(8, Math.min(opts.maxProfilesPerEdge, Math.floor(usable / minSpacing)));
  const geo = profileGeometry(g, R);
  const taps = Math.max(0, Math.round(opts.profileHalfWidthPx));
  scratch.ensure(geo.n);
  const { d, tmp } = scratch;
  for (let i = 0; i < geo.n; i++) d[i] = (i - geo.nHalf) * STEP;
  const values = new Float64Array(count * geo.n);
  const bases: Point[] = [];
  const inFrame = new Uint8Array(count);
  const rawIn = new Float64Array(count);
  const rawOut = new Float64Array(count);
  for (let k = 0; k < count; k++) {
    const t = opts.cornerMargin + ((1 - 2 * opts.cornerMargin) * (k + 0.5)) / count;
    const base: Point = [a[0] + t * dx, a[1] + t * dy];
    bases.push(base);
    if (!sampleProfile(lum, base, normal, dir, geo, taps, values, k * geo.n)) continue;
    inFrame[k] = 1;
  }
  geo.outEnd = outsideWindowEnd(values, count, inFrame, geo);
  for (let k = 0; k < count; k++) {
    if (!inFrame[k]) continue;
    const v = values.subarray(k * geo.n, (k + 1) * geo.n);
    // Clamp each slope to a plausible relative gradient: anything steeper is not falloff or veiling
    // glare but structure in the window (the far edge of a narrow bezel, a bright background).
    const capIn = opts.maxLevelSlope * Math.abs(windowMean(v, 0, geo.inEnd));
    const capOut = opts.maxLevelSlope * Math.abs(windowMean(v, geo.outStart, geo.outEnd));
    rawIn[k] = Math.max(-capIn, Math.min(capIn, windowSlope(d, v, 0, geo.inEnd)));
    rawOut[k] = Math.max(-capOut, Math.min(capOut, windowSlope(d, v, geo.outStart, geo.outEnd)));
  }
  // Level slopes across the edge (falloff, smooth glare) change slowly along it - for a radial quadratic
  // falloff they are constant along a straight edge - while one profile's slope, extrapolated from its
  // short window to the edge, is noisy and would add its noise to every edge point. So model each
  // slope as a robust quadratic in the position t along the edge.
  const ts = new Float64Array(count);
  for (let k = 0; k < count; k++) ts[k] = (k + 0.5) / count;
  const slopeIn = smoothAlongEdge(ts, rawIn, inFrame);
  const slopeOut = smoothAlongEdge(ts, rawOut, inFrame);
  const profiles: ProfileResult[] = [];
  const fwhms: number[] = [];
  let offFrame = 0;
  for (let k = 0; k < count; k++) {
    if (!inFrame[k]) {
      offFrame++;
      profiles.push({ base: bases[k], offset: 0, inside: 0, outside: 0, noise: 0, ok: false, offFrame: true });
      continue;
    }
    const v = values.subarray(k * geo.n, (k + 1) * geo.n);
    if (mode === 'peak') {
      const r = locatePeak(bases[k], v, geo, opts, tmp);
      profiles.push(r);
      if (r.ok) fwhms.push(r.fwhm);
    } else {
      profiles.push(locateEdge(bases[k], d, v, geo, slopeIn[k], slopeOut[k], opts, tmp));
    }
  }
  // Glare and reflections lower the local contrast ratio (they add light to both sides): drop profiles
  // whose log contrast falls well below the edge's median.
  const logC = (p: ProfileResult) => Math.log(p.inside / Math.max(p.outside, p.inside * 1e-4));
  const okLog = profiles.filter((p) => p.ok).map(logC);
  if (okLog.length < 4) return null;
  const medLog = medianOf(okLog);
  const n = profiles.length;
  const px = new Float64Array(n);
  const py = new Float64Array(n);
  const w = new Float64Array(n);
  const offsets: number[] = [];
  for (let k = 0; k < n; k++) {
    const p = profiles[k];
    px[k] = p.base[0] + p.offset * normal[0];
    py[k] = p.base[1] + p.offset * normal[1];
    if (p.ok && logC(p) >= opts.glareContrastFraction * medLog) {
      w[k] = 1;
      offsets.push(p.offset);
    }
  }
  if (offsets.length < 4) return null;
  // Start: drop gross outliers relative to the median offset, then Tukey IRLS on perpendicular distances.
  const medOff = medianOf(offsets);
  const madOff = 1.4826 * medianOf(offsets.map((o) => Math.abs(o - medOff)));
  const startTol = Math.max(0.5, 4 * madOff);
  for (let k = 0; k < n; k++) if (w[k] > 0 && Math.abs(profiles[k].offset - medOff) > startTol) w[k] = 0;
  const ok = new Uint8Array(n);
  for (let k = 0; k < n; k++) ok[k] = w[k] > 0 ? 1 : 0;
  // Precision weights: an edge point's scatter grows as noise / step (falloff dims the corners, glare
  // lowers the step), so weight by (step / noise)^2. The noise has a floor of 0.2 % of the step for what
  // the model does not capture (interpolation, residual shading), so nearly noiseless profiles do not
  // take over; weights are also capped at 25x the median.
  const prec = new Float64Array(n);
  const precList: number[] = [];
  for (let k = 0; k < n; k++) {
    if (!ok[k]) continue;
    const p = profiles[k];
    const step = p.inside - p.outside;
    const snr = step / Math.hypot(p.noise, 0.002 * step);
    prec[k] = snr * snr;
    precList.push(prec[k]);
  }
  const precMed = medianOf(precList);
  const precCap = 25 * precMed;
  for (let k = 0; k < n; k++) prec[k] = Math.min(prec[k], precCap);
  for (let k = 0; k < n; k++) w[k] = ok[k] ? prec[k] : 0;
  let line = tlsLine(px, py, w);
  if (!line) return null;
  const res = new Float64Array(n);
  const z = new Float64Array(n);
  for (let iter = 0; iter < 12; iter++) {
    // residuals standardised to the median profile's precision
    const absZ: number[] = [];
    for (let k = 0; k < n; k++) {
      res[k] = line.nx * px[k] + line.ny * py[k] - line.c;
      z[k] = res[k] * Math.sqrt(prec[k] / precMed);
      if (ok[k]) absZ.push(Math.abs(z[k]));
    }
    // Scale floor 0.02 px keeps noiseless synthetic data from collapsing the weights.
    const scale = Math.max(0.02, 1.4826 * medianOf(absZ));
    const c = 4.685 * scale;
    for (let k = 0; k < n; k++) {
      if (!ok[k]) {
        w[k] = 0;
        continue;
      }
      const u = z[k] / c;
      w[k] = Math.abs(u) < 1 ? prec[k] * (1 - u * u) * (1 - u * u) : 0;
    }
    const next = tlsLine(px, py, w);
    if (!next) return null;
    const moved = Math.abs(next.c - line.c) + 1000 * Math.abs(next.nx * line.ny - next.ny * line.nx);
    line = next;
    if (moved < 1e-5) break;
  }
  // Orient the line normal outward.
  if (line.nx * normal[0] + line.ny * normal[1] < 0) line = { nx: -line.nx, ny: -line.ny, c: -line.c };
  let ss = 0;
  let inliers = 0;
  const ratios: number[] = [];
  const snrs: number[] = [];
  for (let k = 0; k < n; k++) {
    if (w[k] <= 0) continue;
    const r = line.nx * px[k] + line.ny * py[k] - line.c;
    ss += r * r;
    inliers++;
    const p = profiles[k];
    ratios.push(p.inside / Math.max(p.outside, p.inside * 1e-4));
    snrs.push((p.inside - p.outside) / Math.max(p.noise, 1e-12));
  }
  if (inliers < 4) return null;
  return {
    line,
    normal: [line.nx, line.ny],
    direction: [-line.ny, line.nx],
    profiles,
    weights: w,
    residualRms: Math.sqrt(ss / inliers),
    inliers,
    contrastRatio: medianOf(ratios),
    snr: medianOf(snrs),
    offFrame,
    lsfFwhm: fwhms.length ? medianOf(fwhms) : Number.NaN,
  };
}

/**
 * How an edge bends away from its fitted line: a quadratic d(s) = a + b s + c s² fitted by weighted least
 * squares to the edge points' distances d from the line against their places s along it (s from the
 * foot of the first profile's base). A straight edge photographed through a lens with radial
 * distortion (or a curved panel) is such an arc. bowPx is the arc's sagitta over the edge points'
 * span, c (span / 2)²: 0 when fewer than 6 points are used.
 */
export interface EdgeBow {
  origin: Point;
  a: number;
  b: number;
  c: number;
  bowPx: number;
}

export function edgeBow(fit: EdgeFit): EdgeBow {
  const { line, direction: dir } = fit;
  let origin: Point | null = null;
  const ss: number[] = [];
  const ds: number[] = [];
  const ws: number[] = [];
  for (let k = 0; k < fit.profiles.length; k++) {
    const w = fit.weights[k];
    if (!(w > 0)) continue;
    const p = fit.profiles[k];
    const ex = p.base[0] + p.offset * fit.normal[0];
    const ey = p.base[1] + p.offset * fit.normal[1];
    const d = line.nx * ex + line.ny * ey - line.c;
    if (origin === null) origin = [ex - d * line.nx, ey - d * line.ny];
    ss.push((ex - origin[0]) * dir[0] + (ey - origin[1]) * dir[1]);
    ds.push(d);
    ws.push(w);
  }
  const none: EdgeBow = { origin: origin ?? [0, 0], a: 0, b: 0, c: 0, bowPx: 0 };
  if (ss.length < 6) return none;
  const lo = Math.min(...ss);
  const hi = Math.max(...ss);
  const q = quadraticFit(ss, ds, ws);
  if (!q) return none;
  const [a, b, c] = q;
  return { origin: origin!, a, b, c, bowPx: Math.abs(c) * ((hi - lo) / 2) ** 2 };
}

/**
 * Weighted least-squares quadratic y = c0 + c1 x + c2 x² (weights 1 when not given), solved on x centred
 * and scaled to its span for conditioning; null for fewer than 3 points or a singular system.
 */
export function quadraticFit(x: readonly number[], y: readonly number[], w?: readonly number[]): [number, number, number] | null {
  if (x.length < 3) return null;
  const lo = Math.min(...x);
  const hi = Math.max(...x);
  const mid = (lo + hi) / 2;
  const half = Math.max((hi - lo) / 2, 1e-9);
  const A = [0, 0, 0, 0, 0, 0, 0, 0, 0];
  const r = [0, 0, 0];
  for (let k = 0; k < x.length; k++) {
    const wk = w ? w[k] : 1;
    const t = (x[k] - mid) / half;
    const row = [1, t, t * t];
    for (let i = 0; i < 3; i++) {
      r[i] += wk * row[i] * y[k];
      for (let j = 0; j < 3; j++) A[3 * i + j] += wk * row[i] * row[j];
    }
  }
  const q = solve3(A, r);
  if (!q) return null;
  // back to x: y = q0 + q1 t + q2 t², t = (x - mid) / half
  const c2 = q[2] / (half * half);
  const c1 = q[1] / half - 2 * c2 * mid;
  const c0 = q[0] - (q[1] * mid) / half + c2 * mid * mid;
  return [c0, c1, c2];
}

/**
 * 10-90 % width of the edge spread function, measured as in the slanted-edge method: pixel values near
 * each used profile, normalised with that profile's levels, binned by signed distance to the edge. The
 * edge is the quadratic of edgeBow rather than the straight line, as the slanted-edge method's polynomial
 * edge fit does for distorted edges (ISO 12233's e-SFR; from memory): an edge bowed by lens distortion
 * would otherwise read as blurred by its sagitta. Returns NaN when the spread function cannot be traced.
 */
export function edgeSpreadWidth(lum: Plane, fit: EdgeFit, R: number, alongHalf: number): number {
  const bow = edgeBow(fit);
  const binW = 0.1;
  const nb = Math.ceil((2 * R) / binW);
  const sum = new Float64Array(nb);
  const cnt = new Float64Array(nb);
  const { line, direction: dir } = fit;
  const { width: W, height: H, data } = lum;
  for (let k = 0; k < fit.profiles.length; k++) {
    if (fit.weights[k] <= 0) continue;
    const p = fit.profiles[k];
    const step = p.inside - p.outside;
    if (!(step > 0)) continue;
    // centre of this profile's patch on the fitted line
    const dist0 = line.nx * p.base[0] + line.ny * p.base[1] - line.c;
    const cx = p.base[0] - dist0 * line.nx;
    const cy = p.base[1] - dist0 * line.ny;
    const ext = R + alongHalf + 1;
    const x0 = Math.max(0, Math.floor(cx - ext));
    const x1 = Math.min(W - 1, Math.ceil(cx + ext));
    const y0 = Math.max(0, Math.floor(cy - ext));
    const y1 = Math.min(H - 1, Math.ceil(cy + ext));
    for (let y = y0; y <= y1; y++) {
      for (let x = x0; x <= x1; x++) {
        const rx = x - cx;
        const ry = y - cy;
        const s = rx * dir[0] + ry * dir[1];
        if (Math.abs(s) > alongHalf) continue;
        const sb = (x - bow.origin[0]) * dir[0] + (y - bow.origin[1]) * dir[1];
        const dd = rx * line.nx + ry * line.ny - (bow.a + bow.b * sb + bow.c * sb * sb);
        if (dd <= -R || dd >= R) continue;
        const q = (data[y * W + x] - p.outside) / step;
        const b = Math.floor((dd + R) / binW);
        sum[b] += q;
        cnt[b]++;
      }
    }
  }
  const esf = new Float64Array(nb);
  const pos = new Float64Array(nb);
  let m = 0;
  for (let b = 0; b < nb; b++) {
    if (cnt[b] < 3) continue;
    esf[m] = sum[b] / cnt[b];
    pos[m] = -R + (b + 0.5) * binW;
    m++;
  }
  if (m < 10) return Number.NaN;
  // Smooth lightly (running mean over +-0.25 px) so noise does not create spurious crossings. Edges
  // nearly parallel to a pixel axis fill only a few bins per pixel; the mean then spans just those.
  const sm = new Float64Array(m);
  for (let i = 0; i < m; i++) {
    let s = 0;
    let c = 0;
    for (let j = i; j >= 0 && pos[i] - pos[j] <= 0.25 + 1e-9; j--) {
      s += esf[j];
      c++;
    }
    for (let j = i + 1; j < m && pos[j] - pos[i] <= 0.25 + 1e-9; j++) {
      s += esf[j];
      c++;
    }
    sm[i] = s / c;
  }
  // Walk outward from the 50 % point.
  let i50 = -1;
  let best = Infinity;
  for (let i = 0; i < m; i++) {
    if (Math.abs(pos[i]) < best && Math.abs(sm[i] - 0.5) < 0.25) {
      best = Math.abs(pos[i]);
      i50 = i;
    }
  }
  if (i50 < 0) return Number.NaN;
  const crossing = (level: number, dirn: 1 | -1): number => {
    for (let i = i50; i >= 0 && i < m && i + dirn >= 0 && i + dirn < m; i += dirn) {
      const a = sm[i];
      const b = sm[i + dirn];
      if ((a - level) * (b - level) <= 0 && a !== b) {
        const t = (level - a) / (b - a);
        return pos[i] + t * (pos[i + dirn] - pos[i]);
      }
    }
    return Number.NaN;
  };
  const d90 = crossing(0.9, -1);
  const d10 = crossing(0.1, 1);
  return d10 - d90;
}
