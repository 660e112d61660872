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
}

export interface EdgeFit {
  line: Line;
  /** outward unit normal (nx, ny) and unit direction along the edge */
  normal: Point;
  direction: Point;
  profiles: ProfileResult[];
  /** IRLS weights of the profiles (0 = rejected) */
  weights: Float64Array;
  /** rms perpendicular distance of the weighted-in edge points to the line */
  residualRms: number;
  /** number of points with non-zero weight */
  inliers: number;
  /** median inside/outside ratio over the inliers */
  contrastRatio: number;
  /** median step / noise over the inliers */
  snr: number;
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

/** Least-squares straight line through (d[i], v[i]) for i in [i0, i1); returns [value at 0, slope, rms]. */
function fitLevel(d: Float64Array, v: Float64Array, i0: number, i1: number): [number, number, number] {
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
  const slope = sdd > 0 ? sdv / sdd : 0;
  const a = mv - slope * md;
  let ss = 0;
  for (let i = i0; i < i1; i++) {
    const r = v[i] - a - slope * d[i];
    ss += r * r;
  }
  return [a, slope, Math.sqrt(ss / Math.max(1, n - 2))];
}

/** Scratch buffers reused across profiles (no per-sample allocation). */
export class ProfileScratch {
  d: Float64Array;
  v: Float64Array;
  constructor(n: number) {
    this.d = new Float64Array(n);
    this.v = new Float64Array(n);
  }
  ensure(n: number): void {
    if (this.d.length < n) {
      this.d = new Float64Array(n);
      this.v = new Float64Array(n);
    }
  }
}

const STEP = 0.5; // sample spacing along the normal, pixels

/**
 * Measure one profile. g: half-width of the central (integration) window; R: half-length of the whole
 * profile (R > g); the level windows are [-R, -g] and [g, R].
 */
export function measureProfile(
  lum: Plane,
  base: Point,
  normal: Point,
  dir: Point,
  g: number,
  R: number,
  opts: EdgeOptions,
  scratch: ProfileScratch,
): ProfileResult {
  const nHalf = Math.round(R / STEP);
  const gi = Math.round(g / STEP);
  const n = 2 * nHalf + 1;
  scratch.ensure(n);
  const { d, v } = scratch;
  const taps = Math.max(0, Math.round(opts.profileHalfWidthPx));
  const bad: ProfileResult = { base, offset: 0, inside: 0, outside: 0, noise: 0, ok: false };
  for (let i = 0; i < n; i++) {
    const di = (i - nHalf) * STEP;
    d[i] = di;
    const px = base[0] + di * normal[0];
    const py = base[1] + di * normal[1];
    let s = 0;
    for (let t = -taps; t <= taps; t++) {
      const val = bilinear(lum, px + t * dir[0], py + t * dir[1]);
      if (Number.isNaN(val)) return bad;
      s += val;
    }
    v[i] = s / (2 * taps + 1);
  }
  const inEnd = nHalf - gi + 1; // samples [0, inEnd) have d <= -g
  const outStart = nHalf + gi; // samples [outStart, n) have d >= g
  if (inEnd < 3 || n - outStart < 3) return bad;
  const [ai, bi, ri] = fitLevel(d, v, 0, inEnd);
  const [ao, bo, ro] = fitLevel(d, v, outStart, n);
  const noise = Math.sqrt(0.5 * (ri * ri + ro * ro));
  const inside = ai;
  const outside = ao;
  const step = inside - outside;
  const result: ProfileResult = { base, offset: 0, inside, outside, noise, ok: false };
  if (!(step > 0)) return result;
  if (outside > 0 && inside < opts.minEdgeRatio * outside) return result;
  if (step < opts.minStepSnr * noise) return result;
  // Area method over [-g, g] (trapezoid rule on the normalised profile).
  let area = 0;
  for (let i = inEnd - 1; i <= outStart; i++) {
    const li = ai + bi * d[i];
    const lo = ao + bo * d[i];
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
  const profiles: ProfileResult[] = [];
  for (let k = 0; k < count; k++) {
    const t = opts.cornerMargin + ((1 - 2 * opts.cornerMargin) * (k + 0.5)) / count;
    const base: Point = [a[0] + t * dx, a[1] + t * dy];
    profiles.push(measureProfile(lum, base, normal, dir, g, R, opts, scratch));
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
  let line = tlsLine(px, py, w);
  if (!line) return null;
  const res = new Float64Array(n);
  for (let iter = 0; iter < 12; iter++) {
    const absRes: number[] = [];
    for (let k = 0; k < n; k++) {
      res[k] = line.nx * px[k] + line.ny * py[k] - line.c;
      if (ok[k]) absRes.push(Math.abs(res[k]));
    }
    // Scale floor 0.02 px keeps noiseless synthetic data from collapsing the weights.
    const scale = Math.max(0.02, 1.4826 * medianOf(absRes));
    const c = 4.685 * scale;
    for (let k = 0; k < n; k++) {
      if (!ok[k]) {
        w[k] = 0;
        continue;
      }
      const u = res[k] / c;
      w[k] = Math.abs(u) < 1 ? (1 - u * u) * (1 - u * u) : 0;
    }
    const next = tlsLine(px, py, w);
    if (!next) return null;
    line = next;
  }
  // Orient the line normal outward.
  if (line.nx * normal[0] + line.ny * normal[1] < 0) line = { nx: -line.nx, ny: -line.ny, c: -line.c };
  let ss = 0;
  let sw = 0;
  let inliers = 0;
  const ratios: number[] = [];
  const snrs: number[] = [];
  for (let k = 0; k < n; k++) {
    if (w[k] <= 0) continue;
    const r = line.nx * px[k] + line.ny * py[k] - line.c;
    ss += w[k] * r * r;
    sw += w[k];
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
    residualRms: Math.sqrt(ss / sw),
    inliers,
    contrastRatio: medianOf(ratios),
    snr: medianOf(snrs),
  };
}

/**
 * 10-90 % width of the edge spread function, measured as in the slanted-edge method: pixel values near
 * each used profile, normalised with that profile's levels, binned by signed distance to the fitted line.
 * Returns NaN when the spread function cannot be traced.
 */
export function edgeSpreadWidth(lum: Plane, fit: EdgeFit, R: number, alongHalf: number): number {
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
        const dd = rx * line.nx + ry * line.ny;
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
