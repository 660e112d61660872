// Full-field mura analysis of a rectified panel map.
//
//   luminance -> working raster -> robust polynomial background B (order 2 first, then the full order
//   with the features found so far masked) -> contrast C = 100 (Y - B) / B -> bands across the panel
//   from row/column medians, features of every size on a pyramid of C (detect.ts) -> half-peak regions
//   -> kind, contrast, area, SEMU -> hot-spot arrays, tile seams -> ranked list.

import { EvenfieldError } from '../errors.js';
import type { Blob, LeftOutFinding, MuraResult, PanelMap, Plane } from '../types.js';
import { bumpDistance2, fitBackground, FLAT_ROLL_OFF_POWERS, radialCentreError, SHARP_ROLL_OFF_POWERS, type BackgroundFit, type Bump, type WorkRaster } from './background.js';
import { addQuadratic, buildLevels, codingFloorPct, detectFeatures, noiseCorrelation, quadTerms, solve6 } from './detect.js';
import { classify, round } from './classify.js';
import type { Edge } from './classify.js';
import { panelEdges, register, type Ctx, type Found } from './context.js';
import { groupHotspots, type Finding } from './hotspots.js';
import { resolveMuraOptions, type LensField, type MuraOptions, type MuraOptionsInput } from './options.js';
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
  /** share of the panel (%) left out of the background fit around the features found */
  coveredPct: number;
  /** cautions the photo's own result should carry as warnings (see MuraOptions.coverageCautionPct) */
  cautions: string[];
  /** smallest feature diameter (mm) the analysed raster resolves: two of its pixels across */
  resolvedFromMm: number;
}

/** Diameters (mm) at which the smallest resolvable contrast is reported. */
export const RESOLVABLE_DIAMETERS_MM = [3, 10, 30, 100];

export function analyseMura(map: PanelMap, input: MuraOptionsInput): MuraAnalysis {
  const opts = resolveMuraOptions(input);
  const black = opts.pattern === 'black';
  const raw = workRaster(map, opts.maxWorkPixels);
  const factor = Math.round((raw.mmPerPx * map.pxPerMm) * 1e6) / 1e6;
  const edges = panelEdges(raw.wt, raw.w, raw.h);
  const N = raw.w * raw.h;

  const noise0 = neighbourNoise(relativeY(raw), raw);
  // the lens falloff left in the photo, estimated and divided out
  const lensFalloff = opts.lens ? withoutLensFalloff(raw, opts.lens, opts, noise0) : null;
  const unrolled = lensFalloff ? lensFalloff.work : raw;
  let r = runRounds(unrolled, opts, edges, noise0);
  // a plateau falling steeply into the corners: the rounds run again with surfaces that carry it
  const steep = black || opts.background.steepRollOffMaxRatio <= 0 ? null : steepRollOff(unrolled, r.mask, opts, noise0);
  const work: WorkRaster = steep ? { ...unrolled, rollOff: { ...steep.centre, powers: FLAT_ROLL_OFF_POWERS } } : unrolled;
  if (steep) r = runRounds(work, opts, edges, noise0);
  const mask = r.mask;
  let { fit, ctx, C, noisePct, rho } = r;
  let jointBumps = 0;
  for (let pass = 0; pass < JOINT_PASSES; pass++) {
    const joint = jointCloudFit(ctx, work, fit, opts);
    if (!joint) break;
    ctx = joint.ctx;
    fit = joint.fit;
    C = joint.C;
    noisePct = ctx.noisePct;
    rho = ctx.rho;
    jointBumps = joint.fit.bumps.length;
  }
  // clouds the joint fit carried are measured against it already
  const remeasured = jointBumps > 0 ? 0 : remeasureLargeClouds(ctx, work, fit, mask, opts);
  const atEdge = remeasureEdgeFeatures(ctx, work, fit, opts);
  const droppedClouds = dropRollOffClouds(ctx, work, fit, opts);
  // after the roll-off test, which masks the other findings in its fits
  const unconfirmed = black ? confirmOnBlack(ctx, work, fit, mask, opts) : 0;
  const rollOff = droppedClouds.length;

  // findings: single features, hot-spot arrays, tile seams and steps
  const singles: Finding[] = ctx.found.map((f) => findingOf(ctx!, f, opts));
  if (black) foldGlowEnds(singles);
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
    // ...and not below what the 8-bit coding lets a finding of that size show (at the panel's centre)
    const coding = opts.codeStepPct !== null ? codingFloorPct(opts, d, opts.codeStepPct) : 0;
    resolvable[String(d)] = round(Math.max(opts.thresholdSigma * noiseOfMean, opts.fitSigma * fit.fitErrorPct, coding), 4);
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
  const cautions: string[] = [];
  // (about the figures of what is reported: a photo with nothing to report gets no caution)
  if (opts.coverageCautionPct > 0 && maskedPct >= opts.coverageCautionPct && blobs.length > 0) {
    // the share itself is in the background model's line: without it, photos of one panel share the text
    // and the report lists it once
    cautions.push(
      `${opts.coverageCautionPct} % or more of the panel lies under or around mura features and was left out of the background fit: ` +
        "the largest features' contrast and area are less certain (the share is on the mura page)",
    );
  }
  const backgroundModel =
    `polynomial surface of order ${fit.order} (Legendre terms)` +
    (steep
      ? ` joined by a fall as the 6th power of the distance from a centre at ${round((100 * (steep.centre.x + 0.5)) / work.w, 1)} % of the width and ${round((100 * (steep.centre.y + 0.5)) / work.h, 1)} % of the height` +
        ` (the panel's light holds up over the middle and falls steeply into the corners, more steeply than the polynomial can follow: model error over the panel outside the features ${round(steep.errPolynomial, 3)} % without this term, ${round(steep.errRollOff, 3)} % with it)`
      : '') +
    ` fitted robustly on ${round(fit.cellPx * work.mmPerPx, 2)} mm cells; ` +
    `${round(maskedPct, 1)} % of the panel masked as features; model error ${round(fit.fitErrorPct, 3)} %` +
    (opts.tileGrid ? `; one level offset per tile (${opts.tileGrid[0]} x ${opts.tileGrid[1]})` : '') +
    (jointBumps
      ? `; fitted together with a Gaussian bump for each of ${jointBumps} clouds, which carries its flanks (the map shows contrast against the surface alone)`
      : '') +
    (remeasured
      ? `; ${remeasured} large cloud${remeasured > 1 ? 's' : ''} measured against a surface fitted together with a Gaussian bump of ${remeasured > 1 ? 'their' : 'its'} size (the map shows the common surface)`
      : '') +
    (atEdge
      ? `; ${atEdge} feature${atEdge > 1 ? 's' : ''} at the panel's edge measured against a quadratic fitted over a ring around ${atEdge > 1 ? 'them' : 'it'} (the whole-panel surface bends towards a feature there)`
      : '') +
    (rollOff
      ? `; ${rollOff} faint cloud${rollOff > 1 ? 's' : ''} on the surface's peak or dip left out: a radial roll-off about ${rollOff > 1 ? 'them' : 'it'} explained ${rollOff > 1 ? 'them' : 'it'} (a profile sharper or flatter than the polynomial can follow)`
      : '') +
    (unconfirmed
      ? `; ${unconfirmed} finding${unconfirmed > 1 ? 's' : ''} left out as not found against a surface of order ${opts.background.blackCheckOrder} (the panel's own drop-off, which the stiffer surface cannot follow)`
      : '') +
    (lensFalloff
      ? `; the lens falloff left in the photo estimated from the field (the cos⁴ law of a lens seeing ${round((2 * Math.atan(lensFalloff.tan) * 180) / Math.PI, 0)}° across the image diagonal, to the power ${round(lensFalloff.power, 2)}: ${round(lensFalloff.rangePct[0], 1)} to ${round(lensFalloff.rangePct[1], 1)} % of the level at the image centre over the panel) and divided out first`
      : '');

  const out = onPanelOnly(C, work.wt);
  const bg = onPanelOnly(fit.B, work.wt);
  const leftOut: LeftOutFinding[] = droppedClouds.map((d, k) => ({
    ...toBlob(findingOf(ctx!, d.f, opts), k + 1, map, factor),
    reason: 'roll-off',
    modelErrorRollOffPct: round(d.errRadial, 4),
    modelErrorCloudPct: round(d.errCloud, 4),
  }));
  return {
    blobs,
    leftOut,
    steepRollOff: steep
      ? {
          centreU: round((steep.centre.x + 0.5) / work.w, 4),
          centreV: round((steep.centre.y + 0.5) / work.h, 4),
          modelErrorPolynomialPct: round(steep.errPolynomial, 4),
          modelErrorRollOffPct: round(steep.errRollOff, 4),
        }
      : null,
    maxSemu: blobs.length ? blobs[0].semu : 0,
    noiseFloorPct: round(noisePct, 5),
    resolvableContrastPct: resolvable,
    backgroundModel,
    contrast: { width: work.w, height: work.h, data: out },
    background: { width: work.w, height: work.h, data: bg },
    workScale: factor,
    // two pixels of the analysed raster across a feature, as the sampling theorem asks: anything smaller
    // cannot be told from the pixel grid (the map's default 2 px/mm serves 1 mm features)
    resolvedFromMm: round(2 * work.mmPerPx, 2),
    notes,
    coveredPct: round(maskedPct, 1),
    cautions,
  };
}

/** The fit -> detect -> mask -> refit rounds on a raster: the last round's surface, findings, contrast
 *  map, mask and noise figures. */
function runRounds(
  work: WorkRaster,
  opts: MuraOptions,
  edges: ReturnType<typeof panelEdges>,
  noise0: number,
): { fit: BackgroundFit; ctx: Ctx; C: Float32Array; mask: Uint8Array | null; noisePct: number; rho: number } {
  const black = opts.pattern === 'black';
  const N = work.w * work.h;
  let mask: Uint8Array | null = null;
  let rho = 1;
  let noisePct = noise0;
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
    if (mask) orInto(next, mask);
    if (!first && (mask ? sameMask(mask, next) : countOf(next) === 0)) break;
    mask = next;
  }
  if (!fit || !ctx) throw new EvenfieldError('internal', 'mura analysis ran no round');
  return { fit, ctx, C, mask, noisePct, rho };
}

/** Widths of the falloff profile tried when the photo does not give its focal length (tangent of the
 *  field angle at the image corner: 0.3 for a 72 mm lens, 1.2 for an 18 mm one, 35 mm-equivalent). */
const LENS_TANS = [0.3, 0.45, 0.6, 0.75, 0.9, 1.05, 1.2];

/** Powers of the cos⁴ law a falloff may show (withoutLensFalloff): 0 for a camera that corrected all of
 *  it, about 1 for the law alone, up to 3 for a fast lens wide open, whose barrel cuts the corner
 *  beams too (common practice; from memory). A fit outside this range has taken the panel's own
 *  roll-off for the lens's (the two are alike when the panel sits centred and square to the camera),
 *  and nothing is divided out. */
const LENS_POWER_RANGE: [number, number] = [0, 3];

/**
 * A field photographed without a lens falloff correction still holds the lens's falloff, radial about
 * the image centre: seen on the panel, deepest towards the corners farthest from the image centre, and
 * of a profile no low-order surface in panel coordinates follows (the cos⁴ law of a 26 mm lens is
 * 1 / (1 + x)² with x up to about 0.5 on the panel, a slowly converging series). Left to the rounds it
 * read as faint clouds and corner spots on clean generated fields, and as edge glows on black ones
 * (whose surface is of order 2). Here it is estimated from the field itself and divided out: the
 * logarithm of the level (where the falloff is a factor, so a term of its own) is fitted robustly by an
 * order-2 surface in panel coordinates plus the cos⁴ law's logarithm at each point's place in the photo,
 * with a free power (fitBackground's lens term: what the camera corrected of it, or what the lens
 * barrel adds). The profile's width comes from the photo's focal length, or without one is chosen among
 * LENS_TANS by the fit's error. The field is divided by the lens term's part only: the polynomial's part
 * stays for the rounds to fit again with the features masked.
 * Returns the divided raster and the range of the factor divided out over the panel (% of the level at
 * the image centre), or null when no panel pixel has data or no fit's power is in LENS_POWER_RANGE.
 */
function withoutLensFalloff(raw: WorkRaster, lens: LensField, opts: MuraOptions, noisePct: number): { work: WorkRaster; rangePct: [number, number]; tan: number; power: number } | null {
  const N = raw.w * raw.h;
  const idx = sampleIndices(N, (i) => raw.wt[i] > 0 && raw.Y[i] > 0, 50_000);
  if (idx.length === 0) return null;
  const vals = Array.from(idx, (i) => raw.Y[i]).sort((a, b) => a - b);
  const med = vals[vals.length >> 1];
  // 1 + ln(Y / median): the fit's residuals (in % of the surface, about 1) are then log differences, as
  // a contrast in % is for small contrasts
  const L = new Float32Array(N);
  const wt = new Float32Array(N);
  for (let i = 0; i < N; i++) {
    if (raw.wt[i] > 0 && raw.Y[i] > 0) {
      L[i] = 1 + Math.log(raw.Y[i] / med);
      wt[i] = raw.wt[i];
    }
  }
  const toImage = Float64Array.from(lens.panelMmToImage);
  // the focal length gives the profile's width; without it, the width that fits best
  const tans = lens.tan ? [lens.tan] : LENS_TANS;
  let best: BackgroundFit | null = null;
  let bestTan = 0;
  for (const tan of tans) {
    const fit = fitBackground({ ...raw, Y: L, wt, lens: { toImage, tan } }, null, { ...opts.background, order: 2 }, noisePct, opts.tileGrid, false);
    if (process.env.MURA_DBG) console.log(`lens tan ${tan.toFixed(3)} power ${fit.lensPower?.toFixed(3)} fitErr ${fit.fitErrorPct.toFixed(4)}`);
    const power = fit.lensPower!;
    if (!(power >= LENS_POWER_RANGE[0] && power <= LENS_POWER_RANGE[1])) continue;
    if (!best || fit.fitErrorPct < best.fitErrorPct) {
      best = fit;
      bestTan = tan;
    }
  }
  if (!best) return null;
  const part = best.lensPart!;
  const Y = new Float32Array(N);
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < N; i++) {
    const g = Math.exp(part[i]);
    Y[i] = raw.Y[i] / g;
    if (raw.wt[i] > 0) {
      lo = Math.min(lo, g);
      hi = Math.max(hi, g);
    }
  }
  if (process.env.MURA_DBG) console.log(`lens falloff divided out: tan ${bestTan} ${(100 * lo).toFixed(1)} .. ${(100 * hi).toFixed(1)} %`);
  return { work: { w: raw.w, h: raw.h, mmPerPx: raw.mmPerPx, Y, wt: raw.wt, lens: null }, rangePct: [100 * lo, 100 * hi], tan: bestTan, power: best.lensPower! };
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
  return { w, h, mmPerPx: f / map.pxPerMm, Y, wt, lens: null };
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
/** A finding spanning this share of the panel along an axis runs across it (featureMask). */
const ACROSS_SPAN = 0.6;

function featureMask(ctx: Ctx, opts: MuraOptions): Uint8Array {
  const { w, h } = ctx;
  const mask = new Uint8Array(w * h);
  // On lit fields a finding against the panel's edge is left in the next fit: it is as likely the
  // whole-panel surface missing the edge (where it has the least support) as a feature, and masking it
  // would keep the surface from ever reaching there. A true feature there is still found, partly
  // absorbed. On black fields glow is at the edges by nature and is masked like any feature.
  // A band or line across the panel touches two edges by nature and is masked like any feature.
  const half = (f: Found): number => halfSize(f, ctx.mmPerPx);
  const spans = (f: Found): boolean => (f.bbox[2] - f.bbox[0]) >= ACROSS_SPAN * w || (f.bbox[3] - f.bbox[1]) >= ACROSS_SPAN * h;
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

/**
 * Large clouds measured again against a surface fitted together with them.
 *
 * A cloud over about a third of the panel's short side can be masked out of the surface fit only out to
 * where the mask leaves the surface enough of the panel to stand on (maxMaskedFraction, maskPadMaxFraction);
 * its flanks beyond the mask pull the surface up under it (down under a dark one), and its contrast and
 * area come out low: 30-60 % faint for clouds of 165-200 mm on a 598 x 336 mm panel in the accuracy study.
 * Here each such cloud gets one more fit in which an elliptical Gaussian of its size (the width chosen
 * by least squares) carries its flanks, its half-peak core stays masked, and the other features keep
 * their masks; the cloud is then found again on that fit's contrast map and its figures replaced.
 * Only the cloud's own figures change: the contrast map and the other findings keep the common surface.
 * Clouds fainter than bumpMinContrastPct are left as they are (see the option), and so are black fields.
 */
function remeasureLargeClouds(ctx: Ctx, work: WorkRaster, fit: BackgroundFit, mask: Uint8Array | null, opts: MuraOptions): number {
  // Black fields are left as they are: their surface is of order 2 and their level a few code values, so
  // a broad centre "cloud" there is more often the surface missing the roll-off (seen in the lot study:
  // a false 2.5 % cloud on a good panel's black field made 3.3 % by a bump)
  if (ctx.black) return 0;
  const shortMm = Math.min(work.w, work.h) * ctx.mmPerPx;
  const large = (f: Found): boolean =>
    f.source === 'blob' &&
    f.lengthMm < 2 * f.widthMm &&
    2 * Math.sqrt(f.areaMm2 / Math.PI) >= opts.background.bumpMinFraction * shortMm &&
    Math.abs(f.contrastPct) >= opts.background.bumpMinContrastPct;
  const todo = ctx.found.map((f, index) => ({ f, index })).filter(({ f }) => large(f));
  if (todo.length === 0) return 0;
  let count = 0;
  // A cloud a third of the panel across needs no fine pixels: the fits and searches run on the working
  // raster box-averaged to at most REMEASURE_PIXELS, and the region found is carried back.
  const { k, raster: coarse, mask: cMask, edges } = coarseOf(work, mask);
  const level = k === 1 ? fit.B : coarsenedPlane(fit.B, work.w, work.h, k);
  const N = coarse.w * coarse.h;
  const maxSigma = opts.maxFeatureMm / (2.3548 * coarse.mmPerPx);
  for (const { f: f0, index } of todo) {
    // the cloud in coarse pixels (pixel centres: coarse c covers fine k c .. k c + k - 1)
    let cx = (f0.px + 0.5) / k - 0.5;
    let cy = (f0.py + 0.5) / k - 0.5;
    let f = f0;
    let got: Found | null = null;
    let cPixels: Int32Array = coarsePixels(f0.pixels, work.w, coarse.w, k);
    for (let pass = 0; pass < PASSES; pass++) {
      const bump = bumpOf(f, cx, cy, coarse.mmPerPx);
      const m = new Uint8Array(N);
      if (cMask) for (let i = 0; i < N; i++) if (cMask[i] && !withinBump(bump, i % coarse.w, Math.floor(i / coarse.w))) m[i] = 1;
      for (let j = 0; j < cPixels.length; j++) m[cPixels[j]] = 1;
      const fit2 = fitBackground(coarse, m, opts.background, (ctx.rho * ctx.noisePct) / k, opts.tileGrid, ctx.black, {
        list: [bump],
        level,
        maxSigma,
      });
      const best = findAgain(ctx, coarse, fit2, edges, f, cx, cy);
      if (process.env.MURA_DBG) {
        console.log(`  remeasure x${k} (${(cx * coarse.mmPerPx).toFixed(0)},${(cy * coarse.mmPerPx).toFixed(0)}) bump s ${(fit2.bumps[0].sLong * coarse.mmPerPx).toFixed(0)} amp ${(100 * fit2.bumps[0].amplitude).toFixed(2)} % -> ${best ? `A ${best.areaMm2.toFixed(0)} C ${best.contrastPct.toFixed(3)}` : 'not found'}`);
      }
      if (!best) break;
      got = best;
      f = best;
      cx = best.px;
      cy = best.py;
      cPixels = best.pixels;
    }
    if (got) {
      ctx.found[index] = k === 1 ? got : refined(got, k, work.w, work.h, coarse.w);
      count++;
    }
  }
  return count;
}

/**
 * Round features at the panel's edge measured again against a local surface.
 *
 * The whole-panel polynomial has the least support at the panel's edges, where its higher terms are
 * freest: a cloud reaching an edge pulls it up (down for a dark one) whether the cloud is masked (the
 * surface then extrapolates into the masked part of the edge, following the flanks left outside the
 * mask) or not (left in the fit, as featureMask leaves edge findings), and 20-55 % of its contrast went
 * into the surface (study scenes with the features moved against the edges, `mura-accuracy.js --edges`).
 * Each round feature (spot or cloud) of SEMU background.edgeRingMinSemu and more whose peak lies within 1.5
 * of its radii of an edge is measured again against a quadratic of the luminance fitted over a ring
 * background.edgeRingInner to background.edgeRingOuter of its radii around it, with the other features
 * of the reporting floor (semuFloor) and more kept out of the ring to twice their half-size: along an edge the ring holds the panel on both sides
 * of the feature, so the level under it is interpolated along the edge rather than extrapolated across
 * it. The new figures replace the old only when the quadratic fits the ring (no sector of it off by
 * more than background.edgeRingMaxLack of the feature's contrast), the region found again is the same
 * feature (it holds the old peak or centroid and no other feature's peak) and it shows more of the
 * feature than the whole-panel surface did, which is what the absorption predicts (a smaller figure is
 * more likely the quadratic missing the roll-off across a wide ring). Lit fields only: on black ones
 * the edges hold the glow. Returns how many were replaced.
 */
function remeasureEdgeFeatures(ctx: Ctx, work: WorkRaster, fit: BackgroundFit, opts: MuraOptions): number {
  const o = opts.background;
  if (ctx.black || o.edgeRingInner <= 0) return 0;
  // a cloud the joint fit carried with a bump of its own is measured against a surface that no longer
  // bends towards it (the bump takes its flanks): a ring's quadratic is no better there, and where the
  // panel falls steeply into the corners it is worse (a 7 % cloud at the top edge read 12 %)
  const carried = (f: Found): boolean => fit.bumps.some((bp) => Math.sign(bp.amplitude) === f.sign && bumpDistance2(bp, f.px, f.py) <= 1);
  const todo = ctx.found.map((f, index) => ({ f, index })).filter(({ f }) => nearEdge(ctx, f, o.edgeRingMinSemu, opts) && !carried(f));
  if (todo.length === 0) return 0;
  const { k, raster: coarse, edges } = coarseOf(work, null);
  const level = k === 1 ? fit.B : coarsenedPlane(fit.B, work.w, work.h, k);
  // a working-raster point (px) as a coarse pixel index
  const at = (x: number, y: number): number =>
    Math.min(coarse.h - 1, Math.max(0, Math.round((y + 0.5) / k - 0.5))) * coarse.w + Math.min(coarse.w - 1, Math.max(0, Math.round((x + 0.5) / k - 0.5)));
  const A = new Float64Array(36);
  const b = new Float64Array(6);
  const t = new Float64Array(6);
  let count = 0;
  for (const { f, index } of todo) {
    const others = new Uint8Array(work.w * work.h);
    // (findings under the reporting floor are mostly the whole-panel surface's own misfit around the
    // feature: kept out, they took most of a corner's quarter ring away)
    for (const g of ctx.found) {
      if (g !== f && semu(g.contrastPct, g.areaMm2, opts.semuConstants) >= opts.semuFloor) dilateInto(others, ctx, g, 2 * halfSize(g, ctx.mmPerPx));
    }
    const om = k === 1 ? others : coarsenedMask(others, work.w, work.h, k);
    const cx = (f.cx + 0.5) / k - 0.5;
    const cy = (f.cy + 0.5) / k - 0.5;
    const rho = o.edgeRingInner * (Math.sqrt(f.areaMm2 / Math.PI) / coarse.mmPerPx);
    const rOut = o.edgeRingOuter * (rho / o.edgeRingInner);
    const x0 = Math.max(0, Math.floor(cx - rOut));
    const x1 = Math.min(coarse.w - 1, Math.ceil(cx + rOut));
    const y0 = Math.max(0, Math.floor(cy - rOut));
    const y1 = Math.min(coarse.h - 1, Math.ceil(cy + rOut));
    const inRing = (x: number, y: number, i: number): boolean => {
      const d = Math.hypot(x - cx, y - cy);
      return d >= rho && d <= rOut && coarse.wt[i] > 0.5 && !om[i];
    };
    A.fill(0);
    b.fill(0);
    let n = 0;
    for (let y = y0; y <= y1; y++) {
      for (let x = x0; x <= x1; x++) {
        const i = y * coarse.w + x;
        if (!inRing(x, y, i)) continue;
        addQuadratic(A, b, t, (x - cx) / rho, (y - cy) / rho, coarse.Y[i]);
        n++;
      }
    }
    const c = n >= EDGE_RING_MIN_SAMPLES ? solve6(A, b) : null;
    if (!c) continue;
    const q = (x: number, y: number): number => {
      quadTerms(t, (x - cx) / rho, (y - cy) / rho);
      let v = 0;
      for (let j = 0; j < 6; j++) v += c[j] * t[j];
      return v;
    };
    // lack of fit: the ring's mean relative residual in 12 sectors x 2 radial halves (pixel noise averages out)
    const secSum = new Float64Array(24);
    const secN = new Float64Array(24);
    for (let y = y0; y <= y1; y++) {
      for (let x = x0; x <= x1; x++) {
        const i = y * coarse.w + x;
        if (!inRing(x, y, i)) continue;
        const qq = q(x, y);
        const sector = Math.min(11, Math.floor(((Math.atan2(y - cy, x - cx) + Math.PI) / (2 * Math.PI)) * 12));
        const s = 2 * sector + (Math.hypot(x - cx, y - cy) > 0.5 * (rho + rOut) ? 1 : 0);
        secSum[s] += (100 * (coarse.Y[i] - qq)) / qq;
        secN[s]++;
      }
    }
    let lack = 0;
    for (let j = 0; j < 24; j++) if (secN[j] >= 20) lack = Math.max(lack, Math.abs(secSum[j] / secN[j]));
    // a ring mostly off the panel or under other features leaves the quadratic free to run away under
    // the feature (seen: a ring of 327 coarse px a corner's quarter away put the level under a cloud
    // near zero, and its contrast at 2500 %): the local level must stay near the whole-panel surface's
    const under = level[at(f.cx, f.cy)];
    if (!(Math.abs(q(cx, cy) / under - 1) <= EDGE_RING_MAX_SHIFT)) {
      if (process.env.MURA_DBG) console.log(`  edge ring x${k} (${(cx * coarse.mmPerPx).toFixed(0)},${(cy * coarse.mmPerPx).toFixed(0)}): level under it ${q(cx, cy).toPrecision(3)} against ${under.toPrecision(3)}: left as it was`);
      continue;
    }
    const B2 = Float32Array.from(level);
    for (let y = y0; y <= y1; y++) for (let x = x0; x <= x1; x++) if (Math.hypot(x - cx, y - cy) <= rOut) B2[y * coarse.w + x] = q(x, y);
    const best = findAgain(ctx, coarse, { ...fit, B: B2 }, edges, f, (f.px + 0.5) / k - 0.5, (f.py + 0.5) / k - 0.5, 1, [cx, cy]);
    if (process.env.MURA_DBG) {
      console.log(`  edge ring x${k} (${(cx * coarse.mmPerPx).toFixed(0)},${(cy * coarse.mmPerPx).toFixed(0)}) inner ${(rho * coarse.mmPerPx).toFixed(0)} mm, ${n} px, lack ${lack.toFixed(3)} % -> ${best ? `A ${best.areaMm2.toFixed(0)} C ${best.contrastPct.toFixed(3)}` : 'not found'} (was A ${f.areaMm2.toFixed(0)} C ${f.contrastPct.toFixed(3)})`);
    }
    if (!best || lack > o.edgeRingMaxLack * Math.abs(best.contrastPct)) continue;
    const own = new Set(best.pixels);
    if (!own.has(at(f.px, f.py)) && !own.has(at(f.cx, f.cy))) continue;
    if (ctx.found.some((g) => g !== f && own.has(at(g.px, g.py)))) continue;
    if (Math.abs(best.contrastPct) < Math.abs(f.contrastPct)) continue;
    ctx.found[index] = k === 1 ? best : refined(best, k, work.w, work.h, coarse.w);
    count++;
  }
  return count;
}

/** Fewest ring pixels (coarse raster) a local surface of remeasureEdgeFeatures is fitted on. */
const EDGE_RING_MIN_SAMPLES = 200;
/** Most the local surface of remeasureEdgeFeatures may differ from the whole-panel surface at the feature's
 *  centre, as a share of it: the whole-panel surface is off by a feature's contrast or so at an edge
 *  (20-55 % of it in the study), never by a quarter of the light. */
const EDGE_RING_MAX_SHIFT = 0.25;

/** Half a finding's size (px): its equivalent radius when round, half its width when elongated. */
function halfSize(f: Found, mmPerPx: number): number {
  return (f.lengthMm < 2 * f.widthMm ? Math.sqrt(f.areaMm2 / Math.PI) : f.widthMm / 2) / mmPerPx;
}

/** A round finding (spot or cloud) of at least minSemu whose peak lies within 1.5 of its equivalent
 *  radii of the panel's edge (remeasureEdgeFeatures). */
function nearEdge(ctx: Ctx, f: Found, minSemu: number, opts: MuraOptions): boolean {
  if (f.source !== 'blob' || f.lengthMm >= 2 * f.widthMm) return false;
  if (semu(f.contrastPct, f.areaMm2, opts.semuConstants) < minSemu) return false;
  const r = Math.sqrt(f.areaMm2 / Math.PI) / ctx.mmPerPx;
  return Math.min(f.px, f.py, ctx.w - 1 - f.px, ctx.h - 1 - f.py) < 1.5 * r;
}

/** Joint fits: the second starts from the clouds the first found again (their sizes and places against
 *  a surface that no longer bends under them). */
const JOINT_PASSES = 2;

/**
 * Several clouds on one panel: the surface fitted together with a Gaussian bump for each.
 *
 * The rounds mask every feature out to its tails, but where several clouds share a panel the masks
 * cannot all reach that far (maxMaskedFraction): the flanks left in the fit pull the surface up under
 * the clouds (down under dark ones), each is measured faint and small, and the panel's own level between
 * them reads as false clouds of the other sign. Here each round cloud of bumpMinContrastPct and more,
 * of a sign with at least background.jointMinClouds of them, gets an elliptical Gaussian of its size
 * (widths chosen by least squares, as in remeasureLargeClouds), its half-peak core stays masked, the
 * other features keep their masks, and everything is found again on the contrast against the surface
 * alone (the bumps are not part of the background). A cloud carried by a bump that is not found again
 * keeps its finding from the rounds (see below). Null when no sign has that many, and on black fields
 * (see remeasureLargeClouds).
 */
function jointCloudFit(ctx: Ctx, work: WorkRaster, fit: BackgroundFit, opts: MuraOptions): { ctx: Ctx; fit: BackgroundFit; C: Float32Array } | null {
  if (ctx.black) return null;
  const candidates = ctx.found.filter(
    (f) =>
      f.source === 'blob' &&
      f.lengthMm < 2 * f.widthMm &&
      2 * Math.sqrt(f.areaMm2 / Math.PI) >= opts.cloudMinMm &&
      Math.abs(f.contrastPct) >= opts.background.bumpMinContrastPct,
  );
  // clouds of one sign, as many as jointMinClouds: a lone cloud of the other sign beside them is as
  // likely the panel's own level between them (the rounds' surface lifted under bright clouds) as a cloud
  const n = opts.background.jointMinClouds;
  const count = (sign: number): number => candidates.filter((f) => f.sign === sign).length;
  const clouds = n === 0 ? [] : candidates.filter((f) => count(f.sign) >= n);
  if (clouds.length === 0) return null;
  const m = featureMask({ ...ctx, found: ctx.found.filter((f) => !clouds.includes(f)) }, opts);
  for (const f of clouds) for (let j = 0; j < f.pixels.length; j++) m[f.pixels[j]] = 1;
  const list = clouds.map((f) => bumpOf(f, f.px, f.py, work.mmPerPx));
  const fit2 = fitBackground(work, m, opts.background, ctx.rho * ctx.noisePct, opts.tileGrid, false, {
    list,
    level: fit.B,
    maxSigma: opts.maxFeatureMm / (2.3548 * work.mmPerPx),
  });
  const { ctx2, C2 } = searchAgainst(ctx, work, fit2, opts);
  // a cloud the fit carried that is not found again (joined to a neighbour above half their heights,
  // now that the surface no longer dips between them) keeps its finding
  for (const f of clouds) {
    const r = Math.sqrt(f.areaMm2 / Math.PI) / work.mmPerPx;
    if (!ctx2.found.some((g) => g.sign === f.sign && Math.hypot(g.px - f.px, g.py - f.py) <= 0.5 * r)) ctx2.found.push(f);
  }
  if (process.env.MURA_DBG) {
    console.log(`joint fit: ${clouds.length} bumps, amp ${fit2.bumps.map((b) => (100 * b.amplitude).toFixed(2)).join(' ')}, fitErr ${fit2.fitErrorPct.toFixed(3)}`);
    for (const f of ctx2.found) console.log(`  ${f.sign} c(${(f.cx * work.mmPerPx).toFixed(0)},${(f.cy * work.mmPerPx).toFixed(0)}) A ${f.areaMm2.toFixed(0)} C ${f.contrastPct.toFixed(3)} semu ${semu(f.contrastPct, f.areaMm2).toFixed(2)}`);
  }
  return { ctx: ctx2, fit: fit2, C: C2 };
}

/** Every feature found afresh (all levels, with the fit floor) against another surface `fit2` of the
 *  same raster: the new context and its contrast map. */
function searchAgainst(ctx: Ctx, work: WorkRaster, fit2: BackgroundFit, opts: MuraOptions): { ctx2: Ctx; C2: Float32Array } {
  const C2 = contrastOf(work, fit2);
  const Cdet = opts.tileGrid ? withoutTileSteps(C2, work, fit2, opts.tileGrid) : C2;
  const ctx2: Ctx = {
    ...ctx,
    C: Cdet,
    noisePct: Math.max(neighbourNoise(Cdet, work), 1e-4),
    rho: 1,
    fitErrorPct: fit2.fitErrorPct,
    B: fit2.B,
    label: new Int32Array(work.w * work.h),
    found: [],
  };
  const levels = buildLevels(ctx2);
  ctx2.rho = noiseCorrelation(levels);
  detectFeatures(ctx2, levels, true);
  return { ctx2, C2 };
}

/**
 * Black fields: keep only the findings that are found again, over some of their pixels and with their
 * sign, against a surface of order background.blackCheckOrder fitted with the same mask (see that
 * option). Their figures stay those measured against the stiffer surface. Returns how many were dropped.
 */
function confirmOnBlack(ctx: Ctx, work: WorkRaster, fit: BackgroundFit, mask: Uint8Array | null, opts: MuraOptions): number {
  const order = opts.background.blackCheckOrder;
  if (order === 0 || order <= fit.order || ctx.found.length === 0) return 0;
  const fit2 = fitBackground(work, mask, { ...opts.background, order }, ctx.rho * ctx.noisePct, opts.tileGrid, true);
  const { ctx2 } = searchAgainst(ctx, work, fit2, opts);
  const again = (f: Found): boolean => {
    for (let j = 0; j < f.pixels.length; j++) {
      const l = ctx2.label[f.pixels[j]];
      if (l && ctx2.found[l - 1].sign === f.sign) return true;
    }
    return false;
  };
  const kept = ctx.found.filter(again);
  if (process.env.MURA_DBG) {
    console.log(`black check: order ${order}, model error ${fit2.fitErrorPct.toFixed(3)} %, found again ${kept.length} of ${ctx.found.length}`);
    for (const f of ctx.found) if (!kept.includes(f)) console.log(`  dropped ${f.sign} c(${(f.cx * work.mmPerPx).toFixed(0)},${(f.cy * work.mmPerPx).toFixed(0)}) A ${f.areaMm2.toFixed(0)} C ${f.contrastPct.toFixed(3)}`);
  }
  const dropped = ctx.found.length - kept.length;
  if (dropped === 0) return 0;
  ctx.found = [];
  ctx.label.fill(0);
  for (const f of kept) register(ctx, f);
  return dropped;
}

/**
 * Lit fields: whether the panel's light holds up over the middle and falls steeply into the corners (as
 * the 5th-6th power of the distance from a centre, as a panel or a lens left uncorrected may), more
 * steeply than an order-4 surface can follow. Such a surface passes under the plateau, leaving a faint
 * cloud of 1-2 % about the centre, and above the far corners, whose last centimetres read as dark spots
 * of 2-3 % (generated clean fields with 15-40 % corner loss); a real cloud on the plateau is measured
 * against a bump that takes the plateau's shortfall for its own (+4 % read as +16 %). Tested after the
 * rounds, with their mask: the polynomial joined by FLAT_ROLL_OFF_POWERS about the centre rollOffCentre
 * finds, against the polynomial alone, both fitted by plain least squares (clipping leaves out other
 * cells for each, so the two errors would not measure the same cells: with it, terms about a centre a
 * little off made the error larger). Taken when the term falls from the centre, its model error is at
 * most background.steepRollOffMaxRatio of the polynomial's, and at least
 * background.steepRollOffMinOuterShare of what it gains comes from the cells beyond ROLL_OFF_OUTER of
 * the half-diagonal from its centre (a large cloud's flanks beyond its mask gain it nearer the middle).
 * The term is symmetric about the centre and nearly flat within half the half-diagonal of it, so it
 * follows a fall all corners share, but neither a blemish in one corner nor a cloud in the middle.
 * Returns the centre (working px) and the two model errors, or null.
 */
function steepRollOff(work: WorkRaster, mask: Uint8Array | null, opts: MuraOptions, noisePct: number): { centre: { x: number; y: number }; errPolynomial: number; errRollOff: number } | null {
  const { k, raster, mask: cMask } = coarseOf(work, mask);
  const noise = noisePct / k;
  // cells twice the rounds' size: the fall is broad, and the search fits once per centre
  const bg = { ...opts.background, cellMm: (opts.background.cellMm ?? (Math.max(raster.w, raster.h) * raster.mmPerPx) / 80) * 2 };
  const search = radialCentreError(raster, cMask, bg, noise, opts.tileGrid, FLAT_ROLL_OFF_POWERS);
  const errPolynomial = search.polynomialError;
  const found = rollOffCentre(raster, search.at);
  const outer = search.outerShare(found.x, found.y, ROLL_OFF_OUTER);
  if (process.env.MURA_DBG) {
    console.log(`steep roll-off: centre ${(found.x / raster.w).toFixed(3)},${(found.y / raster.h).toFixed(3)}, model error ${errPolynomial.toFixed(3)} -> ${found.e.toFixed(3)} % (${(found.e / errPolynomial).toFixed(2)}), coefficient ${found.coef[0].toExponential(2)}, outer share ${outer.toFixed(2)}`);
  }
  // a fall from the centre, not a rise, that earns its keep at the corners
  if (!(found.coef[0] < 0) || !(outer >= opts.background.steepRollOffMinOuterShare)) return null;
  if (!(found.e <= opts.background.steepRollOffMaxRatio * errPolynomial)) return null;
  return { centre: { x: (found.x + 0.5) * k - 0.5, y: (found.y + 0.5) * k - 0.5 }, errPolynomial, errRollOff: found.e };
}

/**
 * The centre of a radial roll-off on a raster: where errAt (the model error with the roll-off's terms
 * about a centre) is least, searched over the middle of the panel (CENTRE_SPAN of each side about its
 * centre): along x, along y, along x again on a grid of CENTRE_STEPS, then about the best on a grid of
 * half the step. The error's basin about the true centre is narrow (about a tenth of the panel's width
 * on generated flat-topped roll-offs), so the first grids must be finer than that.
 */
function rollOffCentre(raster: WorkRaster, fitAt: (x: number, y: number) => { error: number; coef: number[] }): { x: number; y: number; e: number; coef: number[] } {
  const best = { x: (raster.w - 1) / 2, y: (raster.h - 1) / 2, e: Infinity, coef: [] as number[] };
  const sx = (CENTRE_SPAN * raster.w) / (CENTRE_STEPS - 1);
  const sy = (CENTRE_SPAN * raster.h) / (CENTRE_STEPS - 1);
  const tryAt = (x: number, y: number): void => {
    const { error: e, coef } = fitAt(x, y);
    if (e < best.e) Object.assign(best, { x, y, e, coef });
  };
  const line = (alongX: boolean): void => {
    const x0 = best.x;
    const y0 = best.y;
    for (let i = 0; i < CENTRE_STEPS; i++) {
      const t = i / (CENTRE_STEPS - 1) - 0.5;
      if (alongX) tryAt((raster.w - 1) / 2 + t * CENTRE_SPAN * raster.w, y0);
      else tryAt(x0, (raster.h - 1) / 2 + t * CENTRE_SPAN * raster.h);
    }
  };
  line(true);
  line(false);
  line(true);
  const bx = best.x;
  const by = best.y;
  for (let j = -1; j <= 1; j++) for (let i = -1; i <= 1; i++) if (i || j) tryAt(bx + (i * sx) / 2, by + (j * sy) / 2);
  return best;
}

/** A steep roll-off lives at the corners: the share of its term's gain counted from cells at least this
 *  many half-diagonals from its centre (see steepRollOff). */
const ROLL_OFF_OUTER = 0.75;

/** The roll-off's centre is searched over this share of each side about the panel's centre... */
const CENTRE_SPAN = 0.4;
/** ...on a grid of this many places along each side (a step of 1/35 of the side). */
const CENTRE_STEPS = 15;

/** A Gaussian of a feature's size centred at (x, y) (px of a raster of mmPerPx): the half-peak ellipse's
 *  semi-axes from the equivalent rectangle (a = L / sqrt 3), sigma = a / 1.1774. */
function bumpOf(f: Found, x: number, y: number, mmPerPx: number): Bump {
  const s = 1 / (Math.sqrt(3) * 1.1774 * mmPerPx);
  return { x, y, sLong: f.lengthMm * s, sShort: f.widthMm * s, angleRad: (f.angleDeg * Math.PI) / 180 };
}

/** The coarse raster, its panel edges and the round mask on it, shared by the re-measurements. */
interface Coarse {
  k: number;
  raster: WorkRaster;
  mask: Uint8Array | null;
  edges: ReturnType<typeof panelEdges>;
}

function coarseOf(work: WorkRaster, mask: Uint8Array | null): Coarse {
  const k = Math.max(1, Math.ceil(Math.sqrt((work.w * work.h) / REMEASURE_PIXELS)));
  const raster = k === 1 ? work : coarsened(work, k);
  return { k, raster, mask: mask ? (k === 1 ? mask : coarsenedMask(mask, work.w, work.h, k)) : null, edges: panelEdges(raster.wt, raster.w, raster.h) };
}

/**
 * Search the coarse raster's contrast against `fit2` for the feature `f` (same polarity, a blob, its
 * peak within `reach` of f's equivalent radius of (cx, cy), or its centroid that near `centroid` when
 * given; coarse pixels); the strongest such, or null.
 */
function findAgain(ctx: Ctx, coarse: WorkRaster, fit2: BackgroundFit, edges: ReturnType<typeof panelEdges>, f: Found, cx: number, cy: number, reach = 0.5, centroid: [number, number] | null = null): Found | null {
  const opts = ctx.opts;
  const C2 = contrastOf(coarse, fit2);
  const Cdet = opts.tileGrid ? withoutTileSteps(C2, coarse, fit2, opts.tileGrid) : C2;
  const ctx2: Ctx = {
    ...ctx,
    w: coarse.w,
    h: coarse.h,
    mmPerPx: coarse.mmPerPx,
    C: Cdet,
    wt: coarse.wt,
    noisePct: Math.max(neighbourNoise(Cdet, coarse), 1e-4),
    rho: 1,
    fitErrorPct: fit2.fitErrorPct,
    B: fit2.B,
    label: new Int32Array(coarse.w * coarse.h),
    edges,
    found: [],
  };
  const levels = buildLevels(ctx2);
  ctx2.rho = noiseCorrelation(levels);
  detectFeatures(ctx2, levels, true);
  const r = Math.sqrt(f.areaMm2 / Math.PI) / coarse.mmPerPx;
  let best: Found | null = null;
  for (const g of ctx2.found) {
    if (g.sign !== f.sign || g.source !== 'blob') continue;
    if (Math.hypot(g.px - cx, g.py - cy) > reach * r && !(centroid && Math.hypot(g.cx - centroid[0], g.cy - centroid[1]) <= reach * r)) continue;
    if (!best || Math.abs(g.contrastPct) * g.areaMm2 > Math.abs(best.contrastPct) * best.areaMm2) best = g;
  }
  return best;
}

/**
 * Clouds that a roll-off explains, left out.
 *
 * A panel's smooth variation is not always a low-order polynomial: a roll-off that falls as the 1.5th
 * power of the distance from its peak is sharper there than any surface of order 4 can follow, and the
 * surface passes under its peak: a false bright "cloud" of 1-2 % over about 100 mm there (a 20-40 %
 * corner loss; two good panels of the lot study failed on it); a flat-topped one (2.5th-3rd power)
 * leaves a faint dark one. Such a cloud sits on the surface's peak or dip and is faint next to the
 * surface's whole fall. Each cloud that does (centre within its equivalent radius of a peak or dip at
 * least EXTREMUM_MARGIN inside the panel, |mean contrast| at most background.rollOffMaxShare of the fall)
 * is explained twice, with the other features masked as in the last round and its own region not:
 * once by the polynomial joined by odd powers of the distance from its centre (RADIAL_POWERS: a roll-off
 * peaking there), once by the polynomial with a Gaussian of its size (a cloud on a smooth panel); each
 * explanation has two free parameters. The cloud is left out when the roll-off leaves less model error
 * within LOCAL_REACH radii of it (background.rollOffMaxErrorRatio); over the whole panel the errors both
 * leave elsewhere (photo coding, the lens correction) drowned the difference. Two explanations judged on
 * the same data: a test on the radial fit alone, with the cloud masked and dropped if not found again,
 * lost real clouds (19 of 102 features in the accuracy study when every cloud was tested), since radial
 * terms about a masked centre also follow a cloud's flanks.
 * Runs after the large-cloud re-measurement, so a large cloud is judged by its contrast against its bump.
 * Returns the clouds left out, with the two model errors.
 */
function dropRollOffClouds(ctx: Ctx, work: WorkRaster, fit: BackgroundFit, opts: MuraOptions): { f: Found; errRadial: number; errCloud: number }[] {
  // where the surface peaks and dips inside the panel, and how far it falls
  let hi = -Infinity;
  let lo = Infinity;
  let iHi = -1;
  let iLo = -1;
  for (let i = 0; i < fit.B.length; i++) {
    if (!(work.wt[i] > 0)) continue;
    const b = fit.B[i];
    if (b > hi) {
      hi = b;
      iHi = i;
    }
    if (b < lo) {
      lo = b;
      iLo = i;
    }
  }
  if (!(hi > 0) || iHi < 0) return [];
  const range = (hi - lo) / hi;
  const inside = (i: number): boolean => {
    const x = i % work.w;
    const y = (i - x) / work.w;
    const m = EXTREMUM_MARGIN * Math.min(work.w, work.h);
    return x >= m && y >= m && x < work.w - m && y < work.h - m;
  };
  const extrema = [iHi, iLo].filter(inside).map((i) => [i % work.w, Math.floor(i / work.w)] as const);
  const isCandidate = (f: Found): boolean => {
    if (f.source !== 'blob' || f.lengthMm >= 2 * f.widthMm) return false;
    const r = Math.sqrt(f.areaMm2 / Math.PI);
    if (2 * r < opts.cloudMinMm) return false;
    if (Math.abs(f.contrastPct) > opts.background.rollOffMaxShare * 100 * range) return false;
    return extrema.some(([x, y]) => Math.hypot(f.px - x, f.py - y) * ctx.mmPerPx <= r);
  };
  if (!ctx.found.some(isCandidate)) return [];
  const c = coarseOf(work, null);
  const { k, raster } = c;
  const level = k === 1 ? fit.B : coarsenedPlane(fit.B, work.w, work.h, k);
  const maxSigma = opts.maxFeatureMm / (2.3548 * raster.mmPerPx);
  const dropped: { f: Found; errRadial: number; errCloud: number }[] = [];
  for (const f of ctx.found) {
    if (!isCandidate(f)) continue;
    const cx = (f.px + 0.5) / k - 0.5;
    const cy = (f.py + 0.5) / k - 0.5;
    // the other features masked as in the rounds, this one not: both models must account for it
    const others = featureMask({ ...ctx, found: ctx.found.filter((g) => g !== f) }, opts);
    const m = k === 1 ? others : coarsenedMask(others, work.w, work.h, k);
    const noise = (ctx.rho * ctx.noisePct) / k;
    // (with a steep roll-off in the surface, the roll-off's power joins this one's, about the cloud)
    const radial = raster.rollOff
      ? fitBackground({ ...raster, rollOff: null }, m, opts.background, noise, opts.tileGrid, ctx.black, null, { x: cx, y: cy, powers: [...SHARP_ROLL_OFF_POWERS, ...FLAT_ROLL_OFF_POWERS] })
      : fitBackground(raster, m, opts.background, noise, opts.tileGrid, ctx.black, null, { x: cx, y: cy });
    const reach = (LOCAL_REACH * Math.sqrt(f.areaMm2 / Math.PI)) / raster.mmPerPx;
    const s = 1 / (Math.sqrt(3) * 1.1774 * raster.mmPerPx);
    const bump: Bump = { x: cx, y: cy, sLong: f.lengthMm * s, sShort: f.widthMm * s, angleRad: (f.angleDeg * Math.PI) / 180 };
    const cloud = fitBackground(raster, m, opts.background, noise, opts.tileGrid, ctx.black, { list: [bump], level, maxSigma });
    const errRadial = localError(raster, radial, level, m, cx, cy, reach);
    const errCloud = localError(raster, cloud, level, m, cx, cy, reach);
    if (process.env.MURA_DBG) {
      console.log(`  roll-off test (${(f.cx * ctx.mmPerPx).toFixed(0)},${(f.cy * ctx.mmPerPx).toFixed(0)}) C ${f.contrastPct.toFixed(3)} range ${(100 * range).toFixed(1)} %: model error near it: radial ${errRadial.toFixed(4)} cloud ${errCloud.toFixed(4)}`);
    }
    if (errRadial < opts.background.rollOffMaxErrorRatio * errCloud) dropped.push({ f, errRadial, errCloud });
  }
  ctx.found = ctx.found.filter((f) => !dropped.some((d) => d.f === f));
  return dropped;
}

/** A glow's figures are carried to its edge or corner by at most this factor (an edge glow so steep
 *  that its half-peak depth is under the strip left out is measured at most twice as strong as seen). */
const GLOW_EXTRAPOLATION_MAX = 2;

/** The roll-off test scores the two surfaces over a disc of this many times the cloud's equivalent
 *  radius about its centre, where they differ. */
const LOCAL_REACH = 3;

/**
 * A fit's model error (%) over the cells of its own size within `reach` pixels of (cx, cy): the rms of
 * the cells' relative residuals (pixels outside the mask) less the cells' own noise in quadrature.
 */
function localError(raster: WorkRaster, fit: BackgroundFit, level: Float32Array, mask: Uint8Array, cx: number, cy: number, reach: number): number {
  const { w, h } = raster;
  // the fitted surface with its bumps (B leaves them out: it is what a bump's cloud is measured against)
  const surface = (i: number, x: number, y: number): number => {
    let b = fit.B[i];
    for (const bp of fit.bumps) {
      const e = 0.5 * bumpDistance2(bp, x, y);
      if (e < 30) b += bp.amplitude * level[i] * Math.exp(-e);
    }
    return b;
  };
  const c = fit.cellPx;
  let ss = 0;
  let n = 0;
  for (let y0 = Math.max(0, Math.floor((cy - reach) / c) * c); y0 < Math.min(h, cy + reach); y0 += c) {
    for (let x0 = Math.max(0, Math.floor((cx - reach) / c) * c); x0 < Math.min(w, cx + reach); x0 += c) {
      if (Math.hypot(x0 + c / 2 - cx, y0 + c / 2 - cy) > reach) continue;
      let sy = 0;
      let sb = 0;
      let sw = 0;
      let total = 0;
      for (let y = y0; y < Math.min(h, y0 + c); y++) {
        for (let x = x0; x < Math.min(w, x0 + c); x++) {
          const i = y * w + x;
          total++;
          const q = raster.wt[i];
          if (!(q > 0) || mask[i]) continue;
          sy += q * raster.Y[i];
          sb += q * surface(i, x, y);
          sw += q;
        }
      }
      if (sw < 0.5 * total || !(sb > 0)) continue;
      const r = (100 * (sy - sb)) / sb;
      ss += r * r;
      n++;
    }
  }
  if (n === 0) return 0;
  return Math.sqrt(Math.max(0, ss / n - fit.cellNoisePct ** 2));
}

/** A peak or dip of the surface counts as inside the panel this fraction of its short side from the
 *  edges (a roll-off falling from an edge has its maximum on the edge, and no cloud-like shortfall). */
const EXTREMUM_MARGIN = 0.1;

/** Largest working raster (pixels) the large clouds are measured again on. */
const REMEASURE_PIXELS = 250_000;
/** Re-measurements per large cloud: the second starts from the size the first found (a cloud measured
 *  small gets a bump too narrow the first time). */
const PASSES = 2;

/** The working raster box-averaged by k (luminance weighted by the data, as workRaster does). */
function coarsened(work: WorkRaster, k: number): WorkRaster {
  const yw = new Float32Array(work.Y.length);
  for (let i = 0; i < yw.length; i++) yw[i] = work.wt[i] > 0 ? work.Y[i] * work.wt[i] : 0;
  const Y = coarsenedPlane(yw, work.w, work.h, k);
  const wt = coarsenedPlane(work.wt, work.w, work.h, k);
  for (let j = 0; j < Y.length; j++) Y[j] = wt[j] > 0 ? Y[j] / wt[j] : 0;
  const r = work.rollOff;
  const rollOff = r ? { x: (r.x + 0.5) / k - 0.5, y: (r.y + 0.5) / k - 0.5, powers: r.powers } : null;
  return { w: Math.ceil(work.w / k), h: Math.ceil(work.h / k), mmPerPx: work.mmPerPx * k, Y, wt, lens: work.lens ?? null, rollOff };
}

/** A plane box-averaged by k (plain mean of the pixels each coarse pixel covers). */
function coarsenedPlane(p: Float32Array, W: number, H: number, k: number): Float32Array {
  const w = Math.ceil(W / k);
  const h = Math.ceil(H / k);
  const out = new Float32Array(w * h);
  const n = new Float32Array(w * h);
  for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) {
    const j = Math.floor(y / k) * w + Math.floor(x / k);
    out[j] += p[y * W + x];
    n[j]++;
  }
  for (let j = 0; j < w * h; j++) out[j] /= n[j];
  return out;
}

/** A coarse pixel is masked when at least half of its fine pixels are. */
function coarsenedMask(m: Uint8Array, W: number, H: number, k: number): Uint8Array {
  const frac = coarsenedPlane(Float32Array.from(m), W, H, k);
  const out = new Uint8Array(frac.length);
  for (let j = 0; j < frac.length; j++) out[j] = frac[j] >= 0.5 ? 1 : 0;
  return out;
}

function coarsePixels(pixels: Int32Array, W: number, w: number, k: number): Int32Array {
  const set = new Set<number>();
  for (let i = 0; i < pixels.length; i++) {
    const x = pixels[i] % W;
    const y = (pixels[i] - x) / W;
    set.add(Math.floor(y / k) * w + Math.floor(x / k));
  }
  return Int32Array.from(set);
}

/** A region found on the raster coarsened by k, carried back to the working raster. */
function refined(g: Found, k: number, W: number, H: number, w: number): Found {
  const pixels = new Int32Array(g.pixels.length * k * k);
  let n = 0;
  for (let i = 0; i < g.pixels.length; i++) {
    const x = g.pixels[i] % w;
    const y = (g.pixels[i] - x) / w;
    for (let yy = y * k; yy < Math.min(H, (y + 1) * k); yy++) for (let xx = x * k; xx < Math.min(W, (x + 1) * k); xx++) pixels[n++] = yy * W + xx;
  }
  const at = (v: number): number => (v + 0.5) * k - 0.5;
  return {
    ...g,
    pixels: pixels.slice(0, n),
    cx: at(g.cx),
    cy: at(g.cy),
    px: at(g.px),
    py: at(g.py),
    bbox: [g.bbox[0] * k, g.bbox[1] * k, Math.min(W, g.bbox[2] * k), Math.min(H, g.bbox[3] * k)],
  };
}

/** Within 2.5 sigma of the bump (where a Gaussian is above 4 % of its peak). */
function withinBump(b: Bump, x: number, y: number): boolean {
  return bumpDistance2(b, x, y) <= 6.25;
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

/** A copy of values with NaN where the map has no data (weight 0). */
function onPanelOnly(values: Float32Array, wt: Float32Array): Float32Array {
  const out = new Float32Array(values.length);
  for (let i = 0; i < values.length; i++) out[i] = wt[i] > 0 ? values[i] : NaN;
  return out;
}

/** into |= other, element by element. */
function orInto(into: Uint8Array, other: Uint8Array): void {
  for (let i = 0; i < into.length; i++) into[i] |= other[i];
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

/**
 * Black fields: a glow fades along its edge past its half-peak region, and under a dim field's noise a
 * speck of that fading end can stand out of the map's threshold on its own and be found as a small
 * bright spot beside the glow (generated weak edge glows: specks of 4.6-4.9 %, SEMU 2.9-3.5, next to
 * glows of 23-70 % peak). A bright finding that is not a glow itself, touches the edge a glow lies on,
 * lies along that edge no further past either end of the glow's half-peak region than half that
 * region's length (where a Gaussian fade along the edge is still at 6 % of its peak) and peaks under
 * half the glow's peak, is counted with the glow (its detail fadingEndSpecks) instead of reported on its
 * own. In place.
 */
function foldGlowEnds(findings: Finding[]): void {
  const glows = findings.filter((g) => g.kind === 'edge-glow' || g.kind === 'corner-glow');
  if (glows.length === 0) return;
  const edgesOf = (g: Finding): Edge[] =>
    g.kind === 'edge-glow' ? [g.detail.edge as Edge] : (String(g.detail.corner).split('-') as Edge[]);
  const folded = new Set<Finding>();
  for (const f of findings) {
    if (f.polarity !== 'bright' || f.kind === 'edge-glow' || f.kind === 'corner-glow' || f.kind === 'hotspot-array') continue;
    const m = f.members[0];
    if (!m) continue;
    for (const g of glows) {
      if (!(f.peakContrastPct < 0.5 * g.peakContrastPct)) continue;
      const on = edgesOf(g).find((e) => m.touch[e] > 0);
      if (!on) continue;
      // along the edge: x for the top and bottom edges, y for the left and right ones
      const along = on === 'top' || on === 'bottom' ? 0 : 1;
      const g0 = g.bbox[along];
      const g1 = g.bbox[along + 2];
      const t = along === 0 ? f.cx : f.cy;
      const reach = 0.5 * (g1 - g0);
      if (t >= g0 - reach && t <= g1 + reach) {
        folded.add(f);
        g.detail.fadingEndSpecks = (Number(g.detail.fadingEndSpecks) || 0) + 1;
        break;
      }
    }
  }
  if (folded.size === 0) return;
  const kept = findings.filter((f) => !folded.has(f));
  findings.length = 0;
  findings.push(...kept);
}

function findingOf(ctx: Ctx, f: Found, opts: MuraOptions): Finding {
  const k = classify(ctx, f);
  // An edge glow peaks at the edge itself, but the map starts edgeBorderMm inside it: carried across
  // that strip along the exponential fall its half-peak depth gives (depth = decay length x ln 2; the
  // half-peak region keeps its width, so its area stands and its mean scales as its peak does)
  // A corner glow is seen from the strip's inner corner, b sqrt 2 from the panel's corner; falling as
  // exp(-d / decay) with d from the corner, it halves its seen peak at d = b sqrt 2 + decay ln 2, which
  // meets the strip's edge at its reach (from the strip) plus b along it. Its peak and mean are carried
  // the same way; its area is left as seen (the half-peak region of a corner's fall is not the seen one
  // moved, and the difference is under the strip's width along two edges).
  const b = opts.edgeBorderMm;
  let gain = 1;
  const depthMm = typeof k.detail?.depthMm === 'number' ? k.detail.depthMm : 0;
  const reachMm = typeof k.detail?.reachMm === 'number' ? k.detail.reachMm : 0;
  if (k.kind === 'edge-glow' && b > 0 && depthMm > 0) {
    gain = Math.exp((b * Math.LN2) / depthMm);
  } else if (k.kind === 'corner-glow' && b > 0 && reachMm > 0) {
    const decay = (Math.hypot(reachMm + b, b) - b * Math.SQRT2) / Math.LN2;
    if (decay > 0) gain = Math.exp((b * Math.SQRT2) / decay);
  }
  gain = Math.min(gain, GLOW_EXTRAPOLATION_MAX);
  const contrastPct = f.contrastPct * gain;
  // Any other finding whose half-peak region reaches the map's edge goes on under the strip the map
  // leaves out there: its area is carried straight across the strip to the panel's edge (a spot of
  // 28 mm 7 mm from the edge lost 31 % of its area to a strip of 5 mm; a band across the panel
  // loses the strip's width at both ends)
  const strip = k.kind === 'edge-glow' || k.kind === 'corner-glow' ? 0 : borderStripMm2(ctx, f, b);
  const areaMm2 = f.areaMm2 + strip;
  return {
    kind: k.kind,
    polarity: f.sign > 0 ? 'bright' : 'dark',
    cx: f.cx,
    cy: f.cy,
    bbox: f.bbox,
    areaMm2,
    contrastPct,
    peakContrastPct: f.peakContrastPct * gain,
    semu: semu(contrastPct, areaMm2, opts.semuConstants),
    detail: {
      ...k.detail,
      ...(gain !== 1 ? { seenPeakPct: round(f.peakContrastPct, 3), carriedToEdgeMm: round(opts.edgeBorderMm, 2) } : {}),
      ...(strip > 0 ? { borderStripMm2: round(strip, 1) } : {}),
      significanceSigma: round(Math.min(f.zNoise, 1e6), 1),
      ...(f.pedestalPct !== 0 ? { surroundPct: round(f.pedestalPct, 3) } : {}),
      ...(f.belowResolution !== null ? { belowResolution: f.belowResolution } : {}),
    },
    members: [f],
  };
}

/**
 * Area (mm²) of the strip between the analysed map's edge and the panel's edge (edgeBorderMm wide: the
 * bezel's transition, kept out of the analysis) under a region that reaches the map's edge, the region
 * carried straight across it: for each of its pixels that is the first or last with data on its row or
 * column, the gap from it to the panel's edge (at most the strip and one working pixel) times a pixel;
 * at most half the region's own area. Not across an edge that a band or line runs along (it touches the
 * edge along its length: the surface missing that edge, or the edge's own transition, as likely as a
 * feature), nor across one the region reaches less than three of the strip's widths in from (a quarter
 * or more of its depth would be carried: a speck at the edge, as likely what is left of the transition;
 * with twice the width, corner specks of 8 mm in the study's edge scenes grew past SEMU 1).
 */
function borderStripMm2(ctx: Ctx, f: Found, borderMm: number): number {
  if (!(borderMm > 0)) return 0;
  const { w, h, mmPerPx: mm, edges, wt } = ctx;
  const cap = borderMm + mm;
  const elongated = f.lengthMm >= 3 * f.widthMm;
  const a = Math.abs(f.angleDeg);
  const alongRows = elongated && (f.axis === 'horizontal' || (f.axis === null && a <= 15));
  const alongCols = elongated && (f.axis === 'vertical' || (f.axis === null && a >= 75));
  const deep = 3 * borderMm;
  const acrossX = !alongCols && (f.bbox[2] - f.bbox[0]) * mm >= deep;
  const acrossY = !alongRows && (f.bbox[3] - f.bbox[1]) * mm >= deep;
  if (!acrossX && !acrossY) return 0;
  let s = 0;
  for (let k = 0; k < f.pixels.length; k++) {
    const i = f.pixels[k];
    if (wt[i] <= 0) continue;
    const x = i % w;
    const y = (i - x) / w;
    if (acrossX && x === edges.rowFirst[y]) s += Math.min(x * mm, cap);
    if (acrossX && x === edges.rowLast[y]) s += Math.min((w - 1 - x) * mm, cap);
    if (acrossY && y === edges.colFirst[x]) s += Math.min(y * mm, cap);
    if (acrossY && y === edges.colLast[x]) s += Math.min((h - 1 - y) * mm, cap);
  }
  // at most half the area seen: a region more under the strip than seen is mostly unseen, and what is
  // seen does not tell how far it goes on
  return Math.min(s * mm, 0.5 * f.areaMm2);
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
