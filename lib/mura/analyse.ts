// Full-field mura analysis of a rectified panel map.
//
//   luminance -> working raster -> robust polynomial background B (order 2 first, then the full order
//   with the features found so far masked) -> contrast C = 100 (Y - B) / B -> bands across the panel
//   from row/column medians, features of every size on a pyramid of C (detect.ts) -> half-peak regions
//   -> kind, contrast, area, SEMU -> hot-spot arrays, tile seams -> ranked list.

import { EvenfieldError } from '../errors.js';
import type { Blob, MuraResult, PanelMap, Plane } from '../types.js';
import { fitBackground, type BackgroundFit, type WorkRaster } from './background.js';
import { buildLevels, detectFeatures, noiseCorrelation } from './detect.js';
import { classify, round } from './classify.js';
import { panelEdges, type Ctx, type Found } from './context.js';
import { groupHotspots, type Finding } from './hotspots.js';
import { resolveMuraOptions, type MuraOptions, type MuraOptionsInput } from './options.js';
import { chamfer, robustSigma, sampleIndices } from './raster.js';
import { semu } from './semu.js';
import { analyseTiles } from './tiles.js';

export interface MuraAnalysis extends MuraResult {
  /** contrast against the smooth background, %, at working resolution (NaN where the map has no data) */
  contrast: Plane;
  /** the smooth background (linear Y, map units) at the same resolution */
  background: Plane;
  /** map pixels per working pixel along each axis (1 = full map resolution) */
  workScale: number;
  /** plain-language cautions about the figures */
  notes: string[];
}

/** Diameters (mm) at which the smallest resolvable contrast is reported. */
export const RESOLVABLE_DIAMETERS_MM = [3, 10, 30, 100];

export function analyseMura(map: PanelMap, input: MuraOptionsInput): MuraAnalysis {
  const opts = resolveMuraOptions(input);
  const work = workRaster(map, opts.maxWorkPixels);
  const factor = Math.round((work.mmPerPx * map.pxPerMm) * 1e6) / 1e6;
  const black = opts.pattern === 'black';
  const edges = panelEdges(work.wt, work.w, work.h);
  const N = work.w * work.h;

  let mask: Uint8Array | null = null;
  let rho = 1;
  let noisePct = neighbourNoise(relativeY(work), work);
  let fit: BackgroundFit | null = null;
  let ctx: Ctx | null = null;
  let C: Float32Array = new Float32Array(N);
  for (let round = 1; round <= opts.background.rounds; round++) {
    // The first round fits a surface of order 2 at most: a large cloud is partly representable by a
    // surface of higher order, which would absorb it before it could be found and masked. The later
    // rounds fit the full order with the found features masked, so the surface passes under them.
    const first = round === 1 && opts.background.rounds > 1;
    const order = first ? Math.min(2, opts.background.order) : opts.background.order;
    fit = fitBackground(work, mask, { ...opts.background, order }, rho * noisePct, opts.tileGrid, black);
    C = contrastOf(work, fit);
    const Cdet = opts.tileGrid ? withoutTileSteps(C, work, fit, opts.tileGrid) : C;
    noisePct = Math.max(neighbourNoise(Cdet, work), 1e-4);
    ctx = {
      w: work.w,
      h: work.h,
      mmPerPx: work.mmPerPx,
      C: Cdet,
      wt: work.wt,
      noisePct,
      rho: 1,
      fitErrorPct: fit.fitErrorPct,
      B: fit.B,
      opts,
      black,
      label: new Int32Array(N),
      edges,
      found: [],
    };
    const levels = buildLevels(ctx);
    rho = noiseCorrelation(levels);
    ctx.rho = rho;
    detectFeatures(ctx, levels, !first);
    if (process.env.MURA_DBG) {
      console.log(`round ${round} order ${fit.order} fitErr ${fit.fitErrorPct.toFixed(3)} cells ${fit.cellsUsed}/${fit.cellsClipped}/${fit.cellsMasked} masked ${mask ? countOf(mask) / N : 0}`);
      for (const f of ctx.found) console.log(`  ${f.sign} c(${(f.cx * work.mmPerPx).toFixed(0)},${(f.cy * work.mmPerPx).toFixed(0)}) A ${f.areaMm2.toFixed(0)} C ${f.contrastPct.toFixed(3)} z ${f.zNoise.toFixed(0)} semu ${semu(f.contrastPct, f.areaMm2).toFixed(2)}`);
    }
    if (round === opts.background.rounds) break;
    const next = featureMask(ctx, opts);
    // masks only grow: a feature masked once stays masked (a surface freed of its mask would absorb
    // it again, and it would come and go between rounds); the first round's surface is never the final one
    if (mask) for (let i = 0; i < N; i++) next[i] |= mask[i];
    if (!first && (mask ? sameMask(mask, next) : countOf(next) === 0)) break;
    mask = next;
  }
  if (!fit || !ctx) throw new EvenfieldError('internal', 'mura analysis ran no round');

  // findings: single features, hot-spot arrays, tile seams and steps
  const singles: Finding[] = ctx.found.map((f) => findingOf(ctx!, f, opts));
  let findings = groupHotspots(ctx, singles, opts);
  if (opts.tileGrid) {
    const tiles = analyseTiles(ctx, fit, opts.tileGrid, opts);
    findings = findings.filter((f) => !tiles.onSeam(f)).concat(tiles.findings);
  }
  const reported = findings.filter((f) => f.semu >= opts.semuFloor);
  reported.sort((a, b) => b.semu - a.semu);
  const blobs: Blob[] = reported.map((f, k) => toBlob(f, k + 1, map, factor));

  const resolvable: Record<string, number> = {};
  for (const d of RESOLVABLE_DIAMETERS_MM) {
    const px = (Math.PI * (d / 2) ** 2) / (work.mmPerPx * work.mmPerPx);
    const noiseOfMean = (rho * noisePct) / Math.sqrt(Math.max(px, 1));
    resolvable[String(d)] = round(Math.max(opts.thresholdSigma * noiseOfMean, opts.fitSigma * fit.fitErrorPct), 4);
  }

  const notes: string[] = [];
  notes.push(
    `Resolvable contrast falls with feature area while photo noise averages down, but not below ${round(
      opts.fitSigma * fit.fitErrorPct,
      3,
    )} %: the background model's own error (${round(fit.fitErrorPct, 3)} %) does not average down.`,
  );
  if (black) {
    notes.push('SEMU on a black field is an extrapolation: the just-noticeable contrast behind it was set on lit fields.');
  }
  if (!map.mmKnown) notes.push('Areas and SEMU use the nominal panel size: mm are nominal units.');
  const maskedPct = mask ? (100 * countOf(mask)) / N : 0;
  const backgroundModel =
    `polynomial surface of order ${fit.order} (Legendre terms) fitted robustly on ${round(fit.cellPx * work.mmPerPx, 2)} mm cells; ` +
    `${round(maskedPct, 1)} % of the panel masked as features; model error ${round(fit.fitErrorPct, 3)} %` +
    (opts.tileGrid ? `; one level offset per tile (${opts.tileGrid[0]} x ${opts.tileGrid[1]})` : '');

  const out = new Float32Array(N);
  const bg = new Float32Array(N);
  for (let i = 0; i < N; i++) {
    out[i] = work.wt[i] > 0 ? C[i] : NaN;
    bg[i] = work.wt[i] > 0 ? fit.B[i] : NaN;
  }
  return {
    blobs,
    maxSemu: blobs.length ? blobs[0].semu : 0,
    noiseFloorPct: round(noisePct, 5),
    resolvableContrastPct: resolvable,
    backgroundModel,
    contrast: { width: work.w, height: work.h, data: out },
    background: { width: work.w, height: work.h, data: bg },
    workScale: factor,
    notes,
  };
}

/** The map's luminance box-averaged by an integer factor so that it has at most maxPixels pixels. */
export function workRaster(map: PanelMap, maxPixels: number): WorkRaster {
  const { width: W, height: H } = map;
  if (!(W >= 16 && H >= 16)) throw new EvenfieldError('internal', `panel map ${W}x${H} is too small for mura analysis`);
  if (map.Y.length !== W * H || map.valid.length !== W * H) throw new EvenfieldError('internal', 'panel map arrays do not match its size');
  if (!(map.pxPerMm > 0)) throw new EvenfieldError('internal', `panel map pxPerMm must be positive, got ${map.pxPerMm}`);
  let f = 1;
  while (Math.ceil(W / f) * Math.ceil(H / f) > maxPixels) f++;
  const w = Math.ceil(W / f);
  const h = Math.ceil(H / f);
  const Y = new Float32Array(w * h);
  const wt = new Float32Array(w * h);
  for (let y = 0; y < H; y++) {
    const wy = Math.floor(y / f);
    for (let x = 0; x < W; x++) {
      const i = y * W + x;
      const v = map.Y[i];
      if (!map.valid[i] || !Number.isFinite(v)) continue;
      const j = wy * w + Math.floor(x / f);
      Y[j] += v;
      wt[j] += 1;
    }
  }
  const full = f * f;
  for (let j = 0; j < w * h; j++) {
    if (wt[j] > 0) Y[j] /= wt[j];
    wt[j] /= full;
  }
  return { w, h, mmPerPx: f / map.pxPerMm, Y, wt };
}

function relativeY(work: WorkRaster): Float32Array {
  const idx = sampleIndices(work.Y.length, (i) => work.wt[i] > 0, 50_000);
  const vals = Array.from(idx, (i) => work.Y[i]).sort((a, b) => a - b);
  const med = vals[vals.length >> 1] || 1;
  const out = new Float32Array(work.Y.length);
  for (let i = 0; i < out.length; i++) out[i] = (100 * (work.Y[i] - med)) / med;
  return out;
}

function contrastOf(work: WorkRaster, fit: BackgroundFit): Float32Array {
  const C = new Float32Array(work.Y.length);
  for (let i = 0; i < C.length; i++) {
    const b = fit.B[i];
    C[i] = work.wt[i] > 0 && b > 0 ? (100 * (work.Y[i] - b)) / b : 0;
  }
  return C;
}

/** Contrast with each tile's fitted level offset taken out, so tiles do not show up as blobs. */
function withoutTileSteps(C: Float32Array, work: WorkRaster, fit: BackgroundFit, grid: [number, number]): Float32Array {
  const out = new Float32Array(C.length);
  const [cols, rows] = grid;
  const off = fit.tileOffsetsPct!;
  for (let y = 0; y < work.h; y++) {
    const ty = Math.min(rows - 1, Math.floor(((y + 0.5) / work.h) * rows));
    for (let x = 0; x < work.w; x++) {
      const tx = Math.min(cols - 1, Math.floor(((x + 0.5) / work.w) * cols));
      const i = y * work.w + x;
      const o = off[ty * cols + tx];
      out[i] = work.wt[i] > 0 ? (100 * (1 + C[i] / 100)) / (1 + o / 100) - 100 : 0;
    }
  }
  return out;
}

/**
 * Per-pixel noise of a map, %: robust sigma of each pixel minus the mean of its 4 neighbours, divided
 * by sqrt(1 + 1/4) (the variance of that difference for white noise). Smooth structure cancels.
 */
export function neighbourNoise(C: Float32Array, work: WorkRaster): number {
  const { w, h, wt } = work;
  const full = (i: number): boolean => wt[i] >= 0.999;
  const idx = sampleIndices(
    w * h,
    (i) => {
      const x = i % w;
      const y = (i - x) / w;
      return x > 0 && y > 0 && x < w - 1 && y < h - 1 && full(i) && full(i - 1) && full(i + 1) && full(i - w) && full(i + w);
    },
    200_000,
  );
  const d = new Float64Array(idx.length);
  for (let k = 0; k < idx.length; k++) {
    const i = idx[k];
    d[k] = C[i] - 0.25 * (C[i - 1] + C[i + 1] + C[i - w] + C[i + w]);
  }
  const s = robustSigma(d);
  return Number.isFinite(s) ? s / Math.sqrt(1.25) : 0;
}

/**
 * Found features that matter to the fit (SEMU at least half the reporting floor), each dilated by
 * (maskRadiusFactor - 1) x its half-size (radius of the equal-area disc for round ones, half-width for
 * elongated ones): at 2.5 x the half-peak radius a Gaussian is down to 2 % of its peak. Radii shrink
 * together when the mask would cover more than maxMaskedFraction of the panel.
 */
function featureMask(ctx: Ctx, opts: MuraOptions): Uint8Array {
  const { w, h } = ctx;
  const mask = new Uint8Array(w * h);
  // On lit fields a finding against the panel's edge is left in the next fit: it is as likely the
  // whole-panel surface missing the edge (where it has the least support) as a feature, and masking it
  // would keep the surface from ever reaching there. A true feature there is still found, partly
  // absorbed. On black fields glow is at the edges by nature and is masked like any feature.
  // A band or line across the panel touches two edges by nature and is masked like any feature.
  const half = (f: Found): number =>
    (f.lengthMm < 2 * f.widthMm ? Math.sqrt(f.areaMm2 / Math.PI) : f.widthMm / 2) / ctx.mmPerPx;
  const spans = (f: Found): boolean =>
    (f.bbox[2] - f.bbox[0]) >= opts.bandMinSpan * w || (f.bbox[3] - f.bbox[1]) >= opts.bandMinSpan * h;
  // (a band running along the panel's edge, touching it along its length, is the surface missing that edge)
  const alongEdge = (f: Found): boolean =>
    f.axis === 'vertical' ? f.touch.left + f.touch.right > 0 : f.axis === 'horizontal' ? f.touch.top + f.touch.bottom > 0 : false;
  // A round feature whose top lies well inside, falling towards the edge it touches, is a feature that
  // reaches the edge (a cloud near it), not the surface missing the edge: masked like any other.
  const inward = (f: Found): boolean => {
    const r = half(f);
    const d = Math.min(f.px, f.py, w - 1 - f.px, h - 1 - f.py);
    if (d < Math.max(0.5 * r, 10 / ctx.mmPerPx)) return false;
    const e = f.edgeContrast;
    for (const k of ['top', 'bottom', 'left', 'right'] as const) {
      if (f.touch[k] > 0 && f.sign * e[k] > 0.7 * f.sign * f.peakContrastPct) return false;
    }
    return true;
  };
  const atEdge = (f: Found): boolean =>
    !ctx.black && (spans(f) ? alongEdge(f) : f.touch.left + f.touch.right + f.touch.top + f.touch.bottom > 0 && !inward(f));
  const strong = ctx.found.filter((f) => semu(f.contrastPct, f.areaMm2, opts.semuConstants) >= 0.5 * opts.semuFloor && !atEdge(f));
  if (strong.length === 0) return mask;
  let valid = 0;
  for (let i = 0; i < w * h; i++) if (ctx.wt[i] > 0) valid++;
  // The tails: out to where the lightly smoothed contrast falls to a tenth of the feature's peak, up to
  // 4 x its half-size. A feature found against a surface that partly absorbed it (the first, low-order
  // round) is found smaller than it is; its tails show how far it really reaches, and a mask that stops
  // short leaves them to pull the next surface up under it.
  const br = Math.max(1, Math.round(2 / ctx.mmPerPx));
  const smooth = boxSmoothed(ctx, br);
  const smoothNoise = (ctx.rho * ctx.noisePct) / (2 * br + 1);
  const tails = new Uint8Array(w * h);
  const stamp = new Int32Array(w * h);
  strong.forEach((f, k) => tailInto(tails, ctx, smooth, smoothNoise, f, 4 * half(f), stamp, k + 1));
  // The margin past the half-peak region is capped at a tenth of the panel's short side (the tails
  // above carry a large feature's real reach): a margin of 1.5 x the half-size of a 150 mm cloud masks
  // most of the panel, and a surface with no support across the middle drifts there and makes a faint
  // finding stronger with each round (seen on clean fields).
  const padCap = opts.background.maskPadMaxFraction * Math.min(w, h);
  let scale = 1;
  for (let attempt = 0; attempt < 8; attempt++) {
    mask.fill(0);
    for (const f of strong) dilateInto(mask, ctx, f, scale * Math.min((opts.background.maskRadiusFactor - 1) * half(f), padCap));
    if (scale === 1) for (let i = 0; i < mask.length; i++) mask[i] |= tails[i];
    if (countOf(mask) <= opts.background.maxMaskedFraction * valid) break;
    scale *= 0.6;
  }
  return mask;
}

/** Contrast averaged over a (2r+1)^2 box, weighted by the data (running sums). */
function boxSmoothed(ctx: Ctx, r: number): Float32Array {
  const { w, h, C, wt } = ctx;
  const num = new Float64Array(w * h);
  const den = new Float64Array(w * h);
  for (let y = 0; y < h; y++) {
    let a = 0;
    let b = 0;
    const row = y * w;
    for (let x = -r; x < w + r; x++) {
      const xa = x + r;
      if (xa < w) {
        a += C[row + xa] * wt[row + xa];
        b += wt[row + xa];
      }
      const xr = x - r - 1;
      if (xr >= 0) {
        a -= C[row + xr] * wt[row + xr];
        b -= wt[row + xr];
      }
      if (x >= 0 && x < w) {
        num[row + x] = a;
        den[row + x] = b;
      }
    }
  }
  const out = new Float32Array(w * h);
  for (let x = 0; x < w; x++) {
    let a = 0;
    let b = 0;
    for (let y = -r; y < h + r; y++) {
      const ya = y + r;
      if (ya < h) {
        a += num[ya * w + x];
        b += den[ya * w + x];
      }
      const yr = y - r - 1;
      if (yr >= 0) {
        a -= num[yr * w + x];
        b -= den[yr * w + x];
      }
      if (y >= 0 && y < h) out[y * w + x] = b > 1e-6 ? a / b : 0;
    }
  }
  return out;
}

/** Grow a feature's region out to where the smoothed contrast falls to 10 % of its peak (within r px). */
function tailInto(out: Uint8Array, ctx: Ctx, smooth: Float32Array, smoothNoise: number, f: Found, r: number, stamp: Int32Array, id: number): void {
  const { w, h } = ctx;
  // A tenth of the peak, but never inside what the smoothed map cannot tell from zero: its noise and the
  // background model's own error. Without that floor a faint finding's "tails" follow the model's misfit
  // of the same sign across much of the panel, and the next surface, freed there, moves away and makes
  // the finding stronger, round after round (seen on clean fields: 0.45 % -> 0.9 % over 23 000 mm²).
  const floor = Math.max(2 * ctx.fitErrorPct, 3 * smoothNoise);
  const tenth = 0.1 * Math.abs(f.peakContrastPct) * (1 + f.pedestalPct / 100);
  const level = f.pedestalPct + f.sign * Math.max(tenth, floor);
  const x0 = Math.max(0, Math.floor(f.bbox[0] - r));
  const y0 = Math.max(0, Math.floor(f.bbox[1] - r));
  const x1 = Math.min(w - 1, Math.ceil(f.bbox[2] + r));
  const y1 = Math.min(h - 1, Math.ceil(f.bbox[3] + r));
  const stack: number[] = [];
  for (let k = 0; k < f.pixels.length; k++) {
    const i = f.pixels[k];
    if (stamp[i] === id) continue;
    stamp[i] = id;
    stack.push(i);
  }
  while (stack.length) {
    const i = stack.pop() as number;
    out[i] = 1;
    const x = i % w;
    const y = (i - x) / w;
    for (const [dx, dy] of [[1, 0], [-1, 0], [0, 1], [0, -1]] as const) {
      const xx = x + dx;
      const yy = y + dy;
      if (xx < x0 || xx > x1 || yy < y0 || yy > y1) continue;
      const j = yy * w + xx;
      if (stamp[j] === id || ctx.wt[j] <= 0) continue;
      if (f.sign * (smooth[j] - level) < 0) continue;
      stamp[j] = id;
      stack.push(j);
    }
  }
}

function dilateInto(mask: Uint8Array, ctx: Ctx, f: Found, radius: number): void {
  const { w, h } = ctx;
  const r = Math.max(1, Math.ceil(radius));
  const x0 = Math.max(0, f.bbox[0] - r);
  const y0 = Math.max(0, f.bbox[1] - r);
  const x1 = Math.min(w, f.bbox[2] + r);
  const y1 = Math.min(h, f.bbox[3] + r);
  const cw = x1 - x0;
  const chh = y1 - y0;
  const d = new Float32Array(cw * chh).fill(1e9);
  for (let k = 0; k < f.pixels.length; k++) {
    const i = f.pixels[k];
    const x = i % w;
    const y = (i - x) / w;
    d[(y - y0) * cw + (x - x0)] = 0;
  }
  chamfer(d, cw, chh);
  for (let y = 0; y < chh; y++) {
    for (let x = 0; x < cw; x++) if (d[y * cw + x] <= radius) mask[(y + y0) * w + x + x0] = 1;
  }
}

function countOf(m: Uint8Array): number {
  let n = 0;
  for (let i = 0; i < m.length; i++) n += m[i];
  return n;
}

function sameMask(a: Uint8Array, b: Uint8Array): boolean {
  let diff = 0;
  let n = 0;
  for (let i = 0; i < a.length; i++) {
    if (a[i] !== b[i]) diff++;
    n += a[i] | b[i];
  }
  return diff <= 0.02 * Math.max(n, 1);
}

function findingOf(ctx: Ctx, f: Found, opts: MuraOptions): Finding {
  const k = classify(ctx, f);
  return {
    kind: k.kind,
    polarity: f.sign > 0 ? 'bright' : 'dark',
    cx: f.cx,
    cy: f.cy,
    bbox: f.bbox,
    areaMm2: f.areaMm2,
    contrastPct: f.contrastPct,
    peakContrastPct: f.peakContrastPct,
    semu: semu(f.contrastPct, f.areaMm2, opts.semuConstants),
    detail: {
      ...k.detail,
      significanceSigma: round(Math.min(f.zNoise, 1e6), 1),
      ...(f.pedestalPct !== 0 ? { surroundPct: round(f.pedestalPct, 3) } : {}),
    },
    members: [f],
  };
}

function toBlob(f: Finding, id: number, map: PanelMap, factor: number): Blob {
  const u = Math.min(1, ((f.cx + 0.5) * factor) / map.width);
  const v = Math.min(1, ((f.cy + 0.5) * factor) / map.height);
  const bx = (x: number): number => Math.min(1, Math.max(0, (x * factor) / map.width));
  const by = (y: number): number => Math.min(1, Math.max(0, (y * factor) / map.height));
  return {
    id,
    kind: f.kind,
    polarity: f.polarity,
    u: round(u, 4),
    v: round(v, 4),
    xMm: round(u * map.widthMm, 2),
    yMm: round(v * map.heightMm, 2),
    bbox: [round(bx(f.bbox[0]), 4), round(by(f.bbox[1]), 4), round(bx(f.bbox[2]), 4), round(by(f.bbox[3]), 4)],
    areaMm2: round(f.areaMm2, 2),
    contrastPct: round(f.contrastPct, 4),
    peakContrastPct: round(f.peakContrastPct, 4),
    semu: round(f.semu, 3),
    detail: f.detail,
  };
}
