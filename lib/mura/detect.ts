// Detection of features across scales on a pyramid of the contrast map.
//
//   contrast map C (%) -> pyramid of 2x2 weighted means (level l: 2^l working px per level px)
//   -> each level lightly smoothed (Gaussian, sigma 1 level px, normalised over the pixels with data)
//   -> the level's own noise (neighbour differences, robust) -> regions beyond thresholdSigma x noise
//   and beyond fitSigma x the background model's error -> each region's half-peak region on its level
//   -> one candidate per feature and level -> the candidates of one feature grouped across levels, and
//   the feature measured on the finest level that resolves it with a clear margin over the noise.
//
// Why a pyramid: a feature of diameter d is seen best where it spans a few level pixels; every level
// costs a quarter of the one below, so all scales together cost about 4/3 of the finest one, and each
// level's smoothing kernel stays 7 taps wide whatever the feature size.
//
// The half-peak region found on a smoothed level is larger than the feature's own by the blur of the
// level's box and kernel (sigma^2 = 1 + 1/12 level px^2); with the feature's extent along each axis
// taken as a Gaussian's, the blur adds in quadrature and is taken out of the area (and, as the flux
// over the region is nearly kept, the mean contrast goes up by the square root of the same factor).
// The feature is measured where that correction stays small (the region at least 6 level px wide).

import type { Axis, Ctx, Found } from './context.js';
import { isDuplicate, localCodeStepPct, measureRegion, register } from './context.js';
import { median, robustSigma } from './raster.js';
import type { MuraOptions } from './options.js';

interface Level {
  l: number;
  w: number;
  h: number;
  /** working px per level px */
  f: number;
  /** mean contrast, % */
  m: Float32Array;
  /** data weight (sum of working-pixel weights) */
  n: Float32Array;
  /** smoothed contrast (NaN where there is too little data) */
  s: Float32Array;
  /** 1-sigma noise of s, % */
  noiseS: number;
  /** 1-sigma noise of m for full pixels, % */
  noiseM: number;
  /** local noise of s on a grid of tiles (TILE level px square), never below noiseS; null = noiseS everywhere */
  tileNoise: Float32Array | null;
  tilesX: number;
  /** flood-fill marks and the last mark used */
  stamp: Int32Array;
  gen: number;
  /** peaksOf's map from pixel to its place in the component (+1; 0 elsewhere between calls), made when first
   *  needed (null until then: the field is there from the start, so a level keeps one shape for V8) */
  slot: Int32Array | null;
}

/** A feature seen on one level: its half-peak region there. */
interface Candidate {
  level: Level;
  sign: 1 | -1;
  peak: number;
  peakIdx: number;
  pedestal: number;
  region: Int32Array;
  /** centroid, working px */
  cx: number;
  cy: number;
  /** smaller and larger extent (2 sqrt(4 lambda)), level px */
  minor: number;
  major: number;
  /** peak over the noise of the smoothed level */
  snr: number;
  /** the region's bounding box is taller than wide */
  vertical: boolean;
  /** level px of the region covered by a sharper feature standing on this one (sorted): part of its
   *  extent, left out of its mean contrast; null for none */
  hidden: Int32Array | null;
  /** a spot found above a surface fitted about it (spotAboveSurface): the surface, the level under the
   *  spot wherever it reaches, within `radius` level px of the peak */
  under?: { surface: (x: number, y: number) => number; radius: number };
}

/** most candidates kept per level and sign (the strongest): a guard against pathological maps */
const MAX_CANDIDATES = 400;
/** largest half-peak region flooded on a level that has a coarser one, level px */
const MAX_REGION = 40000;
/** a peak joined to a higher one above its half height is looked at as a feature under that one when it
 *  stands this many detection thresholds above the saddle */
const MERGED_PROMINENCE = 1.5;
/** spotAboveSurface: how far a spot's half-peak radius may be from the scale it was sought at (share) */
const SPOT_SCALE_MATCH = 0.15;
/** sameFeature: a view without a pedestal this many times wider than a spot on one is another feature's */
const SPOT_VIEW_RATIO = 2;
/** basinHalfPeak: most of a catchment's half-peak edge that may run along the watershed */
const BASIN_MAX_CUT = 0.35;
/** ...and its least size, level px (a cloud's half-peak region on the level it is seen on) */
const BASIN_MIN_PX = 12;
/** levels beyond this index are never skipped for size */
const MAX_LEVEL_INDEX = 3;

const SMOOTH_SIGMA = 1;
/** side of the tiles local noise is measured on, level px */
const TILE = 48;
const KERNEL = gaussian(SMOOTH_SIGMA);
/** variance of the level's blur, level px² (box of one level pixel plus the smoothing kernel) */
const BLUR_VAR = SMOOTH_SIGMA * SMOOTH_SIGMA + 1 / 12;
/** FWHM² of that blur */
const BLUR_FWHM2 = 8 * Math.LN2 * BLUR_VAR;

function gaussian(sigma: number): Float32Array {
  const r = Math.ceil(3 * sigma);
  const k = new Float32Array(2 * r + 1);
  let s = 0;
  for (let i = -r; i <= r; i++) s += k[i + r] = Math.exp(-(i * i) / (2 * sigma * sigma));
  for (let i = 0; i < k.length; i++) k[i] /= s;
  return k;
}

/** Pyramid levels of the contrast map down to about 8 pixels on the short side. */
export function buildLevels(ctx: Ctx): Level[] {
  const levels: Level[] = [];
  let m = new Float32Array(ctx.C);
  let n = new Float32Array(ctx.wt);
  let w = ctx.w;
  let h = ctx.h;
  let f = 1;
  const maxFeaturePx = ctx.opts.maxFeatureMm / ctx.mmPerPx;
  for (let l = 0; ; l++) {
    for (let i = 0; i < m.length; i++) if (!(n[i] > 0)) m[i] = 0;
    levels.push(finishLevel({ l, w, h, f, m, n, s: m, noiseS: 0, noiseM: 0, tileNoise: null, tilesX: 0, stamp: new Int32Array(w * h), gen: 0, slot: null }));
    // a feature maxFeatureMm across spans 3 px two levels up: no need to go coarser
    if (Math.min(w, h) < 16 || f > maxFeaturePx / 2) break;
    const w2 = Math.ceil(w / 2);
    const h2 = Math.ceil(h / 2);
    const m2 = new Float32Array(w2 * h2);
    const n2 = new Float32Array(w2 * h2);
    for (let y = 0; y < h; y++) {
      const row = (y >> 1) * w2;
      for (let x = 0; x < w; x++) {
        const q = n[y * w + x];
        if (q <= 0) continue;
        const j = row + (x >> 1);
        m2[j] += q * m[y * w + x];
        n2[j] += q;
      }
    }
    for (let j = 0; j < m2.length; j++) if (n2[j] > 0) m2[j] /= n2[j];
    m = m2;
    n = n2;
    w = w2;
    h = h2;
    f *= 2;
  }
  // Each level is a smoothing of the one below: its noise is no larger than that level's (a larger
  // figure is the level's own structure - features - read as noise) ...
  for (let k = 1; k < levels.length; k++) {
    const a = levels[k];
    const b = levels[k - 1];
    if (a.noiseS > b.noiseS) {
      const g = b.noiseS / a.noiseS;
      a.noiseS = b.noiseS;
      if (a.tileNoise) for (let t = 0; t < a.tileNoise.length; t++) a.tileNoise[t] = Math.max(a.noiseS, a.tileNoise[t] * g);
    }
  }
  // ... and can only average down as fast as white noise does: the finer level bounds the coarser
  for (let k = 1; k < levels.length; k++) {
    const a = levels[k];
    const b = levels[k - 1];
    if (a.noiseM < b.noiseM / 2) {
      const g = (b.noiseM / 2) / Math.max(a.noiseM, 1e-12);
      a.noiseM *= g;
      a.noiseS *= g;
      if (a.tileNoise) for (let t = 0; t < a.tileNoise.length; t++) a.tileNoise[t] = Math.max(a.tileNoise[t], a.noiseS);
    }
  }
  return levels;
}

// The smoothing below is written out for the 7 taps of SMOOTH_SIGMA = 1 (these loops are most of a level's
// cost); each sum is still taken tap by tap from the first, in the order a loop over KERNEL would take it.
if (KERNEL.length !== 7) throw new Error('detect.ts: the level smoothing is written for a kernel of 7 taps');
// the taps from the outermost (K0, also KERNEL[6]) to the centre (K3); the kernel is symmetric
const K0 = KERNEL[0];
const K1 = KERNEL[1];
const K2 = KERNEL[2];
const K3 = KERNEL[3];

/**
 * Normalised convolution of a level: m*n and n smoothed by KERNEL along rows and then columns, their
 * ratio where the smoothed weight reaches minDen (NaN elsewhere). Weights of zero add nothing (m is 0
 * where n is).
 */
function smoothLevel(m: Float32Array, n: Float32Array, w: number, h: number, minDen: number): Float32Array {
  const tmpA = new Float32Array(w * h);
  const tmpB = new Float32Array(w * h);
  const r = 3;
  for (let y = 0; y < h; y++) {
    const row = y * w;
    for (let x = 0; x < w; x++) {
      const i = row + x;
      if (x >= r && x + r < w) {
        const q0 = n[i - 3];
        const q1 = n[i - 2];
        const q2 = n[i - 1];
        const q3 = n[i];
        const q4 = n[i + 1];
        const q5 = n[i + 2];
        const q6 = n[i + 3];
        tmpA[i] =
          K0 * q0 * m[i - 3] + K1 * q1 * m[i - 2] + K2 * q2 * m[i - 1] + K3 * q3 * m[i] + K2 * q4 * m[i + 1] + K1 * q5 * m[i + 2] + K0 * q6 * m[i + 3];
        tmpB[i] = K0 * q0 + K1 * q1 + K2 * q2 + K3 * q3 + K2 * q4 + K1 * q5 + K0 * q6;
      } else {
        let a = 0;
        let b = 0;
        const lo = Math.max(0, x - r);
        const hi = Math.min(w - 1, x + r);
        for (let xx = lo; xx <= hi; xx++) {
          const q = n[row + xx];
          if (q <= 0) continue;
          const k = KERNEL[xx - x + r];
          a += k * q * m[row + xx];
          b += k * q;
        }
        tmpA[i] = a;
        tmpB[i] = b;
      }
    }
  }
  // along columns; each sum rounded to single precision before the ratio, as when kept in a raster
  const s = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    const row = y * w;
    if (y >= r && y + r < h) {
      const w2 = 2 * w;
      const w3 = 3 * w;
      for (let x = 0; x < w; x++) {
        const i = row + x;
        const a = Math.fround(
          K0 * tmpA[i - w3] + K1 * tmpA[i - w2] + K2 * tmpA[i - w] + K3 * tmpA[i] + K2 * tmpA[i + w] + K1 * tmpA[i + w2] + K0 * tmpA[i + w3],
        );
        const b = Math.fround(
          K0 * tmpB[i - w3] + K1 * tmpB[i - w2] + K2 * tmpB[i - w] + K3 * tmpB[i] + K2 * tmpB[i + w] + K1 * tmpB[i + w2] + K0 * tmpB[i + w3],
        );
        s[i] = b >= minDen ? a / b : NaN;
      }
    } else {
      const lo = Math.max(0, y - r);
      const hi = Math.min(h - 1, y + r);
      for (let x = 0; x < w; x++) {
        let a = 0;
        let b = 0;
        for (let yy = lo; yy <= hi; yy++) {
          const k = KERNEL[yy - y + r];
          a += k * tmpA[yy * w + x];
          b += k * tmpB[yy * w + x];
        }
        const af = Math.fround(a);
        const bf = Math.fround(b);
        s[row + x] = bf >= minDen ? af / bf : NaN;
      }
    }
  }
  return s;
}

function finishLevel(lv: Level): Level {
  const { w, h, m, n, f } = lv;
  const full = f * f;
  const s = smoothLevel(m, n, w, h, 0.35 * full);

  // noise of m from full pixels: m_i minus the mean of its four neighbours (white noise: sqrt(1.25) sigma)
  const step = Math.max(1, Math.floor((w * h) / 60000));
  const diffs = new Float64Array(Math.ceil((w * h) / step));
  let nm = 0;
  const fullN = 0.999 * full;
  for (let i = w + 1; i < w * h - w - 1; i += step) {
    const x = i % w;
    if (x === 0 || x === w - 1) continue;
    if (n[i] < fullN || n[i - 1] < fullN || n[i + 1] < fullN || n[i - w] < fullN || n[i + w] < fullN) continue;
    diffs[nm++] = m[i] - 0.25 * (m[i - 1] + m[i + 1] + m[i - w] + m[i + w]);
  }
  const noiseM = nm >= 30 ? robustSigma(diffs.subarray(0, nm)) / Math.sqrt(1.25) : 0;
  // white noise through the 2-D kernel: sigma x sum(k^2) (separable: (sum k_i^2)^2 under a square root)
  let k2 = 0;
  for (let i = 0; i < KERNEL.length; i++) k2 += KERNEL[i] * KERNEL[i];
  // the noise that survives the smoothing, measured on the smoothed level itself: s_i minus the mean of
  // the values D px away on either side (beyond the kernel's reach, so correlated noise at the pixel
  // scale - JPEG blocks, demosaicing, resampling - is counted); for white noise through the kernel the
  // difference has variance (1.5 - 2 rho(D) + 0.5 rho(2D)) sigma_s^2, rho(d) = exp(-d^2 / (4 sigma^2))
  const D = 3;
  const rho = (d: number): number => Math.exp(-(d * d) / (4 * SMOOTH_SIGMA * SMOOTH_SIGMA));
  const gain = Math.sqrt(1.5 - 2 * rho(D) + 0.5 * rho(2 * D));
  // |differences| of every pixel (the far tail needs them all), with the tile each belongs to
  const tilesX = Math.ceil(w / TILE);
  const tilesY = Math.ceil(h / TILE);
  const useTiles = tilesX >= 3 && tilesY >= 3;
  const absd = new Float32Array(2 * w * h);
  const tileOf = new Int32Array(useTiles ? 2 * w * h : 0);
  let nd = 0;
  for (let y = 0; y < h; y++) {
    const tileRow = Math.floor(y / TILE) * tilesX;
    for (let x = 0; x < w; x++) {
      const i = y * w + x;
      const v = s[i];
      if (!Number.isFinite(v)) continue;
      const tile = tileRow + Math.floor(x / TILE);
      if (x >= D && x < w - D) {
        const d = v - 0.5 * (s[i - D] + s[i + D]);
        if (Number.isFinite(d)) {
          if (useTiles) tileOf[nd] = tile;
          absd[nd++] = Math.abs(d);
        }
      }
      if (y >= D && y < h - D) {
        const d = v - 0.5 * (s[i - D * w] + s[i + D * w]);
        if (Number.isFinite(d)) {
          if (useTiles) tileOf[nd] = tile;
          absd[nd++] = Math.abs(d);
        }
      }
    }
  }
  const diffsAbs = absd.subarray(0, nd);
  // Two figures of the same sigma, the larger taken: the 90th percentile of |difference| / 1.645 and
  // the 99.99th / 3.89. They agree for Gaussian noise. Structured error on a minority of the pixels -
  // 8-bit quantisation contours on a smooth field with too little noise to dither them, JPEG blocks
  // whose mean was rounded by a code value - is missed by the median and gives the differences heavy
  // tails; those tails are what would otherwise pass the threshold as features. Features themselves
  // cover too few of the pixels that have large differences on any one level to move either figure;
  // on small (coarse) levels they could, so the tail is read only where there are 20 000 differences.
  const [q90, q9999] = nd >= 30 ? quantilesOf(diffsAbs, [0.9, 0.9999]) : [0, 0];
  const bulk = nd >= 30 ? q90 / 1.645 / gain : 0;
  const tail = nd >= 20000 ? q9999 / 3.89 / gain : 0;
  const noiseS = Math.max(noiseM * k2, bulk, tail);
  // Noise is not the same everywhere: after the falloff correction the dim corners of the photo carry
  // more shot noise and coarser 8-bit steps than the centre. Each tile's bulk figure (75th percentile
  // of |difference| / 1.15, which a line or spot covering under a quarter of the tile does not move),
  // scaled by the level's ratio of tail to bulk, where that exceeds the level's own figure.
  let tileNoise: Float32Array | null = null;
  if (useTiles && bulk > 0) {
    const ratio = noiseS / bulk;
    const nTiles = tilesX * tilesY;
    const bins = 128;
    const top = 8 * bulk * gain; // |difference| range of the tile histograms
    const hist = new Uint32Array(nTiles * bins);
    const count = new Uint32Array(nTiles);
    for (let k = 0; k < nd; k++) {
      const v = (diffsAbs[k] / top) * bins;
      hist[tileOf[k] * bins + (v >= bins - 1 ? bins - 1 : v | 0)]++;
    }
    for (let t = 0; t < nTiles; t++) for (let b = 0; b < bins; b++) count[t] += hist[t * bins + b];
    tileNoise = new Float32Array(nTiles);
    for (let t = 0; t < nTiles; t++) {
      let q75 = 0;
      if (count[t] >= 100) {
        const target = 0.75 * count[t];
        let acc = 0;
        for (let b = 0; b < bins; b++) {
          const c = hist[t * bins + b];
          if (acc + c >= target) {
            q75 = ((b + (target - acc) / Math.max(c, 1)) / bins) * top;
            break;
          }
          acc += c;
        }
      }
      tileNoise[t] = Math.max(noiseS, (q75 / 1.15 / gain) * ratio);
    }
  }
  return { ...lv, s, noiseM, noiseS, tileNoise, tilesX };
}

/**
 * Find features on all levels and register them (measured at working resolution) in ctx.found.
 * useFitFloor: features must also stand fitSigma x the background model's error above it (off for the
 * first, low-order round, whose model error is mostly the features it is there to find).
 */
export function detectFeatures(ctx: Ctx, levelsIn: Level[], useFitFloor = true): void {
  let levels = levelsIn;
  let original: Float32Array | null = null;
  const o = ctx.opts;
  const floor = useFitFloor ? o.fitSigma * ctx.fitErrorPct : 0;
  // bands and lines across the whole panel first, so that the pieces of them the round search finds
  // (where another feature crosses them) count as the band
  // (not in the first, low-order round: the misfit of that surface runs across the panel too)
  if (useFitFloor) {
    const bands = findBands(ctx, levels[Math.min(1, levels.length - 1)], floor);
    // the search for everything else runs on the map with the bands' profiles taken out: a spot sitting on
    // a band is measured against the band around it (and a bright spot on a dark band is found at all)
    if (bands.length > 0) {
      original = ctx.C;
      ctx.C = withoutBandProfiles(ctx, bands);
      levels = buildLevels(ctx);
    }
  }
  const cands: Candidate[] = [];
  for (const lv of levels) {
    const thr = Math.max(o.thresholdSigma * lv.noiseS, floor);
    const before = cands.length;
    // a spot (narrower than a cloud) is measured against the level under it (halfPeak)
    const spotPx = o.cloudMinMm / (ctx.mmPerPx * lv.f);
    for (const sign of [1, -1] as const) candidatesOn(lv, sign, thr, cands, spotPx, !ctx.black);
    if (process.env.MURA_DBG) console.log(`level ${lv.l} ${lv.w}x${lv.h} noiseM ${lv.noiseM.toFixed(4)} noiseS ${lv.noiseS.toFixed(4)} thr ${thr.toFixed(3)} candidates ${cands.length - before}`);
  }
  // group across levels: the same feature is seen on neighbouring levels at about the same place
  cands.sort((a, b) => a.level.l - b.level.l || b.snr - a.snr);
  const groups: Candidate[][] = [];
  for (const c of cands) {
    let home: Candidate[] | null = null;
    for (const g of groups) {
      if (g.some((d) => sameFeature(c, d))) {
        home = g;
        break;
      }
    }
    if (home) home.push(c);
    else groups.push([c]);
  }
  const chosen = groups.map(pick);
  const fallback = new Map<Candidate, Candidate | null>();
  groups.forEach((g, k) => fallback.set(chosen[k], fallbackOf(g, chosen[k])));
  if (process.env.MURA_DBG) for (const g of groups) console.log('group', g.map((c) => `L${c.level.l} pk${c.peak.toFixed(2)} ped${c.pedestal.toFixed(2)} at ${peakOf(c).map((v) => (v * ctx.mmPerPx).toFixed(0))} minor ${c.minor.toFixed(1)} snr ${c.snr.toFixed(0)}`).join(' ; '));
  // strongest first, so that a weaker re-detection of the same pixels is the one dropped
  chosen.sort((a, b) => Math.abs(b.peak - b.pedestal) * Math.sqrt(b.region.length * b.level.f ** 2) - Math.abs(a.peak - a.pedestal) * Math.sqrt(a.region.length * a.level.f ** 2));
  const tryOne = (c: Candidate): 'taken' | 'dropped' | 'duplicate' => {
    const f = toFound(ctx, c);
    if (!f) return 'dropped';
    if (Math.abs(f.contrastPct) < floor) return 'dropped';
    if (f.zNoise < o.thresholdSigma) return 'dropped';
    // a half-peak region smaller than a quarter of the smallest feature searched for is a pixel or two
    // (an edge or corner artefact), not a feature this analysis resolves
    if (f.unblurredAreaMm2 < (0.25 * Math.PI * o.minFeatureMm ** 2) / 4) return 'dropped';
    // black fields show light that leaks (bleed, clouding, glow): a spot or cloud darker than its
    // surround is less leakage, not a defect of the black, and where the lens and the panel roll off
    // towards the corners it is mostly the low-order surface missing the roll-off
    if (ctx.black && f.sign < 0) return 'dropped';
    // no larger than two JPEG blocks and no stronger than a block's coding error (a quantised AC term
    // draws a pattern of a code value or two over its block; three taken): cannot be told from it
    const extentMm = Math.max(f.lengthMm, 2 * Math.sqrt(f.areaMm2 / Math.PI));
    const step = localCodeStepPct(ctx, f.cx, f.cy) ?? o.codeStepPct;
    const wholeCode = step !== null ? step / (o.codeLevel?.stepCodes ?? 1) : null;
    if (o.jpegBlockMm !== null && extentMm < 2 * o.jpegBlockMm && (wholeCode === null || Math.abs(f.peakContrastPct) < 3 * wholeCode)) return 'dropped';
    // within one or a few of the 8-bit coding's plateaus: must beat the code step
    if (process.env.MURA_DBG && step !== null) console.log(`  step at (${(f.cx * ctx.mmPerPx).toFixed(0)},${(f.cy * ctx.mmPerPx).toFixed(0)}) ${step.toFixed(2)} % (centre ${o.codeStepPct?.toFixed(2)}) C ${f.contrastPct.toFixed(2)} extent ${extentMm.toFixed(0)}`);
    if (step !== null && Math.abs(f.contrastPct) < codingFloorPct(o, extentMm, step)) return 'dropped';
    if (isDuplicate(ctx, f)) return 'duplicate';
    register(ctx, f);
    return 'taken';
  };
  for (const c of chosen) {
    const other = fallback.get(c);
    const r = tryOne(c);
    if (process.env.MURA_DBG && r !== 'taken') console.log(`  chosen L${c.level.l} at ${peakOf(c).map((v) => (v * ctx.mmPerPx).toFixed(0))} ${r}; fallback ${other ? `L${other.level.l}` : 'none'}`);
    // (a view dropped as a duplicate is a feature found already: nothing more is tried)
    if (r === 'dropped' && other) {
      const r2 = tryOne(other);
      if (process.env.MURA_DBG) console.log(`    fallback ${r2}`);
    }
  }
  // what follows (masks, tile seams and steps) works on the contrast map as it is
  if (original) ctx.C = original;
}

/**
 * The least mean contrast (%) a finding `extentMm` across needs to stand out of the 8-bit coding where
 * the level step is `stepPct` (MuraOptions.codeStepPct; CodeLevel.stepCodes of a code value): the whole
 * step under 25 mm (one or a few of the coding's plateaus), a share of it beyond, and at any size the
 * bare staircase's share of a code (CodeLevel.bareStepCodes).
 */
export function codingFloorPct(o: MuraOptions, extentMm: number, stepPct: number): number {
  // JPEG: flat blocks come out at the rounded block mean, so whole regions sit up to half a code value
  // off over 100 mm and more, edged by contours (measured on generated JPEGs of quiet fields)
  const share = extentMm < 25 ? 1 : o.jpegBlockMm !== null ? o.jpegPlateauShare : extentMm < 100 ? 0.5 : 0;
  // a bare staircase of whole codes (a photo nearly free of noise): a plateau edged by its neighbours
  // reads as up to a code value of contrast, whatever its size
  const stairPct = ((o.codeLevel?.bareStepCodes ?? 0) * stepPct) / (o.codeLevel?.stepCodes ?? 1);
  return o.codeStepFactor * Math.max(share * stepPct, stairPct);
}

/** How much more noise survives averaging than white noise would, from the levels' own noise. */
export function noiseCorrelation(levels: Level[]): number {
  const base = levels[0].noiseM;
  if (!(base > 0)) return 1;
  let rho = 1;
  for (const lv of levels.slice(1, 4)) if (lv.noiseM > 0) rho = Math.max(rho, (lv.noiseM * lv.f) / base);
  return rho;
}

function candidatesOn(lv: Level, sign: 1 | -1, thr: number, out: Candidate[], spotPx: number, ringFit: boolean): void {
  const { w, h, s } = lv;
  const seen = new Uint8Array(w * h);
  const stack: number[] = [];
  const comp: number[] = [];
  const peaks: number[] = [];
  const merged: number[] = [];
  const saddles: number[] = [];
  for (let i0 = 0; i0 < w * h; i0++) {
    if (seen[i0] || !(sign * s[i0] > thr)) continue;
    // connected component above threshold
    comp.length = 0;
    stack.push(i0);
    seen[i0] = 1;
    while (stack.length) {
      const i = stack.pop() as number;
      comp.push(i);
      const x = i % w;
      if (x > 0) push(i - 1);
      if (x < w - 1) push(i + 1);
      if (i >= w) push(i - w);
      if (i < w * h - w) push(i + w);
    }
    if (comp.length < 2) continue;
    // several peaks in one component (features touching above the threshold): each peak standing
    // clearly above its saddle gets its own half-peak region
    peaksOf(lv, comp, sign, thr, peaks, merged, saddles);
  }
  peaks.sort((a, b) => sign * s[b] - sign * s[a]);
  const mine: Candidate[] = [];
  for (const p of peaks.slice(0, MAX_CANDIDATES)) {
    const c = halfPeak(lv, p, sign, thr, spotPx, ringFit);
    if (!c) continue;
    out.push(c);
    mine.push(c);
    // a feature on a plateau of its sign: the plateau is a feature too
    if (sign * c.pedestal > 0) {
      const under = c.under ? plateauBeneath(lv, c, sign, thr, c.under, mine.filter((o) => o !== c && sign * o.pedestal > 0)) : plateauUnder(lv, c, sign, thr, null);
      if (under) out.push(under);
    }
  }
  // every peak of the level's components, the markers a catchment is split between (basinHalfPeak)
  const markers = [...peaks, ...merged];
  // two clouds side by side, the lower joined to the higher above half its height: its half-peak region
  // within its own catchment (see basinHalfPeak), and the higher one's, when it took in this one's top,
  // kept to its own catchment too
  // (round ones only: a band with a spot of the other sign on it shows as two peaks along it, and its
  // region cut in two leaves most of the band out of the next round's mask)
  const takeBasin = (lo: number, basin: Candidate | null, cloudSized: boolean): boolean => {
    if (!basin || basin.major >= 2 * basin.minor) return false;
    if (cloudSized && 2 * Math.sqrt(basin.region.length / Math.PI) < spotPx) return false;
    out.push(basin);
    for (let q2 = 0; q2 < mine.length; q2++) {
      const c = mine[q2];
      if (!sortedHas(c.region, lo) || c.pedestal !== 0 || c.hidden !== null) continue;
      const own = catchment(lv, c.peakIdx, sign, markers);
      if (!own || own.region.length < BASIN_MIN_PX) continue;
      const cut = candidateOf(lv, sign, sign * own.top, c.peakIdx, 0, own.region, noiseAt(lv, c.peakIdx), null);
      if (cut.major >= 2 * cut.minor) continue;
      out[out.indexOf(c)] = cut;
      mine[q2] = cut;
    }
    return true;
  };
  // A broad peak joined to a higher, sharper one above half its own height (a cloud with a spot on its
  // flank) has no half-peak region of its own that stops short of the spot, yet it is a feature: its
  // half-peak region is flooded through the spot's surroundings.
  for (let q = 0; q < merged.length; q++) {
    const lo = merged[q];
    // a catchment of a cloud's size first: a cloud beside another of about its height shows a cap above
    // the saddle of a spot's size
    const basin = basinHalfPeak(lv, lo, sign, thr, markers);
    if (takeBasin(lo, basin, true)) continue;
    // a sharp peak joined to a higher feature above half its height (a spot on a cloud's flank): its
    // half-peak region taken above the saddle it meets the other at, kept when it is a spot's size
    const spot = halfPeak(lv, lo, sign, thr, spotPx, ringFit, saddles[q]);
    if (spot) {
      out.push(spot);
      continue;
    }
    let near: Candidate | null = null;
    let dBest = Infinity;
    const lx = lo % lv.w;
    const ly = (lo - lx) / lv.w;
    for (const c of mine) {
      if (!(sign * c.peak > sign * s[lo])) continue;
      const d = Math.hypot((c.cx + 0.5) / lv.f - 0.5 - lx, (c.cy + 0.5) / lv.f - 0.5 - ly);
      if (d < dBest) {
        dBest = d;
        near = c;
      }
    }
    if (!near) continue;
    const under = plateauUnder(lv, near, sign, thr, lo);
    if (under) {
      out.push(under);
      continue;
    }
    takeBasin(lo, basin, false);
  }
  function push(j: number): void {
    if (!seen[j] && sign * s[j] > thr) {
      seen[j] = 1;
      stack.push(j);
    }
  }
}

/**
 * The peaks of a component that stand on their own: pixels taken from the highest down and joined
 * into regions (union-find); where two regions meet, the lower peak is kept as a feature of its own
 * when the meeting level (the saddle) is at most half of its height, i.e. its half-peak region does not
 * reach the higher one. The highest peak is always kept. A lower peak standing out of its saddle by
 * MERGED_PROMINENCE x the threshold but joined above half its height goes to mergedOut instead, with the
 * saddle's level (signed contrast) at the same place in saddleOut.
 */
function peaksOf(lv: Level, comp: number[], sign: 1 | -1, thr: number, keptOut: number[], mergedOut: number[], saddleOut: number[]): void {
  const { w, s } = lv;
  const n = comp.length;
  // pixels from the highest down (ties in the component's order)
  const key = new Float64Array(n);
  for (let k = 0; k < n; k++) key[k] = sign * s[comp[k]];
  const rank = new Int32Array(n);
  for (let k = 0; k < n; k++) rank[k] = k;
  rank.sort((a, b) => key[b] - key[a] || a - b);
  // union-find over places in the component; slot maps a pixel to its place + 1 (0: not in it)
  const slot = (lv.slot ??= new Int32Array(lv.w * lv.h));
  for (let k = 0; k < n; k++) slot[comp[k]] = k + 1;
  const parent = new Int32Array(n).fill(-1); // -1: not reached yet
  const peakOf = new Int32Array(n); // a root's highest pixel
  const find = (i: number): number => {
    let r = i;
    while (parent[r] !== r) r = parent[r];
    let j = i;
    while (j !== r) {
      const nx = parent[j];
      parent[j] = r;
      j = nx;
    }
    return r;
  };
  const kept: number[] = [comp[rank[0]]];
  const merged: number[] = [];
  const saddles: number[] = [];
  const size = s.length;
  for (let t = 0; t < n; t++) {
    const li = rank[t];
    const i = comp[li];
    const v = key[li];
    parent[li] = li;
    peakOf[li] = i;
    const x = i % w;
    for (let q = 0; q < 4; q++) {
      const j = q === 0 ? (x > 0 ? i - 1 : -1) : q === 1 ? (x < w - 1 ? i + 1 : -1) : q === 2 ? i - w : i + w;
      if (j < 0 || j >= size) continue;
      const lj = slot[j] - 1;
      if (lj < 0 || parent[lj] < 0) continue;
      const a = find(li);
      const b = find(lj);
      if (a === b) continue;
      const pa = peakOf[a];
      const pb = peakOf[b];
      const hi = sign * s[pa] >= sign * s[pb] ? pa : pb;
      const lo = hi === pa ? pb : pa;
      const loV = sign * s[lo];
      if (lo !== i && v <= 0.5 * loV && loV >= 2 * thr && kept.length < 50) kept.push(lo);
      // joined above its half height but standing out of the saddle by more than the noise could
      // raise it (MERGED_PROMINENCE x the threshold): a feature of its own under a sharper one, maybe
      else if (lo !== i && loV - v >= MERGED_PROMINENCE * thr && loV >= 2 * thr && merged.length < 50) {
        merged.push(lo);
        saddles.push(sign * v);
      }
      parent[a] = b;
      peakOf[b] = hi;
    }
  }
  for (let k = 0; k < n; k++) slot[comp[k]] = 0;
  keptOut.push(...kept);
  mergedOut.push(...merged);
  saddleOut.push(...saddles);
}

/** Noise of the smoothed level at a pixel: its tile's figure, or the level's. */
function noiseAt(lv: Level, i: number): number {
  if (!lv.tileNoise) return lv.noiseS;
  const x = i % lv.w;
  const y = (i - x) / lv.w;
  return lv.tileNoise[Math.floor(y / TILE) * lv.tilesX + Math.floor(x / TILE)];
}

/** Pixels 4-connected to start where sign * s >= level; marks them with a fresh stamp on the level.
 *  Null when the region is too large for the level or (stopAbove) reaches a pixel above the start. */
function flood(lv: Level, start: number, sign: 1 | -1, level: number, stopAbove = true): { region: Int32Array; gen: number } | null {
  const { w, h, s, stamp } = lv;
  const gen = ++lv.gen;
  const out: number[] = [start];
  stamp[start] = gen;
  // a pixel above the start means the start is not the top of its region (see halfPeak): stop there
  const top = sign * s[start];
  let above = false;
  for (let k = 0; k < out.length && !above; k++) {
    // a region this large is measured on a coarser level, at a fraction of the cost
    if (out.length > MAX_REGION && lv.l < MAX_LEVEL_INDEX) return null;
    const i = out[k];
    const x = i % w;
    if (x > 0) visit(i - 1);
    if (x < w - 1) visit(i + 1);
    if (i >= w) visit(i - w);
    if (i < w * h - w) visit(i + w);
  }
  if (above) return null;
  return { region: Int32Array.from(out), gen };
  function visit(j: number): void {
    if (stamp[j] === gen) return;
    const v = sign * s[j];
    if (!(v >= level)) return;
    if (stopAbove && v > top) above = true;
    stamp[j] = gen;
    out.push(j);
  }
}

/**
 * The half-peak region around a peak on a level, against the local surround. With a `base` (a saddle's
 * signed contrast, see candidatesOn) the region is taken halfway between it and the peak, and only a
 * spot-sized one is kept.
 */
function halfPeak(lv: Level, peakIdx: number, sign: 1 | -1, thr: number, spotPx: number, ringFit: boolean, base = 0): Candidate | null {
  const { w, s } = lv;
  let peak = s[peakIdx];
  // First against the global background. A feature sitting on a plateau of the same sign (a spot on a
  // cloud) is measured against the plateau: the ring around the region is well above the background,
  // and so is a ring twice as far out (a feature's own tail, an exponential glow say, falls away
  // between the two rings instead). A peak that does not stand out of its surround by the threshold is
  // part of something larger, found on a coarser level.
  // (flood returns null for a peak that is not the top of its own half-peak region: a noise bump on
  // the flank of something larger - a glow's tail, a cloud's shoulder - found from its own top)
  let fl = flood(lv, peakIdx, sign, sign * (base + 0.5 * (peak - base)));
  if (!fl) return null;
  const noise = noiseAt(lv, peakIdx);
  // The largest pixel of a noisy level stands above the feature's true top by about
  // noise x sqrt(2 ln n) for n pixels near the top (3.5 sigma for a few thousand), which raises the
  // half-peak level and shrinks the region: a 3 % cloud on a level of 0.2 % noise came out with 40 % of
  // its area. The top is taken from a quadratic surface fitted around the peak instead.
  const top = fittedTop(lv, peakIdx, halfWidth(fl.region, w), sign);
  if (top !== null && sign * top < sign * peak) {
    peak = top;
    fl = flood(lv, peakIdx, sign, sign * (base + 0.5 * (peak - base)));
    if (!fl) return null;
  }
  if (sign * (peak - base) < (thr * noise) / lv.noiseS) return null;
  let pedestal = 0;
  // A spot is measured against the level under it: a quadratic surface fitted over a ring 2.5 to 4 times
  // its half-peak radius out (where a Gaussian spot is down to 1.3 % of its top and less), evaluated at
  // its centre. A cloud's flank or top under the spot is followed by the surface; a ring's median (the
  // rule for larger features, below) sits below a cloud's top and off a flank, and on generated maps
  // spots on a cloud's upper flank came out with +34 % contrast and +65 % area for want of it.
  // Lit fields only: on black fields the surface also follows a glow's steep tail, and the specks of
  // noise on it measured against it came out as spots (4 -> 17 findings of SEMU >= 1 besides the glows
  // on 20 generated black fields).
  // narrower than a cloud: the equivalent diameter of a region of n level px under spotPx
  const spotSized = (n: number): boolean => 2 * Math.sqrt(n / Math.PI) < spotPx;
  const isSpot = spotSized(fl.region.length);
  // the half-peak region flooded again against a pedestal level, when it is still of a spot's size
  const spotOn = (level: number): ReturnType<typeof flood> => {
    const again = flood(lv, peakIdx, sign, sign * (level + 0.5 * (peak - level)));
    return again && spotSized(again.region.length) ? again : null;
  };
  if (base !== 0) {
    // measured above a saddle (see candidatesOn): spots only, against the surface of their ring when it
    // fits, else against the saddle
    if (!isSpot) return null;
    const ring = ringFit ? ringSurface(lv, fl.region, fl.gen, 2.5, 4) : null;
    pedestal = base;
    if (ring && ring.rms < 0.25 * Math.abs(peak - ring.level) && sign * (peak - ring.level) >= thr) {
      const again = spotOn(ring.level);
      if (again) {
        pedestal = ring.level;
        fl = again;
      }
    }
    return candidateOf(lv, sign, peak, peakIdx, pedestal, fl.region.sort(), noise, null);
  }
  // a spot standing above the top of the cloud it sits on (see spotAboveSurface)
  if (!isSpot && ringFit) {
    const sp = spotAboveSurface(lv, peakIdx, sign, peak, thr, noise, spotPx);
    if (sp) return sp;
  }
  const ring = isSpot && ringFit ? ringSurface(lv, fl.region, fl.gen, 2.5, 4) : null;
  const near = surround(lv, fl.region, fl.gen, 1.5, 2.5);
  if (ring) {
    // a peak that does not stand out of its surround is part of something larger (as below)
    if (near !== null && sign * near > 0 && sign * (peak - near) < thr) return null;
    const p = ring.level;
    if (sign * p > 0 && sign * (peak - p) < thr) return null;
    // on a plateau of the other sign (a bright spot on a dark cloud) the region from the background is
    // the part of the spot above the background, and the ring about it lies on the spot's own flanks:
    // the spot is sought at its own scale, as one above its cloud's top is (spotAboveSurface)
    if (-sign * p > 3 * noise) {
      const sp = spotAboveSurface(lv, peakIdx, sign, peak, thr, noise, spotPx, true);
      if (sp) return sp;
    }
    // a level of either sign, clear of the noise, and a surface that fits the ring well; of the other
    // sign only while the half level stays on the spot's side of the background (below that the flood
    // would run out over the background beyond the plateau)
    if (Math.abs(p) > 3 * noise && ring.rms < 0.25 * Math.abs(peak - p) && (sign * p > 0 || -sign * p < sign * peak)) {
      const again = spotOn(p);
      if (again) {
        pedestal = p;
        fl = again;
      }
    }
  } else if (near !== null && sign * near > 0) {
    if (sign * (peak - near) < thr) return null;
    const far = surround(lv, fl.region, fl.gen, 3, 4);
    // On black fields (no ring surfaces there) a region against the panel's edge is the top of a glow,
    // and the ring about it lies on the glow's own tail, which an edge or a corner cuts to a part of a
    // ring: the tail was taken for a plateau, and a weak corner glow (15-100 % above the field) came out
    // in two pieces, the top measured above its own tail (see DEVELOPERS.md "Study log", Weak glows).
    const glowTop = !ringFit && touchesBorder(lv, fl.region);
    if (!glowTop && sign * near > 3 * noise && far !== null && sign * far >= 0.6 * sign * near) {
      pedestal = near;
      const again = flood(lv, peakIdx, sign, sign * (pedestal + 0.5 * (peak - pedestal)));
      if (!again) return null;
      fl = again;
    }
  } else if (near !== null && -sign * near > 3 * noise && -sign * near < sign * peak && isSpot) {
    // A spot whose ring had too little data for a surface (at the panel's edge), on a plateau of the
    // other sign, is measured against its ring's median when the ring twice as far out is on the plateau
    // too. Only spots: around something of a cloud's size the surface's own bends are of its size too,
    // and a dip between two bright clouds measured against them came out as a dark cloud (seen on
    // generated photos).
    const far = surround(lv, fl.region, fl.gen, 3, 4);
    if (far !== null && -sign * far >= 0.6 * -sign * near) {
      // and still a spot measured so (a dip that spreads out to a cloud's size is no spot on a plateau)
      const again = spotOn(near);
      if (again) {
        pedestal = near;
        fl = again;
      }
    }
  }
  return candidateOf(lv, sign, peak, peakIdx, pedestal, fl.region.sort(), noise, null);
}

/**
 * A spot on a cloud's upper flank that stands above the cloud's own top: the half-peak region taken from
 * the background spreads over the cloud, which shows no peak of its own, and the spot was lost in it (a
 * 3 % spot of 24 mm on a 5 % cloud of 118 mm, 30-60 mm from the cloud's centre). The spot's own scale is
 * sought: for radii r from 1.5 level px up to a spot's, a quadratic surface is fitted over the ring 2.5 to
 * 4 r out around the peak (as for any spot, halfPeak), and the region standing above that surface by half
 * of the peak's height over it is flooded from the peak; the spot is at the radius whose region is r in
 * radius, within SPOT_SCALE_MATCH (the best match taken). Kept when the surface under the peak stands
 * clear of the noise on the spot's side (a plateau), the spot clear of the threshold above it, and the
 * ring fits within a quarter of the spot's height (with `otherSign`, a plateau of the other sign: a bright
 * spot on a dark cloud, deeper than the spot rises). A lone cloud's cap, which a quadratic follows, leaves
 * too little above the surface at small radii, and at larger ones a region far wider than the radius.
 * The plateau is then found under the spot (plateauBeneath, in candidatesOn).
 */
function spotAboveSurface(lv: Level, peakIdx: number, sign: 1 | -1, peak: number, thr: number, noise: number, spotPx: number, otherSign = false): Candidate | null {
  const { w, h, s } = lv;
  const px = peakIdx % w;
  const py = (peakIdx - px) / w;
  const maxN = (Math.PI * spotPx * spotPx) / 4;
  const A = new Float64Array(36);
  const b = new Float64Array(6);
  const t = new Float64Array(6);
  let best: { err: number; region: Int32Array; level: number; under: NonNullable<Candidate['under']> } | null = null;
  for (let r = 1.5; 2 * r < spotPx; r *= 1.2) {
    const r0 = 2.5 * r;
    const r1 = 4 * r;
    const ri = Math.ceil(r1);
    // the ring's samples (a grid of at most about 64 x 64 over its box)
    const stride = Math.max(1, Math.floor((2 * ri + 1) / 64));
    const ring: number[] = [];
    for (let y = Math.max(0, py - ri); y <= Math.min(h - 1, py + ri); y += stride) {
      for (let x = Math.max(0, px - ri); x <= Math.min(w - 1, px + ri); x += stride) {
        const d2 = (x - px) ** 2 + (y - py) ** 2;
        if (d2 < r0 * r0 || d2 > r1 * r1) continue;
        const v = s[y * w + x];
        if (Number.isFinite(v)) ring.push((x - px) / r1, (y - py) / r1, v);
      }
    }
    // most of the ring on the panel
    const m = ring.length / 3;
    if (m < 24 || m < (0.6 * Math.PI * (r1 * r1 - r0 * r0)) / (stride * stride)) continue;
    A.fill(0);
    b.fill(0);
    for (let k = 0; k < ring.length; k += 3) addQuadratic(A, b, t, ring[k], ring[k + 1], ring[k + 2]);
    const c = solve6(A, b);
    if (!c) continue;
    const coef = Float64Array.from(c);
    const terms = new Float64Array(6);
    const at = (u: number, v: number): number => {
      quadTerms(terms, u, v);
      let q = 0;
      for (let k = 0; k < 6; k++) q += coef[k] * terms[k];
      return q;
    };
    const surface = (x: number, y: number): number => at((x - px) / r1, (y - py) / r1);
    const level = coef[0];
    const height = sign * (peak - level);
    if (!((otherSign ? -sign : sign) * level > 3 * noise) || height < thr) continue;
    // the region standing above the surface by half the spot's height, joined to the peak (no larger
    // than a spot)
    let n = 1;
    const out = floodBy(lv, peakIdx, (j) => {
      const v = s[j];
      const jx = j % w;
      if (!Number.isFinite(v) || !(sign * (v - surface(jx, (j - jx) / w)) >= 0.5 * height)) return false;
      return ++n > maxN ? 'stop' : true;
    });
    if (!out) continue;
    const err = Math.abs(Math.sqrt(out.length / Math.PI) / r - 1);
    if (err > SPOT_SCALE_MATCH || (best && err >= best.err)) continue;
    let ss = 0;
    for (let k = 0; k < ring.length; k += 3) ss += (ring[k + 2] - at(ring[k], ring[k + 1])) ** 2;
    if (Math.sqrt(ss / m) >= 0.25 * height) continue;
    best = { err, region: out, level, under: { surface, radius: r0 } };
  }
  if (!best) return null;
  const spot = candidateOf(lv, sign, peak, peakIdx, best.level, best.region, noise, null);
  // (a plateau of the other sign is a feature of the other sign's pass)
  return otherSign ? spot : { ...spot, under: best.under };
}

/**
 * The region flooded from `from` over the 4-neighbours that `take` accepts (sorted level px): null when
 * `take` answers 'stop' for a neighbour, or the region grows past MAX_REGION on a level that has a coarser
 * one (measured there instead).
 */
function floodBy(lv: Level, from: number, take: (j: number) => boolean | 'stop'): Int32Array | null {
  const { w, h, stamp } = lv;
  const gen = ++lv.gen;
  const out: number[] = [from];
  stamp[from] = gen;
  for (let k = 0; k < out.length; k++) {
    if (out.length > MAX_REGION && lv.l < MAX_LEVEL_INDEX) return null;
    const i = out[k];
    const x = i % w;
    const nb = [x > 0 ? i - 1 : -1, x < w - 1 ? i + 1 : -1, i >= w ? i - w : -1, i < w * h - w ? i + w : -1];
    for (const j of nb) {
      if (j < 0 || stamp[j] === gen) continue;
      const t = take(j);
      if (t === 'stop') return null;
      if (!t) continue;
      stamp[j] = gen;
      out.push(j);
    }
  }
  return Int32Array.from(out).sort();
}

/**
 * The plateau under a spot found above a surface (spotAboveSurface): the level map with the spot's
 * surroundings (the disc inside the ring the surface was fitted on) replaced by the surface, the level
 * under the spot. Other spots standing on the plateau (`others`: found on this level with a pedestal of
 * their sign) are passed over: a disc of 2.5 x their half-peak radius around each (where a Gaussian spot
 * is down to 1.3 % of its top) neither stops the flood nor counts towards the top. The plateau's top is
 * found by climbing from the spot on that map, in steps of a third of the disc's radius over 3 x 3 means
 * (a noise bump does not stop the climb), and its half-peak region is flooded from there; it must take in
 * the spot's place. Both discs are hidden: part of the plateau's extent, left out of its mean contrast
 * (as for plateauUnder). Null when the plateau does not stand out of the noise on its own, its top is not
 * the top of its region, or it shows little beside the discs.
 */
function plateauBeneath(lv: Level, c: Candidate, sign: 1 | -1, thr: number, under: NonNullable<Candidate['under']>, others: Candidate[]): Candidate | null {
  const { w, h, s } = lv;
  const px = c.peakIdx % w;
  const py = (c.peakIdx - px) / w;
  const r2 = under.radius * under.radius;
  const inDisc = (i: number): boolean => {
    const x = i % w;
    const y = (i - x) / w;
    return (x - px) * (x - px) + (y - py) * (y - py) <= r2;
  };
  const discs = others.map((o) => {
    const ox = o.peakIdx % w;
    return { x: ox, y: (o.peakIdx - ox) / w, r2: (2.5 * Math.max(1, Math.sqrt(o.region.length / Math.PI))) ** 2 };
  });
  const inOther = (i: number): boolean => {
    const x = i % w;
    const y = (i - x) / w;
    for (const d of discs) if ((x - d.x) * (x - d.x) + (y - d.y) * (y - d.y) <= d.r2) return true;
    return false;
  };
  // the map under the spot, signed as the feature (NaN: no data)
  const val = (i: number): number => {
    if (!inDisc(i)) return sign * s[i];
    const x = i % w;
    return sign * under.surface(x, (i - x) / w);
  };
  // the region at `level` and above on that map (the other spots' discs passable where there are data)
  const grow = (from: number, level: number): Int32Array | null =>
    floodBy(lv, from, (j) => {
      const v = val(j);
      return inOther(j) && !inDisc(j) ? Number.isFinite(v) : v >= level;
    });
  // climb from the spot: 3 x 3 means, steps of a third of the disc's radius, then single px
  const mean3 = (x: number, y: number): number => {
    let sum = 0;
    let n = 0;
    for (let dy = -1; dy <= 1; dy++) {
      for (let dx = -1; dx <= 1; dx++) {
        const xx = x + dx;
        const yy = y + dy;
        if (xx < 0 || yy < 0 || xx >= w || yy >= h) continue;
        const i = yy * w + xx;
        if (inOther(i) && !inDisc(i)) continue;
        const v = val(i);
        if (Number.isFinite(v)) {
          sum += v;
          n++;
        }
      }
    }
    return n ? sum / n : -Infinity;
  };
  let bx = px;
  let by = py;
  let bv = mean3(bx, by);
  for (const step of [Math.max(1, Math.round(under.radius / 3)), 1]) {
    for (let moves = 0; moves < w + h; moves++) {
      let nx = bx;
      let ny = by;
      let nv = bv;
      for (let dy = -step; dy <= step; dy += step) {
        for (let dx = -step; dx <= step; dx += step) {
          const xx = bx + dx;
          const yy = by + dy;
          if ((dx === 0 && dy === 0) || xx < 0 || yy < 0 || xx >= w || yy >= h) continue;
          const v = mean3(xx, yy);
          if (v > nv) {
            nx = xx;
            ny = yy;
            nv = v;
          }
        }
      }
      if (nx === bx && ny === by) break;
      bx = nx;
      by = ny;
      bv = nv;
    }
  }
  const best = by * w + bx;
  if (!(bv >= 2 * thr)) return null;
  // the top: the climb's 3 x 3 mean, or where it lies clear of the spot's disc the quadratic fitted about
  // it (fittedTop, the discs left out), over the region at half the mean
  let region = grow(best, 0.5 * bv);
  if (!region) return null;
  let top = bv;
  const fitted = inDisc(best) ? null : fittedTop(lv, best, halfWidth(region, w), sign, (i) => inDisc(i) || inOther(i));
  if (fitted !== null) top = sign * fitted;
  region = grow(best, 0.5 * top);
  if (!region) return null;
  if (!sortedHas(region, c.peakIdx)) return null;
  // the top of its own region: no 3 x 3 mean shown in it stands above the top by the level's noise (about
  // three noise sigmas of such a mean; a higher feature joined)
  for (const i of region) {
    if (inDisc(i) || inOther(i)) continue;
    const x = i % w;
    if (mean3(x, (i - x) / w) > top + noiseAt(lv, i)) return null;
  }
  const hidden = region.filter((i) => inDisc(i) || inOther(i));
  const shown = region.length - hidden.length;
  if (shown < c.region.length || shown < 0.25 * region.length) return null;
  return candidateOf(lv, sign, sign * top, best, 0, region, noiseAt(lv, best), hidden.length ? hidden : null);
}

/** Does a region (level px) reach the edge of the level's data, the panel's edge (a pixel of it next to
 *  one outside the level or without data)? */
function touchesBorder(lv: Level, region: Int32Array): boolean {
  const { w, h, n } = lv;
  for (let k = 0; k < region.length; k++) {
    const i = region[k];
    const x = i % w;
    const y = (i - x) / w;
    if (x === 0 || y === 0 || x === w - 1 || y === h - 1) return true;
    if (!(n[i - 1] > 0) || !(n[i + 1] > 0) || !(n[i - w] > 0) || !(n[i + w] > 0)) return true;
  }
  return false;
}

/** A candidate from its half-peak region (sorted level px): centroid, extents, margin over the noise. */
function candidateOf(
  lv: Level,
  sign: 1 | -1,
  peak: number,
  peakIdx: number,
  pedestal: number,
  region: Int32Array,
  noise: number,
  hidden: Int32Array | null,
): Candidate {
  const { mx, my, minor, major, bbox } = shapeOf(region, lv.w);
  const f = lv.f;
  return {
    level: lv,
    sign,
    peak,
    peakIdx,
    pedestal,
    region,
    cx: (mx + 0.5) * f - 0.5,
    cy: (my + 0.5) * f - 0.5,
    minor,
    major,
    snr: (sign * (peak - pedestal)) / Math.max(noise, 1e-9),
    vertical: bbox[3] - bbox[1] > bbox[2] - bbox[0],
    hidden,
  };
}

/**
 * The plateau under a feature that stands on one (halfPeak found a pedestal): the sharper feature's
 * surroundings - a disc of 2.5 x its half-peak radius, where a Gaussian is down to 1.3 % of its top -
 * are taken as the plateau's own, the plateau's top is the highest pixel outside that disc, and its
 * half-peak region is flooded from there through the disc. Null when the plateau does not stand out of
 * the noise on its own or its top is not the top of its region.
 */
function plateauUnder(lv: Level, c: Candidate, sign: 1 | -1, thr: number, start: number | null): Candidate | null {
  const { w, h, s, stamp } = lv;
  const f = lv.f;
  const ccx = (c.cx + 0.5) / f - 0.5;
  const ccy = (c.cy + 0.5) / f - 0.5;
  const rr = 2.5 * Math.max(1, Math.sqrt(c.region.length / Math.PI));
  const inDisc = (i: number): boolean => {
    const x = i % w;
    const y = (i - x) / w;
    return (x - ccx) * (x - ccx) + (y - ccy) * (y - ccy) <= rr * rr;
  };
  let gen = 0;
  if (start !== null && inDisc(start)) return null;
  const best = start ?? highestAround();
  if (best < 0) return null;
  const noise = noiseAt(lv, best);
  let top = s[best];
  if (sign * top < 2 * thr) return null;
  // flood at half the top, the disc passable (its pixels neither stop the flood nor count as higher)
  const flood2 = (level: number): Int32Array | null => {
    const peakV = sign * s[best];
    return floodBy(lv, best, (j) => {
      const v = sign * s[j];
      if (inDisc(j)) return Number.isFinite(v);
      if (!(v >= level)) return false;
      return v > peakV ? 'stop' : true;
    });
  };
  let region = flood2(0.5 * sign * top);
  if (!region) return null;
  const fitted = fittedTop(lv, best, halfWidth(region, w), sign, inDisc);
  if (fitted !== null && sign * fitted < sign * top) {
    top = fitted;
    region = flood2(0.5 * sign * top);
    if (!region) return null;
  }
  // the region must reach well past the disc: otherwise it is the sharper feature's own shoulder
  const hidden = region.filter(inDisc);
  if (region.length < 2 * hidden.length) return null;
  return candidateOf(lv, sign, top, best, 0, region, noise, hidden.length ? hidden : null);

  /** the highest pixel outside the disc among those joined to the feature above the detection
   *  threshold (the disc passable); -1 for none */
  function highestAround(): number {
    gen = ++lv.gen;
    const comp: number[] = [c.peakIdx];
    stamp[c.peakIdx] = gen;
    let hi = -1;
    for (let k = 0; k < comp.length; k++) {
      if (comp.length > MAX_REGION && lv.l < MAX_LEVEL_INDEX) return -1;
      const i = comp[k];
      if (!inDisc(i) && (hi < 0 || sign * s[i] > sign * s[hi])) hi = i;
      const x = i % w;
      const nb = [x > 0 ? i - 1 : -1, x < w - 1 ? i + 1 : -1, i >= w ? i - w : -1, i < w * h - w ? i + w : -1];
      for (const j of nb) {
        if (j < 0 || stamp[j] === gen) continue;
        const v = sign * s[j];
        if (!(v >= thr) && !(Number.isFinite(v) && inDisc(j))) continue;
        stamp[j] = gen;
        comp.push(j);
      }
    }
    return hi;
  }
}

/**
 * A peak joined to a higher one above half its own height, neither a spot nor a plateau under a sharper
 * feature (plateauUnder): two clouds side by side whose flanks overlap, the saddle between them above half
 * the lower one's height, as where two clouds 140 mm apart on a 600 x 340 mm panel show against a surface
 * that carries their flanks (jointCloudFit). Its half-peak region is taken within its own catchment: the
 * level's pixels at half its top and above, split between the component's peaks (`markers`) by flooding
 * from the highest down (a marker-controlled watershed: a region that reaches another marker's is not
 * joined to it; one without a marker, a speck of noise, joins the first it meets). Null when the region
 * is a sliver of another feature rather than one of its own: more than BASIN_MAX_CUT of its edge runs
 * along the watershed (a noise bump on a cloud's flank takes a wedge of the flank, bounded by the
 * watershed on both sides), or it is smaller than a cloud on this level. The part of the lower cloud
 * beyond the watershed is lost to the higher one, so its area is a little small and its mean contrast
 * a little high.
 */
function basinHalfPeak(lv: Level, lo: number, sign: 1 | -1, thr: number, markers: number[]): Candidate | null {
  const c = catchment(lv, lo, sign, markers);
  if (!c || c.edge === 0 || c.cut > BASIN_MAX_CUT * c.edge) return null;
  if (c.region.length < BASIN_MIN_PX) return null;
  const noise = noiseAt(lv, lo);
  if (c.top < (thr * noise) / lv.noiseS) return null;
  return candidateOf(lv, sign, sign * c.top, lo, 0, c.region, noise, null);
}

/**
 * The half-peak region of the peak `at` within its own catchment among `markers` (see basinHalfPeak):
 * the region (sorted level px), the top it is taken at (signed as the feature: positive), and how many of
 * its edges run along the watershed (`cut`) of all its edges (`edge`). Null when the region at half the
 * top is too large for this level.
 */
function catchment(lv: Level, at: number, sign: 1 | -1, markers: number[]): { region: Int32Array; top: number; cut: number; edge: number } | null {
  const { w, h, s } = lv;
  let top = sign * s[at];
  // the region at half the top, flooded through everything at that level (the other peaks too)
  const regionAt = (level: number): Int32Array | null => flood(lv, at, sign, level, false)?.region ?? null;
  let all = regionAt(0.5 * top);
  if (!all) return null;
  const fitted = fittedTop(lv, at, Math.sqrt(all.length / Math.PI), sign);
  if (fitted !== null && sign * fitted < top) {
    top = sign * fitted;
    all = regionAt(0.5 * top);
    if (!all) return null;
  }
  const reg = all;
  const n = reg.length;
  const slot = (lv.slot ??= new Int32Array(w * h));
  for (let k = 0; k < n; k++) slot[reg[k]] = k + 1;
  const order = new Int32Array(n);
  for (let k = 0; k < n; k++) order[k] = k;
  order.sort((a, b) => sign * s[reg[b]] - sign * s[reg[a]] || a - b);
  const isMarker = new Uint8Array(n);
  for (const m of markers) if (slot[m] > 0) isMarker[slot[m] - 1] = 1;
  isMarker[slot[at] - 1] = 1;
  const parent = new Int32Array(n).fill(-1);
  const mark = new Int32Array(n).fill(-1); // a root's marker (place), -1 for none
  const find = (i: number): number => {
    let r = i;
    while (parent[r] !== r) r = parent[r];
    while (parent[i] !== r) {
      const nx = parent[i];
      parent[i] = r;
      i = nx;
    }
    return r;
  };
  for (let t = 0; t < n; t++) {
    const k = order[t];
    parent[k] = k;
    mark[k] = isMarker[k] ? k : -1;
    const i = reg[k];
    const x = i % w;
    const nb = [x > 0 ? i - 1 : -1, x < w - 1 ? i + 1 : -1, i >= w ? i - w : -1, i < w * h - w ? i + w : -1];
    for (const j of nb) {
      if (j < 0 || slot[j] === 0) continue;
      const kj = slot[j] - 1;
      if (parent[kj] < 0) continue;
      const a = find(k);
      const b = find(kj);
      if (a === b) continue;
      // two catchments with markers of their own meet: the watershed; else one joins the other
      if (mark[a] >= 0 && mark[b] >= 0) continue;
      parent[a] = b;
      if (mark[b] < 0) mark[b] = mark[a];
    }
  }
  const own = mark[find(slot[at] - 1)];
  const region: number[] = [];
  let cut = 0;
  let edge = 0;
  for (let k = 0; k < n; k++) {
    if (mark[find(k)] !== own) continue;
    const i = reg[k];
    region.push(i);
    const x = i % w;
    const nb = [x > 0 ? i - 1 : -1, x < w - 1 ? i + 1 : -1, i >= w ? i - w : -1, i < w * h - w ? i + w : -1];
    for (const j of nb) {
      if (j < 0) continue;
      const kj = slot[j] - 1;
      if (kj >= 0 && mark[find(kj)] === own) continue;
      edge++;
      if (kj >= 0) cut++;
    }
  }
  for (let k = 0; k < n; k++) slot[reg[k]] = 0;
  return { region: Int32Array.from(region).sort(), top, cut, edge };
}

/**
 * The top of a feature from a least-squares quadratic surface z = a + bx + cy + dx² + exy + fy² over the
 * level pixels within 0.4 x its half-peak half-width (radius, for a round one) of the largest pixel (a Gaussian falls 7 % there, well
 * within a quadratic's reach): the surface's largest value within that disc. Null when the disc holds
 * fewer than 12 pixels with data (a small feature: its largest pixel stands for it).
 */
function fittedTop(lv: Level, peakIdx: number, halfRadius: number, sign: 1 | -1, skip: ((i: number) => boolean) | null = null): number | null {
  const { w, h, s } = lv;
  const r = Math.max(1.5, 0.4 * halfRadius);
  const px = peakIdx % w;
  const py = (peakIdx - px) / w;
  const ri = Math.ceil(r);
  // normal equations of the six terms, in coordinates scaled by r
  const A = new Float64Array(36);
  const b = new Float64Array(6);
  const t = new Float64Array(6);
  let n = 0;
  for (let y = Math.max(0, py - ri); y <= Math.min(h - 1, py + ri); y++) {
    for (let x = Math.max(0, px - ri); x <= Math.min(w - 1, px + ri); x++) {
      const dx = (x - px) / r;
      const dy = (y - py) / r;
      if (dx * dx + dy * dy > 1) continue;
      const v = s[y * w + x];
      if (!Number.isFinite(v) || (skip && skip(y * w + x))) continue;
      addQuadratic(A, b, t, dx, dy, v);
      n++;
    }
  }
  if (n < 12) return null;
  const c = solve6(A, b);
  if (!c) return null;
  const f = (dx: number, dy: number): number => c[0] + c[1] * dx + c[2] * dy + c[3] * dx * dx + c[4] * dx * dy + c[5] * dy * dy;
  // the stationary point when the surface is a cap (of the feature's sign) and it lies in the disc;
  // otherwise the largest value on a ring of the disc's edge or at its centre
  let best = sign * f(0, 0);
  const det = 4 * c[3] * c[5] - c[4] * c[4];
  if (det > 0 && sign * c[3] < 0) {
    const sx = (c[4] * c[2] - 2 * c[5] * c[1]) / det;
    const sy = (c[4] * c[1] - 2 * c[3] * c[2]) / det;
    if (sx * sx + sy * sy <= 1) best = Math.max(best, sign * f(sx, sy));
  }
  for (let k = 0; k < 16; k++) {
    const a = (k * Math.PI) / 8;
    best = Math.max(best, sign * f(Math.cos(a), Math.sin(a)));
  }
  return sign * best;
}

/**
 * A region's centroid, its larger and smaller extent (4 x the square roots of the eigenvalues of its
 * second moments, pixel discretisation included: the full width of a uniform disc, about 1.15 x that of
 * a straight strip) and its bounding box [x0, y0, x1, y1] (inclusive), level px.
 */
function shapeOf(region: Int32Array, w: number): { mx: number; my: number; major: number; minor: number; bbox: [number, number, number, number] } {
  let sx = 0;
  let sy = 0;
  let sxx = 0;
  let syy = 0;
  let sxy = 0;
  const bbox: [number, number, number, number] = [Infinity, Infinity, -Infinity, -Infinity];
  for (const i of region) {
    const x = i % w;
    const y = (i - x) / w;
    if (x < bbox[0]) bbox[0] = x;
    if (y < bbox[1]) bbox[1] = y;
    if (x > bbox[2]) bbox[2] = x;
    if (y > bbox[3]) bbox[3] = y;
    sx += x;
    sy += y;
    sxx += x * x;
    syy += y * y;
    sxy += x * y;
  }
  const n = region.length;
  const mx = sx / n;
  const my = sy / n;
  const vxx = sxx / n - mx * mx + 1 / 12;
  const vyy = syy / n - my * my + 1 / 12;
  const vxy = sxy / n - mx * my;
  const tr = vxx + vyy;
  const disc = Math.sqrt(Math.max(0, (tr * tr) / 4 - (vxx * vyy - vxy * vxy)));
  return { mx, my, major: 4 * Math.sqrt(tr / 2 + disc), minor: 4 * Math.sqrt(Math.max(tr / 2 - disc, 1 / 12)), bbox };
}

/** Half the narrow extent of a region (level px): its radius for a round one, about 0.6 x the width of a
 *  straight one. */
function halfWidth(region: Int32Array, w: number): number {
  return shapeOf(region, w).minor / 2;
}

/** The six terms 1, x, y, x², xy, y² of a quadratic surface at (dx, dy), into t. */
export function quadTerms(t: Float64Array, dx: number, dy: number): Float64Array {
  t[0] = 1;
  t[1] = dx;
  t[2] = dy;
  t[3] = dx * dx;
  t[4] = dx * dy;
  t[5] = dy * dy;
  return t;
}

/** One sample v at (dx, dy) added to the normal equations A c = b of a quadratic surface (t: scratch). */
export function addQuadratic(A: Float64Array, b: Float64Array, t: Float64Array, dx: number, dy: number, v: number): void {
  quadTerms(t, dx, dy);
  for (let i = 0; i < 6; i++) {
    b[i] += t[i] * v;
    for (let j = 0; j < 6; j++) A[i * 6 + j] += t[i] * t[j];
  }
}

/** Gaussian elimination with partial pivoting of a 6 x 6 system (row-major); null when singular. */
export function solve6(A: Float64Array, b: Float64Array): Float64Array | null {
  const m = Float64Array.from(A);
  const x = Float64Array.from(b);
  for (let col = 0; col < 6; col++) {
    let piv = col;
    for (let r = col + 1; r < 6; r++) if (Math.abs(m[r * 6 + col]) > Math.abs(m[piv * 6 + col])) piv = r;
    if (Math.abs(m[piv * 6 + col]) < 1e-12) return null;
    if (piv !== col) {
      for (let j = 0; j < 6; j++) {
        const tmp = m[col * 6 + j];
        m[col * 6 + j] = m[piv * 6 + j];
        m[piv * 6 + j] = tmp;
      }
      const tb = x[col];
      x[col] = x[piv];
      x[piv] = tb;
    }
    for (let r = col + 1; r < 6; r++) {
      const k = m[r * 6 + col] / m[col * 6 + col];
      for (let j = col; j < 6; j++) m[r * 6 + j] -= k * m[col * 6 + j];
      x[r] -= k * x[col];
    }
  }
  for (let r = 5; r >= 0; r--) {
    let acc = x[r];
    for (let j = r + 1; j < 6; j++) acc -= m[r * 6 + j] * x[j];
    x[r] = acc / m[r * 6 + r];
  }
  return x;
}

/**
 * Calls visit(dx, dy, v) for the smoothed level's samples over a ring around a region (from inner to outer
 * times its equivalent radius from its centre; dx, dy from the centre), the region itself left out; a few
 * thousand samples at most (large rings are strided through). Returns the ring's outer radius.
 */
function ringSamples(lv: Level, region: Int32Array, gen: number, inner: number, outer: number, visit: (dx: number, dy: number, v: number) => void): number {
  const { w, h, s, stamp } = lv;
  let sx = 0;
  let sy = 0;
  for (const i of region) {
    sx += i % w;
    sy += Math.floor(i / w);
  }
  const n = region.length;
  const cx = sx / n;
  const cy = sy / n;
  const r = Math.max(1.5, Math.sqrt(n / Math.PI));
  const r0 = inner * r;
  const r1 = outer * r + 1;
  const x0 = Math.max(0, Math.floor(cx - r1));
  const x1 = Math.min(w - 1, Math.ceil(cx + r1));
  const y0 = Math.max(0, Math.floor(cy - r1));
  const y1 = Math.min(h - 1, Math.ceil(cy + r1));
  const stride = Math.max(1, Math.floor(Math.sqrt(((x1 - x0 + 1) * (y1 - y0 + 1)) / 4000)));
  const a0 = r0 * r0;
  const a1 = r1 * r1;
  for (let y = y0; y <= y1; y += stride) {
    for (let x = x0; x <= x1; x += stride) {
      const d2 = (x - cx) * (x - cx) + (y - cy) * (y - cy);
      if (d2 < a0 || d2 > a1) continue;
      const v = s[y * w + x];
      if (Number.isFinite(v) && stamp[y * w + x] !== gen) visit(x - cx, y - cy, v);
    }
  }
  return r1;
}

/**
 * Median of the smoothed level over a ring around a region (from inner to outer times its equivalent
 * radius from its centre, the region itself left out), or null when the ring has too little data.
 */
function surround(lv: Level, region: Int32Array, gen: number, inner: number, outer: number): number | null {
  const vals: number[] = [];
  ringSamples(lv, region, gen, inner, outer, (_dx, _dy, v) => vals.push(v));
  if (vals.length < 8) return null;
  const sorted = Float64Array.from(vals).sort();
  return sorted[sorted.length >> 1];
}

/**
 * The level under a region from a quadratic surface fitted over a ring around it (inner..outer times its
 * equivalent radius, the region left out), evaluated at the region's centre, with the fit's rms residual;
 * null when the ring has too little data.
 */
function ringSurface(lv: Level, region: Int32Array, gen: number, inner: number, outer: number): { level: number; rms: number } | null {
  const A = new Float64Array(36);
  const b = new Float64Array(6);
  const t = new Float64Array(6);
  const pts: number[] = [];
  const r1 = ringSamples(lv, region, gen, inner, outer, (dx, dy, v) => pts.push(dx, dy, v));
  // coordinates scaled by the outer radius (the normal equations stay well conditioned)
  const scale = 1 / r1;
  if (pts.length < 3 * 24) return null;
  for (let k = 0; k < pts.length; k += 3) addQuadratic(A, b, t, pts[k] * scale, pts[k + 1] * scale, pts[k + 2]);
  const c = solve6(A, b);
  if (!c) return null;
  let ss = 0;
  for (let k = 0; k < pts.length; k += 3) {
    quadTerms(t, pts[k] * scale, pts[k + 1] * scale);
    let e = pts[k + 2];
    for (let a = 0; a < 6; a++) e -= c[a] * t[a];
    ss += e * e;
  }
  return { level: c[0], rms: Math.sqrt((3 * ss) / pts.length) };
}

/**
 * Same feature seen on two levels: same sign, and either the finer one's peak lies in the coarser
 * one's half-peak region without a plateau of its own under it (a peaked feature - glow - whose
 * half-peak region grows with the blur of coarser levels), or each peak lies in the other's region, or
 * each centre lies within the other's extent with sizes alike.
 */
function sameFeature(a: Candidate, b: Candidate): boolean {
  if (a.sign !== b.sign) return false;
  // a spot standing on a plateau of its sign and a view without one several times its size: the
  // plateau's (or the plateau and the spot seen together, on a coarse level), not the spot's
  const onA = a.sign * a.pedestal > 0;
  const onB = b.sign * b.pedestal > 0;
  if (onA !== onB) {
    const [spot, other] = onA ? [a, b] : [b, a];
    if (other.minor * other.level.f > SPOT_VIEW_RATIO * spot.minor * spot.level.f) return false;
  }
  // the finer one's peak in the coarser one's region, not on a plateau of its own: it is the top of
  // that coarser structure
  const [fine, coarse] = a.level.l <= b.level.l ? [a, b] : [b, a];
  if (fine.level.l < coarse.level.l && fine.pedestal === 0 && contains(coarse, peakOf(fine))) return true;
  if (Math.abs(a.level.l - b.level.l) > 2) return false;
  if (contains(a, peakOf(b)) && contains(b, peakOf(a))) return true;
  // a round feature near the middle of an elongated one (a spot on a band) is a feature of its own
  if (a.major > 3 * a.minor !== b.major > 3 * b.minor) return false;
  const sizeA = a.minor * a.level.f;
  const sizeB = b.minor * b.level.f;
  const ratio = Math.max(sizeA, sizeB) / Math.max(Math.min(sizeA, sizeB), 1e-9);
  if (ratio > 3) return false;
  const r = 0.5 * Math.min(sizeA, sizeB);
  // elongated features: distance across their axis only
  const d = Math.hypot(a.cx - b.cx, a.cy - b.cy);
  return d <= Math.max(r, 1.5 * Math.max(a.level.f, b.level.f)) || (a.major > 3 * a.minor && b.major > 3 * b.minor && crossDistance(a, b) <= r);
}

/** Peak position of a candidate, working px. */
function peakOf(c: Candidate): [number, number] {
  const x = c.peakIdx % c.level.w;
  const y = (c.peakIdx - x) / c.level.w;
  return [(x + 0.5) * c.level.f - 0.5, (y + 0.5) * c.level.f - 0.5];
}

/** Is a working-px position in (or next to) the candidate's region? */
function contains(c: Candidate, [wx, wy]: [number, number]): boolean {
  const { w, h, f } = c.level;
  const lx = Math.floor((wx + 0.5) / f);
  const ly = Math.floor((wy + 0.5) / f);
  for (let dy = -1; dy <= 1; dy++) {
    for (let dx = -1; dx <= 1; dx++) {
      const x = lx + dx;
      const y = ly + dy;
      if (x < 0 || y < 0 || x >= w || y >= h) continue;
      // not in the part another feature stands on (a spot on the flank of a cloud is not the cloud)
      if (sortedHas(c.region, y * w + x) && !(c.hidden && sortedHas(c.hidden, y * w + x))) return true;
    }
  }
  return false;
}

function sortedHas(a: Int32Array, v: number): boolean {
  let lo = 0;
  let hi = a.length - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >> 1;
    if (a[mid] === v) return true;
    if (a[mid] < v) lo = mid + 1;
    else hi = mid - 1;
  }
  return false;
}

function crossDistance(a: Candidate, b: Candidate): number {
  if (a.vertical !== b.vertical) return Infinity;
  // ...and only where they are one stretch along the axis: their extents meet, or the map between their
  // centres does not fall back to the background (joinedBetween). Two glows on one edge, or two
  // stretches of a line with a clear gap between them, lie on one line too, and were taken for one
  // feature, the weaker lost (two glows of 40 % on one edge, 80 mm apart: one reported); a strip the
  // threshold breaks into pieces stays one, and so does a band a feature of the other sign cuts
  const along = a.vertical ? Math.abs(a.cy - b.cy) : Math.abs(a.cx - b.cx);
  if (along > 0.5 * (a.major * a.level.f + b.major * b.level.f) && !joinedBetween(a, b)) return Infinity;
  return a.vertical ? Math.abs(a.cx - b.cx) : Math.abs(a.cy - b.cy);
}

/**
 * Are two candidates one stretch? On the coarser of their two levels, the signed contrast sampled along
 * the segment between their centres (a level pixel a step) either stays above half the lower of its two
 * ends or 3 noise sigmas of the level, or somewhere falls below zero by half the lower end (a feature
 * of the other sign crossing there).
 */
function joinedBetween(a: Candidate, b: Candidate): boolean {
  const lv = a.level.l >= b.level.l ? a.level : b.level;
  const { w, h, s, f } = lv;
  const sign = a.sign;
  const at = (x: number, y: number): number => {
    const lx = Math.min(w - 1, Math.max(0, Math.floor((x + 0.5) / f)));
    const ly = Math.min(h - 1, Math.max(0, Math.floor((y + 0.5) / f)));
    return sign * s[ly * w + lx];
  };
  const va = at(a.cx, a.cy);
  const vb = at(b.cx, b.cy);
  if (!(va > 0) || !(vb > 0)) return false;
  const floor = 0.5 * Math.min(va, vb);
  const n = Math.max(2, Math.ceil(Math.hypot(b.cx - a.cx, b.cy - a.cy) / f));
  let low = Infinity;
  for (let k = 1; k < n; k++) {
    const v = at(a.cx + ((b.cx - a.cx) * k) / n, a.cy + ((b.cy - a.cy) * k) / n);
    // (no data there, NaN: the segment leaves the panel's data, not a gap in the feature)
    if (v < low) low = v;
  }
  // Up all the way (above half the lower end, or clearly out of the level's noise, 3 sigmas): one
  // stretch, which another feature may partly cancel (a band under a cloud of the other sign). Down to
  // the other sign by half the lower end: such a feature crosses it there, and it is still one. Only a
  // gap back to the background between them makes two.
  return low >= Math.min(floor, 3 * lv.noiseS) || low <= -floor;
}

/**
 * What a group's feature is taken from when its chosen view, standing on a pedestal, is dropped (too
 * faint, too small, under the coding's step...): the finest level that resolves the group (6 px across
 * or more) without a pedestal. A faint broad feature resolved nowhere with a signal of 10 has its finest
 * view chosen, which can be a speck of noise on its top, measured against the feature itself as its
 * surround, a few mm² across and insignificant; the feature was then lost (an ellipse of 94 x 35 mm and
 * -1.4 %, `mura-accuracy.js --elliptic`, seed 1055). Only for a view on a pedestal: trying the group's
 * other views (resolved ones first, each by signal) whenever the chosen one was dropped added large false
 * findings (the blur of several features on a coarse level) and lost a band on the study's first set.
 */
function fallbackOf(g: Candidate[], chosen: Candidate): Candidate | null {
  if (chosen.pedestal === 0) return null;
  return [...g].sort((a, b) => a.level.l - b.level.l).find((c) => c !== chosen && c.minor >= 6 && c.pedestal === 0) ?? null;
}

/**
 * The level a feature is measured on: the finest one where its half-peak region is at least 6 level
 * px across its narrow way and its peak stands 10 sigmas over that level's noise; failing that, the one
 * with the best margin over the noise among those at least 3 px across (or simply the best margin).
 */
function pick(g: Candidate[]): Candidate {
  const byLevel = [...g].sort((a, b) => a.level.l - b.level.l);
  for (const c of byLevel) if (c.minor >= 6 && c.snr >= 10) return c;
  // resolved nowhere (a thin line, a small spot): the finest level that sees it at all across 3 px; a
  // coarser level sees it more strongly only because it blurs it over a larger region
  const wide = byLevel.filter((c) => c.minor >= 3);
  return wide.length ? wide[0] : byLevel.reduce((a, b) => (b.snr > a.snr ? b : a));
}

function toFound(ctx: Ctx, c: Candidate): Found | null {
  const lv = c.level;
  const f = lv.f;
  const { w: W, h: H } = ctx;
  const px: number[] = [];
  // the hidden part (a sharper feature on this one) counts towards the extent, not the mean contrast
  let all = 0;
  let shown = 0;
  for (const i of c.region) {
    const isHidden = c.hidden !== null && sortedHas(c.hidden, i);
    const lx = i % lv.w;
    const ly = (i - lx) / lv.w;
    const x0 = lx * f;
    const y0 = ly * f;
    const x1 = Math.min(W, x0 + f);
    const y1 = Math.min(H, y0 + f);
    for (let y = y0; y < y1; y++) {
      for (let x = x0; x < x1; x++) {
        const q = ctx.wt[y * W + x];
        if (!(q > 0)) continue;
        all += q;
        if (isHidden) continue;
        shown += q;
        px.push(y * W + x);
      }
    }
  }
  if (px.length === 0) return null;
  const pixels = Int32Array.from(px);
  const pkx = c.peakIdx % lv.w;
  const pky = (c.peakIdx - pkx) / lv.w;
  const axis: Axis | null = null;
  const found = measureRegion(ctx, pixels, c.pedestal, c.peak, [(pkx + 0.5) * f - 0.5, (pky + 0.5) * f - 0.5], c.sign, 'blob', axis);
  if (!found) return null;
  if (shown < all) {
    found.areaMm2 *= all / shown;
    // centred on the whole region: the hidden part, where the sharper feature stands, is often near the
    // plateau's middle, and the contrast-weighted centre of the rest lies off to the far side
    found.cx = c.cx;
    found.cy = c.cy;
  }
  // take the level's blur out of the extent (quadrature, per axis, as for a Gaussian profile)
  const a2 = c.major * c.major;
  const b2 = c.minor * c.minor;
  const ca = Math.sqrt(Math.max(a2 - BLUR_FWHM2, 0.25 * a2) / a2);
  const cb = Math.sqrt(Math.max(b2 - BLUR_FWHM2, 0.25 * b2) / b2);
  // under two working px across (the blur taken out), the extent is mostly the map's own blur: the
  // figures are then left as seen, bounds (the blur widens a feature and lowers its mean), since a
  // correction taken that far would claim more than the map shows
  const k = ca * cb;
  found.unblurredAreaMm2 = found.areaMm2 * k;
  if (c.minor * cb * f < RESOLVED_PX) {
    found.belowResolution = c.major * ca * f < RESOLVED_PX ? 'size' : 'width';
    return found;
  }
  found.areaMm2 *= k;
  found.contrastPct /= Math.sqrt(k);
  found.lengthMm *= ca;
  found.widthMm *= cb;
  return found;
}

/** The q-quantile of non-negative values (histogram of 8192 bins over [0, max], linear within the bin). */
function quantileOf(values: Float32Array, q: number): number {
  return quantilesOf(values, [q])[0];
}

/** Quantiles of non-negative values from one histogram of 8192 bins over [0, max]. */
function quantilesOf(values: Float32Array, qs: number[]): number[] {
  let max = 0;
  for (let k = 0; k < values.length; k++) if (values[k] > max) max = values[k];
  if (!(max > 0)) return qs.map(() => 0);
  const bins = 8192;
  const hist = new Uint32Array(bins);
  const scale = (bins - 1e-6) / max;
  for (let k = 0; k < values.length; k++) hist[Math.floor(values[k] * scale)]++;
  return qs.map((q) => {
    const target = q * values.length;
    let acc = 0;
    for (let b = 0; b < bins; b++) {
      if (acc + hist[b] >= target) return (b + (target - acc) / Math.max(hist[b], 1)) / scale;
      acc += hist[b];
    }
    return max;
  });
}

/** A band's profile across the panel, as found (level px). */
interface BandProfile {
  axis: Axis;
  c0: number;
  c1: number;
  /** level factor (working px per level px) */
  f: number;
  /** smoothed profile across the panel, level px (NaN where unknown) */
  S: Float64Array;
  /** the band's weight at each position along it, level px: 1 over its half-level extent, falling to 0
   *  beyond it as the band fades out (all 1 for a band from edge to edge) */
  A: Float64Array;
}

/**
 * The contrast map less the found bands' profiles: each band's smoothed profile over its half-peak span
 * and on outwards while it keeps falling towards zero on its side (its tails, e.g. the long exponential
 * tail of light along an edge).
 */
function withoutBandProfiles(ctx: Ctx, bands: BandProfile[]): Float32Array {
  const { w, h } = ctx;
  const out = new Float32Array(ctx.C);
  for (const b of bands) {
    const across = b.axis === 'horizontal' ? h : w;
    const along = b.axis === 'horizontal' ? w : h;
    const S = b.S;
    const sign = Math.sign(S[(b.c0 + b.c1) >> 1]) || 1;
    let lo = b.c0;
    let hi = b.c1;
    while (lo > 0 && sign * S[lo - 1] > 0 && sign * S[lo - 1] <= sign * S[lo]) lo--;
    while (hi < S.length - 1 && sign * S[hi + 1] > 0 && sign * S[hi + 1] <= sign * S[hi]) hi++;
    const off = new Float64Array(across);
    for (let t = 0; t < across; t++) {
      const c = (t + 0.5) / b.f - 0.5;
      if (c < lo - 0.5 || c > hi + 0.5) continue;
      const i0 = Math.max(lo, Math.min(hi, Math.floor(c)));
      const i1 = Math.min(hi, i0 + 1);
      const a = Math.min(1, Math.max(0, c - i0));
      const v = (1 - a) * S[i0] + a * S[i1];
      if (Number.isFinite(v)) off[t] = v;
    }
    const wAlong = new Float64Array(along);
    for (let a = 0; a < along; a++) wAlong[a] = b.A[Math.min(b.A.length - 1, Math.floor(a / b.f))];
    for (let t = 0; t < across; t++) {
      if (off[t] === 0) continue;
      for (let a = 0; a < along; a++) {
        const i = b.axis === 'horizontal' ? t * w + a : a * w + t;
        if (ctx.wt[i] > 0 && wAlong[a] > 0) out[i] -= off[t] * wAlong[a];
      }
    }
  }
  return out;
}

/**
 * Bands and lines that run across the whole panel, from profiles: the median of each row (for
 * horizontal bands) or column (vertical) of the level. A median across the panel ignores whatever
 * covers less than half of the row - a cloud, or a band crossing the other way - so a band is seen
 * whole where the round search sees it cut in pieces. Each band must also be there evenly along its
 * length (four of five stretches).
 */
function findBands(ctx: Ctx, lv: Level, floor: number): BandProfile[] {
  const bands: BandProfile[] = [];
  const o = ctx.opts;
  const full = lv.f * lv.f;
  for (const axis of ['horizontal', 'vertical'] as const) {
    const along = axis === 'horizontal' ? lv.w : lv.h; // along the band
    const across = axis === 'horizontal' ? lv.h : lv.w;
    const P = medianProfile(lv, axis === 'horizontal', full);
    // light smoothing (sigma 1 px) and the noise of the profile, as on the levels
    const S = new Float64Array(across).fill(NaN);
    const r = (KERNEL.length - 1) >> 1;
    for (let c = 0; c < across; c++) {
      let a = 0;
      let b = 0;
      for (let d = -r; d <= r; d++) {
        const v = P[c + d];
        if (c + d < 0 || c + d >= across || !Number.isFinite(v)) continue;
        a += KERNEL[d + r] * v;
        b += KERNEL[d + r];
      }
      if (b > 0.5) S[c] = a / b;
    }
    const D = 3;
    const diffs: number[] = [];
    for (let c = D; c < across - D; c++) {
      const d = S[c] - 0.5 * (S[c - D] + S[c + D]);
      if (Number.isFinite(d)) diffs.push(Math.abs(d));
    }
    if (diffs.length < 20) continue;
    const rho = (d: number): number => Math.exp(-(d * d) / (4 * SMOOTH_SIGMA * SMOOTH_SIGMA));
    const gain = Math.sqrt(1.5 - 2 * rho(D) + 0.5 * rho(2 * D));
    const noise = quantileOf(Float32Array.from(diffs), 0.75) / 1.15 / gain;
    const thr = Math.max(o.thresholdSigma * noise, floor, 1e-9);
    const taken = new Uint8Array(across);
    // columns (rows) of the bands found so far with a margin of half their width: not a new band's surround
    const blocked = new Uint8Array(across);
    // local extrema beyond the threshold, of either sign, strongest first (a bright gap between two dark
    // bands is looked at after them, with their strips blocked)
    const extrema: [number, 1 | -1][] = [];
    for (const sign of [1, -1] as const) {
      const peaks: number[] = [];
      for (let c = 0; c < across; c++) {
        const v = sign * S[c];
        if (!(v > thr)) continue;
        if ((c > 0 && sign * S[c - 1] > v) || (c < across - 1 && sign * S[c + 1] >= v)) continue;
        peaks.push(c);
      }
      peaks.sort((p, q) => sign * S[q] - sign * S[p]);
      // the ten strongest, one to a feature: the profile through a broad feature (a large cloud pulls the
      // medians of the rows through it) wiggles into many local extrema, which would crowd out a band
      // elsewhere; a peak inside a stronger one's half-peak span is that one again
      const kept: [number, number][] = [];
      for (const pk of peaks) {
        if (kept.length >= 10) break;
        if (kept.some(([a, b]) => pk >= a && pk <= b)) continue;
        const level = 0.5 * sign * S[pk];
        let a = pk;
        let b = pk;
        while (a > 0 && sign * S[a - 1] >= level) a--;
        while (b < across - 1 && sign * S[b + 1] >= level) b++;
        kept.push([a, b]);
        extrema.push([pk, sign]);
      }
    }
    extrema.sort((a, b) => Math.abs(S[b[0]]) - Math.abs(S[a[0]]));
    // each extremum's own half-peak span (against the background): a strip beside one band that falls on
    // another band of the same sign must not take that band for its pedestal
    const spanOf = (pk: number, sign: 1 | -1, level: number): [number, number] => {
      let a = pk;
      let b = pk;
      while (a > 0 && sign * S[a - 1] >= level) a--;
      while (b < across - 1 && sign * S[b + 1] >= level) b++;
      return [a, b];
    };
    const spans = extrema.map(([pk, sign]) => spanOf(pk, sign, 0.5 * sign * S[pk]));
    // columns of the other extrema's spans that lie clear of the band's own extent (rebuilt with it)
    const others = new Uint8Array(across);
    {
      for (const [pk, sign] of extrema) {
        if (taken[pk]) continue;
        let half = 0.5 * sign * S[pk];
        let c0 = pk;
        let c1 = pk;
        const extent = (level: number): void => {
          [c0, c1] = spanOf(pk, sign, level);
          others.fill(0);
          extrema.forEach(([q, qs], k) => {
            const [a, b] = spans[k];
            if (q === pk || qs !== sign || (b >= c0 && a <= c1)) return;
            for (let c = a; c <= b; c++) others[c] = 1;
          });
        };
        extent(half);
        if (c0 === 0 && c1 === across - 1) continue; // the whole panel: not a band
        let clash = false;
        for (let c = c0; c <= c1; c++) if (taken[c]) clash = true;
        if (clash) continue;
        // there along the panel, evenly: in four of five stretches along it the band's mean is between
        // 0.4 and 2.5 times the median of the five (a cloud that pulls the medians of the rows through
        // it is strong in one or two stretches and faint in the rest). Each stretch is taken against a
        // strip beside the band (half its width away, as wide as it), so that a broad feature the band
        // crosses - a cloud's flank - does not hide it there.
        let sideA: [number, number] = [0, -1];
        let sideB: [number, number] = [0, -1];
        const sides = (): void => {
          const wd = c1 - c0 + 1;
          const gap = Math.ceil(wd / 2);
          sideA = [Math.max(0, c0 - gap - wd), c0 - gap - 1];
          sideB = [c1 + gap + 1, Math.min(across - 1, c1 + gap + wd)];
        };
        sides();
        const stretchMean = (a0: number, a1: number, from: number, to: number, surround = false): number | null =>
          stretchMeanOn(lv, axis === 'horizontal', a0, a1, from, to, surround ? blocked : null, surround ? others : null);
        // the strips' means over a stretch along the band: 'mean' is the mean of the two (a straight
        // flank cancels), 'near' the one nearer the band's own level (nearB: see profileBeside); either
        // one alone where the other is off the panel
        let nearB = false;
        const beside = (a0: number, a1: number): { mean: number; near: number } => {
          const va = sideA[1] >= sideA[0] ? stretchMean(a0, a1, sideA[0], sideA[1], true) : null;
          const vb = sideB[1] >= sideB[0] ? stretchMean(a0, a1, sideB[0], sideB[1], true) : null;
          if (va === null || vb === null) {
            const one = va ?? vb ?? 0;
            return { mean: one, near: one };
          }
          return { mean: 0.5 * (va + vb), near: nearB ? vb : va };
        };
        // The level beside the band over its whole length: the band's pedestal. A band crossing a broad
        // feature (a cloud's flank) is measured against it, as the eye sees it, and its half-peak extent
        // is taken halfway between the pedestal and its peak.
        let pedestal = 0;
        for (let iter = 0; iter < 2; iter++) {
          const p = profileBeside();
          if (!(Math.abs(p) > 0.25 * Math.abs(S[pk]))) {
            if (pedestal !== 0) {
              // the strips beside the narrowed extent no longer stand on it: it was no pedestal
              pedestal = 0;
              half = 0.5 * sign * S[pk];
              extent(half);
              sides();
            }
            break;
          }
          pedestal = p;
          half = sign * (pedestal + 0.5 * (S[pk] - pedestal));
          extent(half);
          sides();
        }
        if (sign * (S[pk] - pedestal) < thr) continue;
        if (c0 === 0 && c1 === across - 1) continue;
        /** the row-median profile over the strips beside the band: the one nearer the band's own level
         *  (a band on a broad feature's flank has that feature's rise on one side only) */
        function profileBeside(average = false): number {
          const m = profileSides().filter((v): v is number => v !== null);
          if (!m.length) return 0;
          return average ? m.reduce((x, y) => x + y, 0) / m.length : sign * Math.max(...m.map((v) => sign * v));
        }
        /** the row-median profile's mean over each strip beside the band (null: off the panel) */
        function profileSides(): [number | null, number | null] {
          const out: (number | null)[] = [];
          for (const [a, b] of [sideA, sideB]) {
            let sum = 0;
            let cnt = 0;
            for (let c = a; c <= b; c++) {
              if (Number.isFinite(S[c]) && !blocked[c] && !others[c]) {
                sum += S[c];
                cnt++;
              }
            }
            out.push(cnt > 0 ? sum / cnt : null);
          }
          return [out[0], out[1]];
        }
        {
          const [pa, pb] = profileSides();
          nearB = pa !== null && pb !== null && sign * pb > sign * pa;
        }
        const means: number[] = [];
        for (let part = 0; part < 5; part++) {
          const a0 = Math.floor((part * along) / 5);
          const a1 = Math.floor(((part + 1) * along) / 5);
          const m = stretchMean(a0, a1, c0, c1);
          means.push(m !== null ? sign * (m - beside(a0, a1).mean) : 0);
        }
        const typical = [...means].sort((p, q) => p - q)[2];
        if (!(typical >= 0.5 * sign * (S[pk] - pedestal) * (2 / 3))) continue;
        const even = means.filter((v) => v >= 0.4 * typical && v <= 2.5 * typical).length;
        if (even < 4) continue;
        // the band's level at each position along it, against the strips beside it (NaN without data)
        const gAlong = new Float64Array(along).fill(NaN);
        const nearAlong = new Float64Array(along).fill(NaN);
        const plainAlong = new Float64Array(along).fill(NaN);
        for (let a = 0; a < along; a++) {
          const m = stretchMean(a, a + 1, c0, c1);
          if (m === null) continue;
          const b = beside(a, a + 1);
          gAlong[a] = sign * (m - b.mean);
          nearAlong[a] = sign * (m - b.near);
          plainAlong[a] = m;
        }
        // where along the panel the band is: one that ends inside the panel (in one of the five stretches)
        // is measured over its own extent, and its profile taken out only there; taken as whole it would
        // leave a band of the other sign where it is not. (Not on black fields: there a stretch of light
        // along an edge is glow, which the round search measures as such.)
        const [e0, e1] = (ctx.black ? null : bandExtent(gAlong, sign * (S[pk] - pedestal), c1 - c0 + 1)) ?? [0, along - 1];
        // one that ends inside the panel is a band only when long against its width (else a cloud's rows)
        if ((e0 > 0 || e1 < along - 1) && e1 - e0 + 1 < 3 * (c1 - c0 + 1)) continue;
        if (process.env.MURA_DBG) console.log(`band ${axis} at ${c0}-${c1} extent ${e0}-${e1} of ${along} sign ${sign} peak ${S[pk].toFixed(2)} pedestal ${pedestal.toFixed(2)}`);
        // and smooth along it: the band's mean at each position along it scatters (robustly) by less
        // than half of its level - a row of separate zones (hot spots) alternates between them and the gaps
        const alongMeans: number[] = [];
        const alongNear: number[] = [];
        for (let a = e0; a <= e1; a++) {
          if (!Number.isFinite(gAlong[a])) continue;
          alongMeans.push(gAlong[a]);
          alongNear.push(nearAlong[a]);
        }
        if (!(robustSigma(alongMeans) < 0.5 * typical)) continue;
        // on a pedestal, or between strips that differ from the background, the band's mean contrast is
        // the median along it of its mean less the mean of the strips beside it (a broad feature under
        // part of its length moves both alike), provided it also stands out of the strip nearer its own
        // level (another band beside it is not its pedestal)
        const around = profileBeside(true);
        let local: number;
        if (pedestal !== 0 || Math.abs(around) > 0.25 * Math.abs(S[pk])) {
          // it must stand out of the nearer strip too (a dip between a band and the background is no band)
          const near = medianOfFirst(Float64Array.from(alongNear), alongNear.length);
          if (!(near >= 0.5 * Math.max(floor, thr))) continue;
          local = sign * medianOfFirst(Float64Array.from(alongMeans), alongMeans.length);
        } else {
          // against the background: the median along it of its mean across (a feature crossing it -
          // another band, a cloud - covers a part of its length and moves the plain mean)
          const plain: number[] = [];
          for (let a = e0; a <= e1; a++) if (Number.isFinite(plainAlong[a])) plain.push(plainAlong[a]);
          local = medianOfFirst(Float64Array.from(plain), plain.length);
        }
        for (let c = c0; c <= c1; c++) taken[c] = 1;
        const f = bandFound(ctx, lv, axis, c0, c1, e0, e1, sign, S[pk], pedestal, local);
        if (f && Math.abs(f.contrastPct) >= floor && f.zNoise >= o.thresholdSigma && !isDuplicate(ctx, f)) {
          register(ctx, f);
          bands.push({ axis, c0, c1, f: lv.f, S: S.slice(), A: alongWeight(gAlong, e0, e1, medianOfFirst(Float64Array.from(alongMeans), alongMeans.length), c1 - c0 + 1) });
          const margin = Math.ceil((c1 - c0 + 1) / 2);
          for (let c = Math.max(0, c0 - margin); c <= Math.min(across - 1, c1 + margin); c++) blocked[c] = 1;
        }
      }
    }
  }
  return bands;
}

/** Median of each row (horizontal) or column of the level over its pixels at least half covered by
 *  data; NaN for those with data on less than half their length. */
function medianProfile(lv: Level, horizontal: boolean, full: number): Float64Array {
  const along = horizontal ? lv.w : lv.h;
  const across = horizontal ? lv.h : lv.w;
  const P = new Float64Array(across).fill(NaN);
  const buf = new Float64Array(along);
  for (let c = 0; c < across; c++) {
    let k = 0;
    for (let a = 0; a < along; a++) {
      const i = horizontal ? c * lv.w + a : a * lv.w + c;
      if (lv.n[i] >= 0.5 * full) buf[k++] = lv.m[i];
    }
    if (k >= 0.5 * along) P[c] = medianOfFirst(buf, k);
  }
  return P;
}

function medianOfFirst(a: Float64Array, k: number): number {
  let finite = true;
  for (let i = 0; i < k; i++) if (!Number.isFinite(a[i])) finite = false;
  // the same middle value(s) by selection, without sorting; a full sort keeps NaN's place (last)
  if (finite && k > 0) return median(a.subarray(0, k));
  const s = a.slice(0, k).sort();
  return k % 2 ? s[k >> 1] : 0.5 * (s[k / 2 - 1] + s[k / 2]);
}

/** Mean of the level's pixels with data over positions a0..a1-1 along a band and from..to across it,
 *  leaving out the columns (rows) marked in skipA or skipB; null without data. */
function stretchMeanOn(
  lv: Level,
  horizontal: boolean,
  a0: number,
  a1: number,
  from: number,
  to: number,
  skipA: Uint8Array | null,
  skipB: Uint8Array | null,
): number | null {
  const { w, n, m } = lv;
  let sum = 0;
  let cnt = 0;
  for (let c = from; c <= to; c++) {
    if (skipA !== null && skipB !== null && (skipA[c] || skipB[c])) continue;
    for (let a = a0; a < a1; a++) {
      const i = horizontal ? c * w + a : a * w + c;
      if (n[i] > 0) {
        sum += m[i];
        cnt++;
      }
    }
  }
  return cnt > 0 ? sum / cnt : null;
}

/**
 * Where along its length a band is (level px): from the first to the last stretch where its level
 * against the strips beside it (g, NaN without data), smoothed along, is at least half its level - first
 * the profile's peak `peak`, then the median over those stretches. A band that another feature hides in
 * its middle is still one band from end to end; one that ends inside the panel ends where it falls under
 * half. The smoothing is as long as the noise of g needs for its mean to lie well within half the level
 * (at least twice the band's width `widthPx`, at most a fifth of the length); stretches shorter than half
 * of it are left out. Null when none is left or the extent is under 0.4 of the length: not a band the row
 * medians describe.
 */
export function bandExtent(g: Float64Array, peak: number, widthPx: number): [number, number] | null {
  const along = g.length;
  if (!(peak > 0) || along < 5) return null;
  const diffs: number[] = [];
  for (let a = 1; a < along; a++) if (Number.isFinite(g[a]) && Number.isFinite(g[a - 1])) diffs.push(g[a] - g[a - 1]);
  const sigma = diffs.length >= 5 ? robustSigma(diffs) / Math.SQRT2 : 0;
  const want = Math.ceil(((6 * sigma) / peak) ** 2);
  const n = Math.min(Math.max(want, 2 * Math.ceil(widthPx) + 1, 3), Math.max(3, Math.floor(along / 5)));
  const gs = boxAlong(g, n >> 1);
  const minRun = Math.max(2, n >> 1);
  let level = peak;
  let hull: [number, number] | null = null;
  for (let pass = 0; pass < 2; pass++) {
    const runs = runsAbove(gs, 0.5 * level).filter(([a, b]) => b - a + 1 >= minRun);
    if (runs.length === 0) return null;
    hull = [runs[0][0], runs[runs.length - 1][1]];
    const inside: number[] = [];
    for (const [a0, a1] of runs) for (let a = a0; a <= a1; a++) if (Number.isFinite(g[a])) inside.push(g[a]);
    const m = inside.length ? medianOfFirst(Float64Array.from(inside), inside.length) : NaN;
    if (!(m > 0)) return null;
    level = m;
  }
  if (hull === null || hull[1] - hull[0] + 1 < 0.4 * along) return null;
  return hull;
}

/** Mean of the finite values of g over a +-h window at each position (NaN where none). */
function boxAlong(g: Float64Array, h: number): Float64Array {
  const out = new Float64Array(g.length).fill(NaN);
  for (let a = 0; a < g.length; a++) {
    let sum = 0;
    let cnt = 0;
    for (let k = Math.max(0, a - h); k <= Math.min(g.length - 1, a + h); k++) {
      if (Number.isFinite(g[k])) {
        sum += g[k];
        cnt++;
      }
    }
    if (cnt > 0) out[a] = sum / cnt;
  }
  return out;
}

/** The runs of positions with gs >= level, in order (a NaN neither ends nor extends a run). */
function runsAbove(gs: Float64Array, level: number): [number, number][] {
  const runs: [number, number][] = [];
  let start = -1;
  let last = -1;
  for (let a = 0; a <= gs.length; a++) {
    const v = a < gs.length ? gs[a] : -Infinity;
    if (Number.isNaN(v)) continue;
    if (v >= level) {
      if (start < 0) start = a;
      last = a;
    } else if (start >= 0) {
      runs.push([start, last]);
      start = -1;
    }
  }
  return runs;
}

/**
 * A band's weight along its length (BandProfile.A): where it fades out, its level g (lightly smoothed,
 * over a third of its width) as a share of `level`, kept rising from each end of its extent e0..e1
 * inwards until it reaches 1 (a running maximum) and falling outwards until it reaches 0 (a running
 * minimum); 1 over the rest of the extent, 0 beyond. Positions without data take their neighbour's.
 */
export function alongWeight(g: Float64Array, e0: number, e1: number, level: number, widthPx: number): Float64Array {
  const A = new Float64Array(g.length);
  for (let a = e0; a <= e1; a++) A[a] = 1;
  const gs = boxAlong(g, Math.max(1, Math.round(widthPx / 3)));
  const mid = (e0 + e1) >> 1;
  for (const [end, outward] of [
    [e0, -1],
    [e1, 1],
  ] as const) {
    // inwards: the end's own ramp, up to the middle of the extent; at the panel's edge only when the
    // band is under half there (it begins inside, closer to the edge than the extent's smoothing reaches):
    // a band from edge to edge is taken out whole, as the surface near an edge is the least certain
    const firstShare = (): number => {
      // the raw level over the first sixth of the band's width with data
      const k = Math.max(2, Math.round(widthPx / 6));
      let sum = 0;
      let cnt = 0;
      for (let a = end; (outward < 0 ? a <= mid : a >= mid) && cnt < k; a -= outward) {
        if (Number.isFinite(g[a])) {
          sum += g[a];
          cnt++;
        }
      }
      return cnt > 0 ? sum / cnt / level : NaN;
    };
    const atEdge = end === 0 || end === g.length - 1;
    if (atEdge && !(firstShare() < 0.5)) continue;
    let run = 0;
    for (let a = end; outward < 0 ? a <= mid : a >= mid; a -= outward) {
      const v = gs[a] / level;
      if (Number.isFinite(v)) run = Math.max(run, v);
      if (run >= 1) break;
      A[a] = Math.max(0, run);
    }
    // outwards: the tail
    let fall = Math.min(1, A[end]);
    for (let a = end + outward; a >= 0 && a < g.length; a += outward) {
      const v = gs[a] / level;
      if (Number.isFinite(v)) fall = Math.min(fall, v);
      if (!(fall > 0)) break;
      A[a] = fall;
    }
  }
  return A;
}

/** The band between profile positions c0..c1 (level px) across the panel and e0..e1 along it, measured
 *  at working resolution. */
function bandFound(
  ctx: Ctx,
  lv: Level,
  axis: Axis,
  c0: number,
  c1: number,
  e0: number,
  e1: number,
  sign: 1 | -1,
  peak: number,
  pedestal: number,
  localContrast: number,
): Found | null {
  const { w: W, h: H } = ctx;
  const f = lv.f;
  const lo = c0 * f;
  const hi = Math.min(axis === 'horizontal' ? H : W, (c1 + 1) * f);
  const alongEnd = axis === 'horizontal' ? W : H;
  const from = e0 * f;
  const to = e1 >= (axis === 'horizontal' ? lv.w : lv.h) - 1 ? alongEnd : Math.min(alongEnd, (e1 + 1) * f);
  // a line (a few level px wide) measured across again at the working raster's resolution: the level's
  // pixels and smoothing would make it about 2.5 of them wide and correspondingly faint
  const fine = f > 1 && (c1 - c0 + 1) * f <= NARROW_REMEASURE_PX ? acrossAtWorkScale(ctx, axis, lo, hi, from, to, sign) : null;
  // the band's pixels: its rows (columns) across, over its extent along
  const [r0, r1] = fine ? [fine.r0, fine.r1] : [lo, hi];
  const px: number[] = [];
  if (axis === 'horizontal') {
    for (let y = r0; y < r1; y++) for (let x = from; x < to; x++) if (ctx.wt[y * W + x] > 0) px.push(y * W + x);
  } else {
    for (let y = from; y < to; y++) for (let x = r0; x < r1; x++) if (ctx.wt[y * W + x] > 0) px.push(y * W + x);
  }
  if (px.length === 0) return null;
  const mid = fine ? (fine.r0 + fine.r1) / 2 - 0.5 : ((c0 + c1 + 1) / 2) * f - 0.5;
  const midAlong = e0 === 0 && to === alongEnd ? alongEnd / 2 : (from + to) / 2 - 0.5;
  // a base level of the rows around the line counts as its surround only where the band search found
  // one (a pedestal); else the background is the reference, as for any other band
  const base = fine && pedestal !== 0 ? fine.base : pedestal;
  const found = measureRegion(ctx, Int32Array.from(px), base, fine ? fine.peak : peak, axis === 'horizontal' ? [midAlong, mid] : [mid, midAlong], sign, 'profile', axis);
  if (!found) return null;
  // the mean contrast from the profile along the band (see findBands), not the plain mean over its pixels
  const c = (fine ? fine.local + fine.base - base : localContrast) / (1 + base / 100);
  const k = Math.abs(c) / Math.max(Math.abs(found.contrastPct), 1e-9);
  found.contrastPct = c;
  found.zNoise *= k;
  found.zFit *= k;
  // the profile's blur out of the width, in quadrature: on a level a box of one level px and the 1-px
  // kernel; at the working raster's scale its own pixel and the camera's, about one working px each
  const wpx = fine ? fine.r1 - fine.r0 : c1 - c0 + 1;
  const blur2 = fine ? WORK_BLUR_FWHM2 : BLUR_FWHM2;
  const cb = Math.sqrt(Math.max(wpx * wpx - blur2, 0.25 * wpx * wpx)) / wpx;
  found.unblurredAreaMm2 = found.areaMm2 * cb;
  if (wpx * cb * (fine ? 1 : f) < RESOLVED_PX) {
    // the figures as seen: bounds (see toFound)
    found.belowResolution = 'width';
    return found;
  }
  found.areaMm2 *= cb;
  found.widthMm *= cb;
  found.contrastPct /= Math.sqrt(cb);
  return found;
}

/** Bands found on a coarser level at most this many working px wide are measured across again at the
 *  working raster's scale (acrossAtWorkScale). */
const NARROW_REMEASURE_PX = 8;
/** FWHM² (working px²) of the working raster's own blur: its pixel's box and the camera pixel's as
 *  resampled into it, about one working px each (variance 1/12 each) */
const WORK_BLUR_FWHM2 = 8 * Math.LN2 * (2 / 12);
/** the analysed map resolves a feature from this many of its pixels across (README "Taking the photos") */
const RESOLVED_PX = 2;

/**
 * A narrow band's cross-profile at the working raster's scale: the mean of C along its extent (from..to)
 * at each row (column) from two of its widths before lo to two after hi; its extreme within lo-1..hi, the
 * level of the outer rows (beyond one width on either side) as its base, and the rows around the extreme
 * at least halfway from the base to it. `local`: the median along the band of its mean over those rows.
 */
function acrossAtWorkScale(
  ctx: Ctx,
  axis: Axis,
  lo: number,
  hi: number,
  from: number,
  to: number,
  sign: 1 | -1,
): { r0: number; r1: number; base: number; peak: number; local: number } | null {
  const { w: W, h: H, C, wt } = ctx;
  const across = axis === 'horizontal' ? H : W;
  const span = Math.max(1, hi - lo);
  const t0 = Math.max(0, lo - 2 * span);
  const t1 = Math.min(across, hi + 2 * span);
  // mean of C with data over rows (columns) t in [ta, tb) and positions a along in [aa, ab); NaN without
  const meanOver = (ta: number, tb: number, aa: number, ab: number): number => {
    let sum = 0;
    let cnt = 0;
    for (let t = ta; t < tb; t++) {
      for (let a = aa; a < ab; a++) {
        const i = axis === 'horizontal' ? t * W + a : a * W + t;
        if (wt[i] > 0) {
          sum += C[i];
          cnt++;
        }
      }
    }
    return cnt > 0 ? sum / cnt : NaN;
  };
  const P = new Float64Array(t1 - t0);
  for (let t = t0; t < t1; t++) P[t - t0] = meanOver(t, t + 1, from, to);
  let tp = -1;
  for (let t = Math.max(t0, lo - 1); t < Math.min(t1, hi + 1); t++) {
    const v = P[t - t0];
    if (Number.isFinite(v) && (tp < 0 || sign * v > sign * P[tp - t0])) tp = t;
  }
  if (tp < 0) return null;
  let bsum = 0;
  let bcnt = 0;
  for (let t = t0; t < t1; t++) {
    if (t >= lo - span && t < hi + span) continue;
    const v = P[t - t0];
    if (Number.isFinite(v)) {
      bsum += v;
      bcnt++;
    }
  }
  if (bcnt === 0) return null;
  const base = bsum / bcnt;
  const peak = P[tp - t0];
  if (!(sign * (peak - base) > 0)) return null;
  const half = base + 0.5 * (peak - base);
  let r0 = tp;
  let r1 = tp + 1;
  while (r0 - 1 >= t0 && sign * (P[r0 - 1 - t0] - half) >= 0) r0--;
  while (r1 < t1 && sign * (P[r1 - t0] - half) >= 0) r1++;
  const means: number[] = [];
  for (let a = from; a < to; a++) {
    const m = meanOver(r0, r1, a, a + 1);
    if (Number.isFinite(m)) means.push(m - base);
  }
  if (means.length === 0) return null;
  return { r0, r1, base, peak, local: medianOfFirst(Float64Array.from(means), means.length) };
}
