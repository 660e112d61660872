// Round features at all scales: seeds at local extrema of difference-of-Gaussians maps in noise-sigma
// units, each grown into its connected half-peak region on a lightly smoothed contrast map.
//
// Scales: a Gaussian bump of half-peak diameter D (sigma_b = D / 2.355) gives its strongest
// DoG(s, 2 s) response at s = sigma_b / sqrt(2) (d/ds of 1/(1+x) - 1/(1+4x), x = s²/sigma_b², vanishes at
// x = 1/2), so the DoG scales run from minFeatureMm / 3.33 to maxFeatureMm / 3.33 in steps of sqrt 2.
//
// Growth: the region is measured on the least smoothed member of the low-pass family on which the
// feature stands clear of the noise (peak >= 20 noise sigmas), never smoother than a third of the seed
// scale, so that smoothing neither fragments the region nor widens it much (a Gaussian smoothed by
// sigma_b / 4 widens its half-peak area by 6 %).

import { floodFill, robustSigma, sampleIndices } from './raster.js';
import type { Level } from './raster.js';
import { applyDog, applyLowPass, filterGeometry, levelToWork, type DogMap, type FilteredMap, type FilterGeometry } from './scalespace.js';
import { isDuplicate, measureRegion, register, type Ctx, type Found } from './context.js';

export interface ScaleSet {
  dogs: DogMap[];
  /** low-pass maps, ascending sigma (the finer ones plus each DoG's own low-pass) */
  family: FilteredMap[];
  /** correlation factor per DoG scale: measured noise / white-noise prediction */
  rhoByScale: number[];
}

/** DoG sigmas (working px) for round features from minFeatureMm to maxFeatureMm across. */
export function blobScales(ctx: Ctx): number[] {
  const lo = ctx.opts.minFeatureMm / 3.33 / ctx.mmPerPx;
  const hi = Math.min(ctx.opts.maxFeatureMm / 3.33 / ctx.mmPerPx, Math.min(ctx.w, ctx.h) / 2);
  const out: number[] = [];
  for (let s = Math.max(lo, 0.7); s <= hi * 1.0001; s *= Math.SQRT2) out.push(s);
  if (out.length === 0) out.push(Math.max(lo, 0.7));
  return out;
}

/** Weight-only filter geometry of all scales (reused across background rounds). */
export interface ScaleGeometry {
  dogs: FilterGeometry[];
  fine: FilterGeometry[];
}

export function scaleGeometry(ctx: Ctx, pyr: Level[]): ScaleGeometry {
  const sigmas = blobScales(ctx);
  const dogs = sigmas.map((s) => filterGeometry(pyr, s, 2));
  const fine: FilterGeometry[] = [];
  for (let s = sigmas[0] / 2; s >= 0.45; s /= Math.SQRT2) fine.unshift(filterGeometry(pyr, s, null));
  return { dogs, fine };
}

export function buildScaleSet(ctx: Ctx, pyr: Level[], geo: ScaleGeometry): ScaleSet {
  const dogs = geo.dogs.map((g) => applyDog(pyr, g));
  const family: FilteredMap[] = geo.fine.map((g) => applyLowPass(pyr, g));
  for (const d of dogs) family.push(d.low);
  const rhoByScale = dogs.map((d) => {
    const idx = sampleIndices(d.v.length, (i) => Number.isFinite(d.sdUnit[i]), 20_000);
    const z = new Float64Array(idx.length);
    for (let k = 0; k < idx.length; k++) z[k] = d.v[idx[k]] / (ctx.noisePct * d.sdUnit[idx[k]]);
    return robustSigma(z);
  });
  return { dogs, family, rhoByScale };
}

/** The map's noise correlation factor, from the finest DoG scales (features cover little there). */
export function correlationFactor(set: ScaleSet): number {
  const n = Math.max(2, set.dogs.filter((d) => d.sigma <= 4).length);
  let r = 0;
  for (let k = 0; k < Math.min(n, set.rhoByScale.length); k++) {
    if (Number.isFinite(set.rhoByScale[k])) r = Math.max(r, set.rhoByScale[k]);
  }
  return Math.min(Math.max(r, 0.5), 20);
}

interface Seed {
  k: number;
  i: number; // level index
  z: number;
}

function localExtrema(d: DogMap, scale: number, thr: number, out: Seed[], k: number): void {
  const { w, h, v, sdUnit } = d;
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const i = y * w + x;
      const sd = sdUnit[i];
      if (!Number.isFinite(sd)) continue;
      const z = v[i] / (scale * sd);
      if (Math.abs(z) < thr) continue;
      const s = z > 0 ? 1 : -1;
      const a = s * v[i];
      let ok = true;
      for (let dy = -1; dy <= 1 && ok; dy++) {
        const yy = y + dy;
        if (yy < 0 || yy >= h) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const xx = x + dx;
          if (xx < 0 || xx >= w || (dx === 0 && dy === 0)) continue;
          const j = yy * w + xx;
          const b = s * v[j];
          if (b > a || (b === a && j < i)) {
            ok = false;
            break;
          }
        }
      }
      if (ok) out.push({ k, i, z });
    }
  }
}

export function findBlobs(ctx: Ctx, set: ScaleSet, maxSeeds = 4000): void {
  const seeds: Seed[] = [];
  set.dogs.forEach((d, k) => localExtrema(d, ctx.rho * ctx.noisePct, ctx.opts.thresholdSigma, seeds, k));
  // coarse scales first, so that a cloud is known before the finer features on it; strongest first
  // within a scale
  seeds.sort((a, b) => b.k - a.k || Math.abs(b.z) - Math.abs(a.z));
  if (seeds.length > maxSeeds) {
    const keep = [...seeds].sort((a, b) => Math.abs(b.z) - Math.abs(a.z)).slice(0, maxSeeds);
    const kept = new Set(keep);
    for (let i = seeds.length - 1; i >= 0; i--) if (!kept.has(seeds[i])) seeds.splice(i, 1);
  }
  const stamps = new Map<number, Int32Array>();
  let stampId = 0;
  const minArea = (Math.PI * (ctx.opts.minFeatureMm / 2) ** 2) / 2;
  const maxDiameter = 1.25 * ctx.opts.maxFeatureMm;
  for (const seed of seeds) {
    const d = set.dogs[seed.k];
    const lx = seed.i % d.w;
    const ly = (seed.i - lx) / d.w;
    const wx = Math.min(ctx.w - 1, Math.max(0, Math.round(levelToWork(lx, d.factor))));
    const wy = Math.min(ctx.h - 1, Math.max(0, Math.round(levelToWork(ly, d.factor))));
    const owner = ctx.label[wy * ctx.w + wx];
    if (owner && d.sigma >= ctx.found[owner - 1].matchedScalePx / 3) continue;
    const sign: 1 | -1 = seed.z > 0 ? 1 : -1;
    // a seed must be an extremum across scales too: the DoG of a bump is scale-normalised and peaks
    // at the bump's own scale, so the same bump seen at a much coarser or finer scale (and a parent's
    // curvature seen at fine scales) is not a seed
    const here = sign * d.v[seed.i];
    if (seed.k > 0 && sign * dogAt(set.dogs[seed.k - 1], wx, wy) > here) continue;
    if (seed.k + 1 < set.dogs.length && sign * dogAt(set.dogs[seed.k + 1], wx, wy) > here) continue;
    const f = growBlob(ctx, set, d.sigma, wx, wy, sign, owner, stamps, () => ++stampId);
    if (!f) continue;
    if (sign * f.contrastPct <= 0 || f.areaMm2 < minArea) continue;
    if (f.zNoise < ctx.opts.thresholdSigma || f.zFit < ctx.opts.fitSigma) continue;
    // wider than the largest feature searched for and not elongated: smooth variation, not mura
    if (2 * Math.sqrt(f.areaMm2 / Math.PI) > maxDiameter && f.lengthMm < 3 * f.widthMm) continue;
    if (isDuplicate(ctx, f)) continue;
    if (owner) {
      // a finer feature inside a found one: keep it only if it is much smaller and round (a spot on a
      // cloud), not a ridge of the parent's own shape
      const parent = ctx.found[owner - 1];
      if (f.pixels.length > parent.pixels.length / 8 || f.lengthMm > 2 * f.widthMm) continue;
    }
    register(ctx, f);
  }
}

/**
 * Grow the half-peak region around a seed.
 *
 * The region is measured on the least smoothed low-pass map on which the feature stands 12 noise
 * sigmas clear (never smoother than the seed scale), then corrected for that smoothing as for a
 * Gaussian-like profile: a Gaussian of sigma_b smoothed by g has sigma_eff² = sigma_b² + g², so its
 * true half-peak region (area 2 pi ln2 sigma_b²) is the smoothed map's contour at the level
 * exp(-ln2 sigma_b² / sigma_eff²) of its peak, and its true peak is sigma_eff² / sigma_b² times the
 * smoothed one. For a flat-topped disc of radius R the correction shrinks the area by 2 ln2 g² / R²,
 * small for g << R.
 *
 * Features inside a found one (a spot on a cloud) are measured against the local surround: the median
 * of the map in the annulus 2R..3R around the seed. Isolated features are measured against the smooth
 * background itself (a surround of other sign is the background fit's reaction, not a pedestal).
 */
function growBlob(
  ctx: Ctx,
  set: ScaleSet,
  seedSigma: number,
  wx: number,
  wy: number,
  sign: 1 | -1,
  owner: number,
  stamps: Map<number, Int32Array>,
  nextId: () => number,
): Found | null {
  const noise = ctx.rho * ctx.noisePct;
  const Rseed = 1.665 * seedSigma; // half-peak radius of the Gaussian this DoG scale matches
  // 1. the pedestal, and where the peak is: located on a map smoothed at 0.7 of the seed scale so
  //    that the noise does not choose it (the maximum of a noisy map is biased high)
  let atSeed: FilteredMap | null = null;
  let locator: FilteredMap | null = null;
  for (const fam of set.family) {
    if (fam.sigma <= seedSigma * 1.0001) atSeed = fam;
    if (fam.sigma <= 0.7 * seedSigma * 1.0001 || !locator) locator = fam;
  }
  if (!atSeed || !locator) return null;
  let pedestal = 0;
  if (owner) {
    const P = annulusMedian(ctx, atSeed, wx, wy, 2 * Rseed, 3 * Rseed);
    if (Number.isFinite(P)) pedestal = P;
  }
  const loc = findPeak(locator, wx, wy, Math.max(1, seedSigma / locator.factor), sign);
  if (loc.idx < 0 || !isLocalExtremum(locator, loc.idx, sign)) return null;
  const lx0 = loc.idx % locator.w;
  const ly0 = (loc.idx - lx0) / locator.w;
  const px = levelToWork(lx0, locator.factor);
  const py = levelToWork(ly0, locator.factor);
  // 2. the feature must show on the low-pass at its own scale, not only in the DoG (whose side lobes
  //    next to a strong feature are not features)
  const s = sampleAt(atSeed, px, py);
  if (!(sign * (s.value - pedestal) >= ctx.opts.thresholdSigma * noise * s.sd)) return null;
  // 3. the least smoothed map (up to 0.7 of the seed scale) where the peak stands 12 sigmas clear
  let chosen: FilteredMap | null = null;
  let peak = 0;
  for (const fam of set.family) {
    if (fam.sigma > 0.7 * seedSigma * 1.0001 && chosen) break;
    const v = sampleAt(fam, px, py);
    if (!Number.isFinite(v.sd)) continue;
    chosen = fam;
    peak = v.value;
    if (sign * (v.value - pedestal) >= 25 * noise * v.sd) break;
  }
  if (!chosen || sign * (peak - pedestal) <= 0) return null;
  // flood from the level pixel at the peak position (or the nearest neighbour inside the region)
  const peakIdx = startPixel(chosen, px, py, pedestal + 0.5 * (peak - pedestal), sign);
  if (peakIdx < 0) return null;
  const fam = chosen;
  let stamp = stamps.get(fam.level);
  if (!stamp) {
    stamp = new Int32Array(fam.w * fam.h);
    stamps.set(fam.level, stamp);
  }
  const maxPx = Math.floor(0.6 * fam.w * fam.h);
  const fill = (level: number): Int32Array | null => {
    const thr = pedestal + level * (peak - pedestal);
    const v = fam.v;
    const sd = fam.sdUnit;
    return floodFill(fam.w, fam.h, peakIdx, (i) => Number.isFinite(sd[i]) && sign * (v[i] - thr) >= 0, stamp!, nextId(), maxPx);
  };
  let region = fill(0.5);
  if (!region || region.length === 0) return null;
  // 3. undo the smoothing (Gaussian-like profiles), for roundish regions
  let peakTrue = peak;
  const g2 = fam.sigma * fam.sigma;
  const areaPx = region.length * fam.factor * fam.factor;
  if (g2 > 0 && roundish(region, fam.w)) {
    const se2 = areaPx / (2 * Math.PI * Math.LN2);
    const sb2 = Math.max(se2 - g2, 0.25 * se2);
    const level = Math.exp((-Math.LN2 * sb2) / se2);
    if (level > 0.505) {
      const r2 = fill(level);
      if (r2 && r2.length > 0) region = r2;
    }
    peakTrue = pedestal + (peak - pedestal) * (se2 / sb2);
  }
  const pixels = toWorking(ctx, fam, region);
  return measureRegion(ctx, pixels, pedestal, peakTrue, [px, py], sign, 'blob', null);
}

/** Bounding box no more than twice as long as wide. */
function roundish(region: Int32Array, w: number): boolean {
  let x0 = Infinity;
  let x1 = -Infinity;
  let y0 = Infinity;
  let y1 = -Infinity;
  for (let k = 0; k < region.length; k++) {
    const x = region[k] % w;
    const y = (region[k] - x) / w;
    if (x < x0) x0 = x;
    if (x > x1) x1 = x;
    if (y < y0) y0 = y;
    if (y > y1) y1 = y;
  }
  const a = x1 - x0 + 1;
  const b = y1 - y0 + 1;
  return Math.max(a, b) <= 2 * Math.min(a, b);
}

function dogAt(d: DogMap, wx: number, wy: number): number {
  const x = Math.min(d.w - 1, Math.max(0, Math.round((wx + 0.5) / d.factor - 0.5)));
  const y = Math.min(d.h - 1, Math.max(0, Math.round((wy + 0.5) / d.factor - 0.5)));
  return d.v[y * d.w + x];
}

/** No 8-neighbour beyond the value in the sign's direction (the rim of a search window on a slope is not). */
function isLocalExtremum(fam: FilteredMap, i: number, sign: 1 | -1): boolean {
  const x = i % fam.w;
  const y = (i - x) / fam.w;
  const a = sign * fam.v[i];
  for (let dy = -1; dy <= 1; dy++) {
    for (let dx = -1; dx <= 1; dx++) {
      const xx = x + dx;
      const yy = y + dy;
      if ((dx === 0 && dy === 0) || xx < 0 || yy < 0 || xx >= fam.w || yy >= fam.h) continue;
      const j = yy * fam.w + xx;
      if (Number.isFinite(fam.sdUnit[j]) && sign * fam.v[j] > a) return false;
    }
  }
  return true;
}

/** Bilinear value (and noise) of a level map at a working-raster position. */
function sampleAt(fam: FilteredMap, wx: number, wy: number): { value: number; sd: number } {
  const fx = Math.min(fam.w - 1, Math.max(0, (wx + 0.5) / fam.factor - 0.5));
  const fy = Math.min(fam.h - 1, Math.max(0, (wy + 0.5) / fam.factor - 0.5));
  const x0 = Math.floor(fx);
  const y0 = Math.floor(fy);
  const x1 = Math.min(fam.w - 1, x0 + 1);
  const y1 = Math.min(fam.h - 1, y0 + 1);
  const ax = fx - x0;
  const ay = fy - y0;
  let v = 0;
  let sd = 0;
  let wsum = 0;
  const add = (x: number, y: number, wgt: number): void => {
    const i = y * fam.w + x;
    if (wgt <= 0 || !Number.isFinite(fam.sdUnit[i])) return;
    v += wgt * fam.v[i];
    sd += wgt * fam.sdUnit[i];
    wsum += wgt;
  };
  add(x0, y0, (1 - ax) * (1 - ay));
  add(x1, y0, ax * (1 - ay));
  add(x0, y1, (1 - ax) * ay);
  add(x1, y1, ax * ay);
  return wsum > 0 ? { value: v / wsum, sd: sd / wsum } : { value: 0, sd: Infinity };
}

/** Level pixel nearest to a working position that passes the threshold (searching 2 px around). */
function startPixel(fam: FilteredMap, wx: number, wy: number, thr: number, sign: 1 | -1): number {
  const cx = Math.round((wx + 0.5) / fam.factor - 0.5);
  const cy = Math.round((wy + 0.5) / fam.factor - 0.5);
  let best = -1;
  let bd = Infinity;
  for (let y = Math.max(0, cy - 2); y <= Math.min(fam.h - 1, cy + 2); y++) {
    for (let x = Math.max(0, cx - 2); x <= Math.min(fam.w - 1, cx + 2); x++) {
      const i = y * fam.w + x;
      if (!Number.isFinite(fam.sdUnit[i]) || sign * (fam.v[i] - thr) < 0) continue;
      const d = (x - cx) ** 2 + (y - cy) ** 2;
      if (d < bd) {
        bd = d;
        best = i;
      }
    }
  }
  return best;
}

function findPeak(fam: FilteredMap, wx: number, wy: number, radius: number, sign: 1 | -1): { idx: number; value: number } {
  const cx = Math.round((wx + 0.5) / fam.factor - 0.5);
  const cy = Math.round((wy + 0.5) / fam.factor - 0.5);
  const r = Math.ceil(radius);
  let best = -Infinity;
  let idx = -1;
  for (let y = Math.max(0, cy - r); y <= Math.min(fam.h - 1, cy + r); y++) {
    for (let x = Math.max(0, cx - r); x <= Math.min(fam.w - 1, cx + r); x++) {
      if ((x - cx) ** 2 + (y - cy) ** 2 > r * r) continue;
      const i = y * fam.w + x;
      if (!Number.isFinite(fam.sdUnit[i])) continue;
      const a = sign * fam.v[i];
      if (a > best) {
        best = a;
        idx = i;
      }
    }
  }
  return { idx, value: idx >= 0 ? fam.v[idx] : 0 };
}

/** Median of a low-pass map in the annulus r0..r1 (working px) around a working-raster point. */
function annulusMedian(ctx: Ctx, fam: FilteredMap, wx: number, wy: number, r0w: number, r1w: number): number {
  const cx = (wx + 0.5) / fam.factor - 0.5;
  const cy = (wy + 0.5) / fam.factor - 0.5;
  const r0 = r0w / fam.factor;
  const r1 = r1w / fam.factor + 0.5;
  const vals: number[] = [];
  const step = Math.max(1, Math.floor(r1 / 60));
  for (let y = Math.max(0, Math.floor(cy - r1)); y <= Math.min(fam.h - 1, Math.ceil(cy + r1)); y += step) {
    for (let x = Math.max(0, Math.floor(cx - r1)); x <= Math.min(fam.w - 1, Math.ceil(cx + r1)); x += step) {
      const d2 = (x - cx) ** 2 + (y - cy) ** 2;
      if (d2 < r0 * r0 || d2 > r1 * r1) continue;
      const i = y * fam.w + x;
      if (!Number.isFinite(fam.sdUnit[i])) continue;
      vals.push(fam.v[i]);
    }
  }
  if (vals.length < 8) return NaN;
  vals.sort((a, b) => a - b);
  return vals[vals.length >> 1];
}

/** Working-raster pixels covered by level pixels. */
export function toWorking(ctx: Ctx, fam: { w: number; factor: number }, region: Int32Array): Int32Array {
  const f = fam.factor;
  if (f === 1) return region;
  const out = new Int32Array(region.length * f * f);
  let n = 0;
  for (let k = 0; k < region.length; k++) {
    const lx = region[k] % fam.w;
    const ly = (region[k] - lx) / fam.w;
    const x0 = lx * f;
    const y0 = ly * f;
    for (let y = y0; y < Math.min(y0 + f, ctx.h); y++) {
      for (let x = x0; x < Math.min(x0 + f, ctx.w); x++) out[n++] = y * ctx.w + x;
    }
  }
  return out.subarray(0, n);
}
