// Lines and bands along either axis, found on profiles averaged along the axis.
//
// Averaging the contrast map along a line's length before filtering across it keeps the whole line
// signal while the noise drops with the square root of the rows averaged, so thin faint lines stand
// out far better than under a round filter. Profiles are taken over the whole panel length and over
// overlapping halves and quarters, so partial lines are not diluted by the empty rest.
//
// Across the profile a 1-D DoG(s, 2s) finds ridges; it peaks for a Gaussian cross-profile of sigma_l
// at s ~ sigma_l (1/sqrt(1+x) - 1/sqrt(1+4x) is largest at x = s²/sigma_l² ~ 1.03). Each ridge gives
// a half-peak interval across, an extent along (where the along-profile holds half of the run's mean
// contrast), and finally the half-peak region on a map smoothed along the axis only, so the region
// follows the true shape (soft ends, glows that fade along an edge).

import { convolve1d, floodFill, gaussianKernel, kernelProduct, median, robustSigma } from './raster.js';
import { isDuplicate, measureRegion, register, type Axis, type Ctx, type Found } from './context.js';
import { semu } from './semu.js';

interface View {
  axis: Axis;
  /** samples across the feature (x for vertical lines) and along it */
  nA: number;
  nL: number;
  idx: (a: number, l: number) => number;
  /** running sums along the axis: cum[l * nA + a] = sum over l' < l of wt C (and of wt in cumW) */
  cum: Float64Array;
  cumW: Float64Array;
}

function viewOf(ctx: Ctx, axis: Axis): View {
  const w = ctx.w;
  const nA = axis === 'vertical' ? ctx.w : ctx.h;
  const nL = axis === 'vertical' ? ctx.h : ctx.w;
  const idx = axis === 'vertical' ? (a: number, l: number) => l * w + a : (a: number, l: number) => a * w + l;
  const cum = new Float64Array((nL + 1) * nA);
  const cumW = new Float64Array((nL + 1) * nA);
  for (let l = 0; l < nL; l++) {
    const o = l * nA;
    for (let a = 0; a < nA; a++) {
      const i = idx(a, l);
      const q = ctx.wt[i];
      cum[o + nA + a] = cum[o + a] + q * ctx.C[i];
      cumW[o + nA + a] = cumW[o + a] + q;
    }
  }
  return { axis, nA, nL, idx, cum, cumW };
}

interface ProfileSeed {
  view: View;
  l0: number;
  l1: number;
  sigma: number;
  a: number;
  z: number;
}

export function findProfiles(ctx: Ctx): void {
  const seeds: ProfileSeed[] = [];
  for (const axis of ['vertical', 'horizontal'] as const) {
    const view = viewOf(ctx, axis);
    const segs: [number, number][] = [[0, view.nL]];
    for (let k = 0; k < 3; k++) segs.push([Math.floor((k * view.nL) / 4), Math.floor(((k + 2) * view.nL) / 4)]);
    for (let k = 0; k < 7; k++) segs.push([Math.floor((k * view.nL) / 8), Math.floor(((k + 2) * view.nL) / 8)]);
    for (const [l0, l1] of segs) profileSeeds(ctx, view, l0, l1, seeds);
  }
  seeds.sort((p, q) => Math.abs(q.z) - Math.abs(p.z));
  let tried = 0;
  for (const s of seeds) {
    // already found: a feature of comparable width crossing this seed's place in its segment
    const a = Math.min(s.view.nA - 1, Math.max(0, Math.round(s.a)));
    let known = false;
    for (let t = 0; t < 16 && !known; t++) {
      const owner = ctx.label[s.view.idx(a, Math.floor(s.l0 + ((t + 0.5) * (s.l1 - s.l0)) / 16))];
      // (inside a found feature running the same way nothing finer is looked for: a ridge along a
      // band is the band's own top)
      if (owner) {
        const o = ctx.found[owner - 1];
        if (s.sigma >= o.matchedScalePx / 3 || o.axis === s.view.axis) known = true;
      }
    }
    if (known) continue;
    if (++tried > 400) break;
    const f = growProfile(ctx, s);
    if (!f) continue;
    if (isDuplicate(ctx, f)) continue;
    register(ctx, f);
  }
}

/** Across-profile of the contrast map averaged over along-range [l0, l1): values and weights. */
function acrossProfile(ctx: Ctx, v: View, l0: number, l1: number): { p: Float64Array; pw: Float64Array } {
  const p = new Float64Array(v.nA);
  const pw = new Float64Array(v.nA);
  const o0 = l0 * v.nA;
  const o1 = l1 * v.nA;
  for (let a = 0; a < v.nA; a++) {
    pw[a] = v.cumW[o1 + a] - v.cumW[o0 + a];
    p[a] = pw[a] > 1e-9 ? (v.cum[o1 + a] - v.cum[o0 + a]) / pw[a] : 0;
    if (pw[a] <= 1e-9) pw[a] = 0;
  }
  void ctx;
  return { p, pw };
}

interface Smoothed1d {
  v: Float64Array;
  /** sum k w (the normalisation) */
  den: Float64Array;
  /** noise sd for unit white noise per full working pixel */
  sd: Float64Array;
}

function smooth1d(p: Float64Array, pw: Float64Array, sigma: number, cross?: number): Smoothed1d & { cross: Float64Array | null } {
  // wide kernels run on a binned copy (bins of about sigma / 3) and are interpolated back
  const n = p.length;
  const d = Math.max(1, Math.floor(sigma / 3));
  const m = Math.ceil(n / d);
  const bp = new Float64Array(m);
  const bw = new Float64Array(m);
  for (let i = 0; i < n; i++) {
    const j = Math.floor(i / d);
    bp[j] += p[i] * pw[i];
    bw[j] += pw[i];
  }
  const sg = sigma / d;
  const k = gaussianKernel(sg);
  const k2 = kernelProduct(k, k);
  const num = new Float64Array(m);
  const den = new Float64Array(m);
  const q = new Float64Array(m);
  convolve1d(bp, k, num);
  convolve1d(bw, k, den);
  convolve1d(bw, k2, q);
  let cr: Float64Array | null = null;
  if (cross !== undefined) {
    cr = new Float64Array(m);
    convolve1d(bw, kernelProduct(k, gaussianKernel(cross / d)), cr);
  }
  const v = new Float64Array(n);
  const dn = new Float64Array(n);
  const sd = new Float64Array(n);
  const cx = cr ? new Float64Array(n) : null;
  for (let i = 0; i < n; i++) {
    // bin centres at (j + 0.5) d - 0.5; linear interpolation between the two nearest
    const f = (i + 0.5) / d - 0.5;
    const j0 = Math.max(0, Math.min(m - 1, Math.floor(f)));
    const j1 = Math.min(m - 1, j0 + 1);
    const t = d === 1 ? 0 : Math.max(0, Math.min(1, f - j0));
    const D = (1 - t) * den[j0] + t * den[j1];
    if (D > 1e-9) {
      v[i] = ((1 - t) * num[j0] + t * num[j1]) / D;
      sd[i] = Math.sqrt(Math.max((1 - t) * q[j0] + t * q[j1], 0)) / D;
      dn[i] = D;
      if (cx && cr) cx[i] = (1 - t) * cr[j0] + t * cr[j1];
    } else {
      v[i] = 0;
      sd[i] = Infinity;
      dn[i] = 0;
    }
  }
  return { v, den: dn, sd, cross: cx };
}

function widthScales(ctx: Ctx, nA: number): number[] {
  const hi = Math.min(ctx.opts.maxFeatureMm / 2 / 2.355 / ctx.mmPerPx, nA / 8);
  const out: number[] = [];
  for (let s = 0.5; s <= hi; s *= Math.SQRT2) out.push(s);
  return out;
}

function profileSeeds(ctx: Ctx, view: View, l0: number, l1: number, out: ProfileSeed[]): void {
  const { p, pw } = acrossProfile(ctx, view, l0, l1);
  for (const s of widthScales(ctx, view.nA)) {
    const a = smooth1d(p, pw, s, 2 * s);
    const b = smooth1d(p, pw, 2 * s);
    const n = p.length;
    const D = new Float64Array(n);
    const sd = new Float64Array(n);
    // noise of the difference: var(a) + var(b) - 2 cov, cov = sum k1 k2 w / (S1 S2)
    const cross = a.cross!;
    for (let i = 0; i < n; i++) {
      D[i] = a.v[i] - b.v[i];
      const cov = a.den[i] > 0 && b.den[i] > 0 ? cross[i] / (a.den[i] * b.den[i]) : 0;
      sd[i] = Math.sqrt(Math.max(a.sd[i] ** 2 + b.sd[i] ** 2 - 2 * cov, 0.01 * a.sd[i] ** 2));
    }
    // empirical floor: profiles also carry noise that is correlated along the axis (column banding,
    // background-model wiggles), which the white-noise prediction misses
    const zs: number[] = [];
    for (let i = 0; i < n; i++) if (Number.isFinite(sd[i])) zs.push(D[i] / sd[i]);
    const emp = robustSigma(zs);
    const noise = Math.max(ctx.rho * ctx.noisePct, Number.isFinite(emp) ? emp : 0);
    for (let i = 0; i < n; i++) {
      if (!Number.isFinite(sd[i])) continue;
      const z = D[i] / (noise * sd[i]);
      if (Math.abs(z) < ctx.opts.thresholdSigma) continue;
      const sg = z > 0 ? 1 : -1;
      const left = i > 0 ? sg * D[i - 1] : -Infinity;
      const right = i < n - 1 ? sg * D[i + 1] : -Infinity;
      if (sg * D[i] >= left && sg * D[i] > right) out.push({ view, l0, l1, sigma: s, a: i, z });
    }
  }
}

function growProfile(ctx: Ctx, s: ProfileSeed): Found | null {
  const v = s.view;
  const sign: 1 | -1 = s.z > 0 ? 1 : -1;
  const noise = ctx.rho * ctx.noisePct;
  const { p, pw } = acrossProfile(ctx, v, s.l0, s.l1);
  // light smoothing across: no more than the profile's noise needs (the peak 30 sigmas clear), never
  // more than a quarter of the seed scale; edges and thin features suffer from any extra
  const a0s = Math.max(0, Math.round(s.a - s.sigma));
  const a1s = Math.min(v.nA - 1, Math.round(s.a + s.sigma));
  let rough = 0;
  let rows = 0;
  for (let a = a0s; a <= a1s; a++) {
    if (sign * p[a] > rough) rough = sign * p[a];
    rows = Math.max(rows, pw[a]);
  }
  const profileNoise = noise / Math.sqrt(Math.max(rows, 1));
  const gNoise = rough > 0 ? (30 * profileNoise / rough) ** 2 / (2 * Math.sqrt(Math.PI)) : Infinity;
  const g = Math.max(0.4, Math.min(s.sigma / 4, gNoise));
  const ps = smooth1d(p, pw, g).v;
  // 1. peak and half-peak interval across, with the flanks as pedestal
  let peakA = -1;
  let best = -Infinity;
  for (let a = Math.max(0, Math.floor(s.a - 2 * s.sigma)); a <= Math.min(v.nA - 1, Math.ceil(s.a + 2 * s.sigma)); a++) {
    if (pw[a] <= 0) continue;
    if (sign * ps[a] > best) {
      best = sign * ps[a];
      peakA = a;
    }
  }
  if (peakA < 0) return null;
  // a true local extremum, not the rim of the search window on a slope
  if ((peakA > 0 && pw[peakA - 1] > 0 && sign * ps[peakA - 1] > best) || (peakA < v.nA - 1 && pw[peakA + 1] > 0 && sign * ps[peakA + 1] > best)) {
    return null;
  }
  const peak = ps[peakA];
  let P = 0;
  let [a0, a1] = interval(ps, pw, peakA, P + (peak - P) / 2, sign);
  // a pedestal only when the feature sits on something: both flanks (2R..3R out) lifted the same way;
  // the smaller of the two then (a single flank, as at a panel edge, is the feature's own tail)
  for (let it = 0; it < 2; it++) {
    const R = (a1 - a0 + 1) / 2;
    const c = (a0 + a1) / 2;
    const left: number[] = [];
    const right: number[] = [];
    for (let a = Math.max(0, Math.floor(c - 3 * R)); a <= Math.min(v.nA - 1, Math.ceil(c + 3 * R)); a++) {
      const d = Math.abs(a - c);
      if (d >= 2 * R && d <= 3 * R && pw[a] > 0) (a < c ? left : right).push(ps[a]);
    }
    const ml = left.length >= 2 ? median(left) : NaN;
    const mr = right.length >= 2 ? median(right) : NaN;
    let Pn = 0;
    if (Number.isFinite(ml) && Number.isFinite(mr) && Math.sign(ml) === Math.sign(mr)) Pn = Math.abs(ml) < Math.abs(mr) ? ml : mr;
    const newP = Math.abs(Pn) >= 0.15 * Math.abs(peak) && sign * (peak - Pn) > 0 ? Pn : 0;
    if (newP === P) break;
    P = newP;
    [a0, a1] = interval(ps, pw, peakA, P + (peak - P) / 2, sign);
  }
  const widthPx = a1 - a0 + 1;
  // sub-pixel half-peak width from linear interpolation of the two crossings
  const thrA = P + (peak - P) / 2;
  const frac = (inside: number, outside: number): number => {
    if (outside < 0 || outside >= v.nA || pw[outside] <= 0) return 0.5;
    const d = ps[inside] - ps[outside];
    return d !== 0 ? Math.min(1, Math.max(0, (ps[inside] - thrA) / d)) : 0.5;
  };
  const widthSub = Math.max(0.25, a1 - a0 + frac(a0, a0 - 1) + frac(a1, a1 + 1));
  // cannot reach half the reporting floor even if the whole length had the peak contrast: not worth it
  if (semu(peak - P, widthSub * v.nL * ctx.mmPerPx ** 2, ctx.opts.semuConstants) < 0.5 * ctx.opts.semuFloor) return null;

  // 2. extent along: the along-profile over the whole length, smoothed just enough to beat the noise
  const q = new Float64Array(v.nL);
  const qw = new Float64Array(v.nL);
  for (let l = 0; l < v.nL; l++) {
    let sv = 0;
    let sw = 0;
    for (let a = a0; a <= a1; a++) {
      const i = v.idx(a, l);
      const wq = ctx.wt[i];
      if (wq <= 0) continue;
      sv += wq * ctx.C[i];
      sw += wq;
    }
    q[l] = sw > 0 ? sv / sw - P : 0;
    qw[l] = sw;
  }
  let m = 0;
  let mw = 0;
  for (let l = s.l0; l < s.l1; l++) {
    m += q[l] * qw[l];
    mw += qw[l];
  }
  if (mw <= 0) return null;
  m /= mw;
  if (sign * m <= 0) return null;
  const rowNoise = noise / Math.sqrt(Math.max(1, widthPx));
  const segLen = s.l1 - s.l0;
  const sigA = Math.min(Math.max(1, (8 * rowNoise) ** 2 / (m * m) / (2 * Math.sqrt(Math.PI))), Math.max(1, segLen / 8));
  const qs = smooth1d(q, qw, sigA).v;
  let mid = s.l0;
  let bq = -Infinity;
  for (let l = s.l0; l < s.l1; l++) if (qw[l] > 0 && sign * qs[l] > bq) {
    bq = sign * qs[l];
    mid = l;
  }
  // the run holds at least half the smoothed along-profile's peak (a cloud's run is then its own
  // half-peak width, as wide as it is long, and fails the elongation test below)
  const [r0, r1] = interval(qs, qw, mid, qs[mid] / 2, sign);
  const runLen = r1 - r0 + 1;
  if (runLen < 3 * widthPx || runLen * ctx.mmPerPx < ctx.opts.minFeatureMm) return null;
  // the smoothing along must not make the feature look long: too faint to delimit otherwise
  if (sigA > runLen / 6) return null;
  // a line or band holds its contrast along its run; a feature that swells and fades along it (a
  // glow patch, an elongated blob) is left to the round-feature search, which follows its true shape
  // (the run's mean against the mean of its central half: 1 for a flat run, 0.85 for a Gaussian swell
  // cut at its half-peak points; means, not maxima, so that noise does not decide)
  const meanOf = (x0: number, x1: number): number => {
    let sv = 0;
    let sw = 0;
    for (let l = x0; l <= x1; l++) {
      sv += q[l] * qw[l];
      sw += qw[l];
    }
    return sw > 0 ? sv / sw : 0;
  };
  const quarter = Math.floor(runLen / 4);
  if (sign * meanOf(r0, r1) < 0.92 * sign * meanOf(r0 + quarter, r1 - quarter)) return null;

  // 3. half-peak region on a map smoothed along the axis (sigA) and lightly across (g)
  const R = widthPx / 2;
  const ca0 = Math.max(0, Math.floor(a0 - 3 * R - 3 * g - 2));
  const ca1 = Math.min(v.nA - 1, Math.ceil(a1 + 3 * R + 3 * g + 2));
  const cl0 = Math.max(0, Math.floor(r0 - 3 * sigA - 2));
  const cl1 = Math.min(v.nL - 1, Math.ceil(r1 + 3 * sigA + 2));
  const nA = ca1 - ca0 + 1;
  const nL = cl1 - cl0 + 1;
  const num = new Float32Array(nA * nL);
  const den = new Float32Array(nA * nL);
  for (let l = 0; l < nL; l++) {
    for (let a = 0; a < nA; a++) {
      const i = v.idx(ca0 + a, cl0 + l);
      const wq = ctx.wt[i];
      num[l * nA + a] = wq * ctx.C[i];
      den[l * nA + a] = wq;
    }
  }
  const S = anisotropicSmooth(num, den, nA, nL, g, sigA);
  let pk = -1;
  let pv = -Infinity;
  for (let l = r0 - cl0; l <= r1 - cl0; l++) {
    for (let a = a0 - ca0; a <= a1 - ca0; a++) {
      const i = l * nA + a;
      if (Number.isFinite(S[i]) && sign * S[i] > pv) {
        pv = sign * S[i];
        pk = i;
      }
    }
  }
  if (pk < 0) return null;
  // the peak that sets the half level: the across-profile averaged over the run (low noise; the
  // maximum of the noisy map would be biased high), interpolated between samples (parabola through
  // the three highest) so that a line between two pixel centres is not read low
  const { p: pr, pw: prw } = acrossProfile(ctx, v, r0, r1 + 1);
  const prs = smooth1d(pr, prw, g).v;
  let ia = peakA;
  for (let a = Math.max(0, peakA - 2); a <= Math.min(v.nA - 1, peakA + 2); a++) if (prw[a] > 0 && sign * prs[a] > sign * prs[ia]) ia = a;
  const thin = widthPx <= 12 && a0 > 0 && a1 < v.nA - 1;
  const tm = thinMeasure(prs, pr, prw, ia, P, sign, thin ? g : 0);
  // undo the light smoothing g for thin features: the true half-peak points sit where the smoothed
  // profile has fallen to exp(-ln2 sigma² / sigma_eff²) of its peak (Gaussian cross-profile)
  const peakS = prs[ia];
  if (sign * (peakS - P) <= 0) return null;
  const level = thin ? Math.exp((-Math.LN2 * tm.width * tm.width) / (8 * Math.LN2) / ((tm.width * tm.width) / (8 * Math.LN2) + g * g)) : 0.5;
  const thr = P + level * (peakS - P);
  if (!(sign * (S[pk] - thr) >= 0)) return null;
  const stamp = new Int32Array(nA * nL);
  const reg = floodFill(nA, nL, pk, (i) => Number.isFinite(S[i]) && sign * (S[i] - thr) >= 0, stamp, 1, nA * nL);
  if (!reg || reg.length === 0) return null;
  const pixels = new Int32Array(reg.length);
  for (let k = 0; k < reg.length; k++) {
    const a = reg[k] % nA;
    const l = (reg[k] - a) / nA;
    pixels[k] = v.idx(ca0 + a, cl0 + l);
  }
  const pa = ca0 + (pk % nA);
  const pl = cl0 + Math.floor(pk / nA);
  const at: [number, number] = v.axis === 'vertical' ? [pa, pl] : [pl, pa];
  const f = measureRegion(ctx, pixels, P, thin ? tm.peak : peakS, at, sign, 'profile', v.axis);
  if (!f) return null;
  if (thin) {
    // the pixel count quantises a thin feature's width: width and mean contrast from the run's
    // across-profile instead
    f.contrastPct = (tm.mean - P) / (1 + P / 100);
    f.widthMm = tm.width * ctx.mmPerPx;
    f.areaMm2 = f.lengthMm * f.widthMm;
    f.zNoise = Math.abs(f.contrastPct) / ((ctx.rho * ctx.noisePct) / Math.sqrt(f.areaMm2 / ctx.mmPerPx ** 2 || 1));
    f.zFit = ctx.fitErrorPct > 0 ? Math.abs(f.contrastPct) / ctx.fitErrorPct : Infinity;
  }
  if (sign * f.contrastPct <= 0) return null;
  if (f.lengthMm < 3 * f.widthMm) return null;
  if (f.zNoise < ctx.opts.thresholdSigma || f.zFit < ctx.opts.fitSigma) return null;
  return f;
}

/** Contiguous run around i where sign * (v - thr) >= 0 (samples without weight end the run). */
function interval(v: Float64Array, wts: Float64Array, i: number, thr: number, sign: 1 | -1): [number, number] {
  let lo = i;
  let hi = i;
  while (lo > 0 && wts[lo - 1] > 0 && sign * (v[lo - 1] - thr) >= 0) lo--;
  while (hi < v.length - 1 && wts[hi + 1] > 0 && sign * (v[hi + 1] - thr) >= 0) hi++;
  return [lo, hi];
}

/** Normalised smoothing: Gaussian of sigma sA across (fast index); along (slow index) three passes of a
 *  running box whose combined variance matches sL² (a close Gaussian at any length, O(1) per pixel). */
function anisotropicSmooth(num: Float32Array, den: Float32Array, nA: number, nL: number, sA: number, sL: number): Float32Array {
  const kA = gaussianKernel(sA);
  const rA = (kA.length - 1) / 2;
  // three boxes of odd width b have variance 3 (b² - 1) / 12
  const half = Math.max(0, Math.round((Math.sqrt(4 * sL * sL + 1) - 1) / 2));
  const col = new Float64Array(nL);
  const acc = new Float64Array(nL);
  const pass = (src: Float32Array): Float32Array => {
    const out = new Float32Array(src.length);
    for (let l = 0; l < nL; l++) {
      for (let a = 0; a < nA; a++) {
        let s = 0;
        for (let t = Math.max(-rA, -a); t <= Math.min(rA, nA - 1 - a); t++) s += kA[t + rA] * src[l * nA + a + t];
        out[l * nA + a] = s;
      }
    }
    if (half === 0) return out;
    for (let a = 0; a < nA; a++) {
      for (let l = 0; l < nL; l++) col[l] = out[l * nA + a];
      for (let p = 0; p < 3; p++) {
        let run = 0;
        for (let l = 0; l < Math.min(half, nL); l++) run += col[l];
        for (let l = 0; l < nL; l++) {
          if (l + half < nL) run += col[l + half];
          if (l - half - 1 >= 0) run -= col[l - half - 1];
          acc[l] = run;
        }
        col.set(acc);
      }
      for (let l = 0; l < nL; l++) out[l * nA + a] = col[l];
    }
    return out;
  };
  const n = pass(num);
  const d = pass(den);
  let dmax = 0;
  for (let i = 0; i < d.length; i++) if (d[i] > dmax) dmax = d[i];
  for (let i = 0; i < n.length; i++) n[i] = d[i] > 1e-6 * dmax ? n[i] / d[i] : NaN;
  return n;
}

export interface ThinMeasure {
  /** sub-sample centre, width (samples), peak and mean over the half-peak interval, all against P */
  centre: number;
  width: number;
  peak: number;
  mean: number;
}

/**
 * Half-peak width, peak and mean of a thin feature on a 1-D profile, to a fraction of a sample.
 * `smooth` is the profile smoothed by a Gaussian of g samples (or the raw profile with g = 0), `raw`
 * the unsmoothed one. The peak is interpolated by a parabola through the three highest samples, the
 * crossings of the half level linearly; the widening by g is undone as for a Gaussian cross-profile
 * (FWHM² = FWHM_true² + 8 ln2 g², peak lowered by sigma / sigma_eff); the mean is the raw profile,
 * linearly interpolated, averaged over the true half-peak interval.
 */
export function thinMeasure(
  smooth: Float64Array,
  raw: Float64Array,
  wts: Float64Array,
  i: number,
  P: number,
  sign: 1 | -1,
  g: number,
): ThinMeasure {
  const n = smooth.length;
  let centre = i;
  let peak = smooth[i];
  if (i > 0 && i < n - 1 && wts[i - 1] > 0 && wts[i + 1] > 0) {
    const y0 = smooth[i - 1];
    const y1 = smooth[i];
    const y2 = smooth[i + 1];
    const den = y0 - 2 * y1 + y2;
    if (sign * den < 0) {
      const d = Math.max(-0.5, Math.min(0.5, (0.5 * (y0 - y2)) / den));
      centre = i + d;
      peak = y1 - 0.25 * (y0 - y2) * d;
    }
  }
  const half = P + (peak - P) / 2;
  const [b0, b1] = interval(smooth, wts, i, half, sign);
  const fr = (inside: number, outside: number): number => {
    if (outside < 0 || outside >= n || wts[outside] <= 0) return 0.5;
    const d = smooth[inside] - smooth[outside];
    return d !== 0 ? Math.min(1, Math.max(0, (smooth[inside] - half) / d)) : 0.5;
  };
  const wEff = Math.max(0.25, b1 - b0 + fr(b0, b0 - 1) + fr(b1, b1 + 1));
  const se2 = (wEff * wEff) / (8 * Math.LN2);
  const sb2 = Math.max(se2 - g * g, 0.25 * se2);
  const width = 2 * Math.sqrt(2 * Math.LN2 * sb2);
  const lo = centre - width / 2;
  let sum = 0;
  const nS = 32;
  for (let k = 0; k < nS; k++) {
    const a = lo + ((k + 0.5) * width) / nS;
    const i0 = Math.max(0, Math.min(n - 2, Math.floor(a)));
    const t = Math.max(0, Math.min(1, a - i0));
    sum += (1 - t) * raw[i0] + t * raw[i0 + 1];
  }
  return { centre, width, peak: P + (peak - P) * Math.sqrt(se2 / sb2), mean: sum / nS };
}
