// State shared by the detectors of one analysis round, and the measurement of a found region.

import type { MuraOptions } from './options.js';
import { transferCodeStepPct } from '../photometry/index.js';

export interface Ctx {
  w: number;
  h: number;
  mmPerPx: number;
  /** contrast used for detection, % (0 where there is no data) */
  C: Float32Array;
  wt: Float32Array;
  /** 1-sigma contrast noise of one full working pixel, % (neighbour-difference estimate) */
  noisePct: number;
  /** how much more the map's noise survives smoothing than white noise would (spatial correlation),
   *  measured on the map's own small-scale filters; >= 1 for correlated noise */
  rho: number;
  /** background model's own error, % (does not average down) */
  fitErrorPct: number;
  /** the fitted background, linear luminance at working resolution (null in unit tests that give C only) */
  B: Float32Array | null;
  opts: MuraOptions;
  black: boolean;
  /** working-raster labels: 0 = free, k = found[k - 1] */
  label: Int32Array;
  /** where the panel's data begins and ends on each row (x) and column (y) */
  edges: PanelEdges;
  found: Found[];
}

export type Axis = 'horizontal' | 'vertical';

export interface PanelEdges {
  rowFirst: Int32Array;
  rowLast: Int32Array;
  colFirst: Int32Array;
  colLast: Int32Array;
}

/** First and last pixel with data on each row and column (-1 where none). */
export function panelEdges(wt: Float32Array, w: number, h: number): PanelEdges {
  const rowFirst = new Int32Array(h).fill(-1);
  const rowLast = new Int32Array(h).fill(-1);
  const colFirst = new Int32Array(w).fill(-1);
  const colLast = new Int32Array(w).fill(-1);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      if (wt[y * w + x] <= 0) continue;
      if (rowFirst[y] < 0) rowFirst[y] = x;
      rowLast[y] = x;
      if (colFirst[x] < 0) colFirst[x] = y;
      colLast[x] = y;
    }
  }
  return { rowFirst, rowLast, colFirst, colLast };
}

/** A found region with its measured figures, before kinds and reporting. */
export interface Found {
  source: 'blob' | 'profile';
  sign: 1 | -1;
  /** working-raster indices of the half-peak region */
  pixels: Int32Array;
  /** local surround the feature sits on (%, against the smooth background), 0 when insignificant */
  pedestalPct: number;
  /** signed mean contrast over the region, against the local surround, % */
  contrastPct: number;
  /** signed peak contrast (lightly smoothed map), against the local surround, % */
  peakContrastPct: number;
  areaMm2: number;
  /** contrast-weighted centroid, working px */
  cx: number;
  cy: number;
  /** where the (smoothed) peak is, working px */
  px: number;
  py: number;
  /** [x0, y0, x1, y1] in working px, x1/y1 exclusive */
  bbox: [number, number, number, number];
  /** length and width of the equivalent rectangle from second moments, mm */
  lengthMm: number;
  widthMm: number;
  /** angle of the long axis from the u axis, degrees in (-90, 90] */
  angleDeg: number;
  /** profile detections: the axis they run along */
  axis: Axis | null;
  /** significance against photo noise and against the background-model error */
  zNoise: number;
  zFit: number;
  /** pixels of the region on each panel edge (within 2 px) */
  touch: { top: number; bottom: number; left: number; right: number };
  /** mean contrast (against the surround) of those pixels, per edge (0 where none) */
  edgeContrast: { top: number; bottom: number; left: number; right: number };
  /** narrower ('width') or, across both axes, smaller ('size') than the analysed map resolves: its
   *  seen extent is mostly the map's own blur, so its width (size) is an upper bound and its contrast
   *  and SEMU lower bounds (contrast times area is what the map keeps); null when resolved */
  belowResolution: 'width' | 'size' | null;
  /** area with the map's blur taken out (mm²): the area itself when resolved; for one below resolution
   *  the estimate its figures are not corrected to, which the smallest-size rule still uses */
  unblurredAreaMm2: number;
}

/** Measure a region: mean contrast and centroid on the unsmoothed contrast map, shape from moments. */
export function measureRegion(
  ctx: Ctx,
  pixels: Int32Array,
  pedestalPct: number,
  peakPct: number,
  peakAt: [number, number],
  sign: 1 | -1,
  source: Found['source'],
  axis: Axis | null,
): Found | null {
  const { w, h, C, wt } = ctx;
  let sw = 0;
  let sc = 0;
  let sd = 0;
  let sdx = 0;
  let sdy = 0;
  let mx = 0;
  let my = 0;
  let mxx = 0;
  let myy = 0;
  let mxy = 0;
  let x0 = Infinity;
  let y0 = Infinity;
  let x1 = -Infinity;
  let y1 = -Infinity;
  const touch = { top: 0, bottom: 0, left: 0, right: 0 };
  const edgeSum = { top: 0, bottom: 0, left: 0, right: 0 };
  const m = Math.max(2, Math.round(2 / ctx.mmPerPx));
  for (let k = 0; k < pixels.length; k++) {
    const i = pixels[k];
    const q = wt[i];
    if (q <= 0) continue;
    const x = i % w;
    const y = (i - x) / w;
    const c = C[i];
    sw += q;
    sc += q * c;
    const d = sign * (c - pedestalPct);
    if (d > 0) {
      sd += q * d;
      sdx += q * d * x;
      sdy += q * d * y;
    }
    mx += q * x;
    my += q * y;
    mxx += q * x * x;
    myy += q * y * y;
    mxy += q * x * y;
    if (x < x0) x0 = x;
    if (x > x1) x1 = x;
    if (y < y0) y0 = y;
    if (y > y1) y1 = y;
    // near the panel's own edge on this row / column (the map's first and last pixels with data)
    if (x - ctx.edges.rowFirst[y] < m) {
      touch.left++;
      edgeSum.left += c;
    }
    if (ctx.edges.rowLast[y] - x < m) {
      touch.right++;
      edgeSum.right += c;
    }
    if (y - ctx.edges.colFirst[x] < m) {
      touch.top++;
      edgeSum.top += c;
    }
    if (ctx.edges.colLast[x] - y < m) {
      touch.bottom++;
      edgeSum.bottom += c;
    }
  }
  if (sw <= 0) return null;
  const mm = ctx.mmPerPx;
  const norm = 1 + pedestalPct / 100;
  const contrastPct = (sc / sw - pedestalPct) / norm;
  mx /= sw;
  my /= sw;
  // pixel discretisation adds 1/12 px² to each variance
  const vxx = mxx / sw - mx * mx + 1 / 12;
  const vyy = myy / sw - my * my + 1 / 12;
  const vxy = mxy / sw - mx * my;
  const tr = vxx + vyy;
  const det = vxx * vyy - vxy * vxy;
  const disc = Math.sqrt(Math.max(0, (tr * tr) / 4 - det));
  const l1 = tr / 2 + disc;
  const l2 = Math.max(tr / 2 - disc, 1 / 12);
  // equivalent rectangle: a uniform strip of length L has variance L²/12 along it
  const lengthMm = Math.sqrt(12 * l1) * mm;
  const widthMm = Math.sqrt(12 * l2) * mm;
  let angleDeg = (0.5 * Math.atan2(2 * vxy, vxx - vyy) * 180) / Math.PI;
  if (angleDeg <= -90) angleDeg += 180;
  const areaMm2 = sw * mm * mm;
  const noiseOfMean = (ctx.rho * ctx.noisePct) / Math.sqrt(sw);
  const zNoise = Math.abs(contrastPct) / Math.max(noiseOfMean, 1e-9);
  const zFit = ctx.fitErrorPct > 0 ? Math.abs(contrastPct) / ctx.fitErrorPct : Infinity;
  const edgeMean = (e: keyof typeof touch): number => (touch[e] > 0 ? (edgeSum[e] / touch[e] - pedestalPct) / norm : 0);
  return {
    source,
    sign,
    pixels,
    edgeContrast: { top: edgeMean('top'), bottom: edgeMean('bottom'), left: edgeMean('left'), right: edgeMean('right') },
    pedestalPct,
    contrastPct,
    peakContrastPct: (peakPct - pedestalPct) / norm,
    areaMm2,
    cx: sd > 0 ? sdx / sd : mx,
    cy: sd > 0 ? sdy / sd : my,
    px: peakAt[0],
    py: peakAt[1],
    bbox: [x0, y0, x1 + 1, y1 + 1],
    lengthMm,
    widthMm,
    angleDeg,
    axis,
    zNoise,
    zFit,
    touch,
    belowResolution: null,
    unblurredAreaMm2: areaMm2,
  };
}

/**
 * Is the new region a re-detection of a found one (the same feature at another scale or seed)?
 * It is when both have the same sign, more than half of the smaller region lies in the larger, and
 * either they are of comparable size (within 8x) or both are elongated the same way (a line seen again,
 * broadened, at a coarser scale). A much smaller round region inside a larger one is a nested feature
 * instead.
 */
export function isDuplicate(ctx: Ctx, f: Found): boolean {
  const overlap = new Map<number, number>();
  for (let k = 0; k < f.pixels.length; k++) {
    const l = ctx.label[f.pixels[k]];
    if (l) overlap.set(l, (overlap.get(l) ?? 0) + 1);
  }
  const n = f.pixels.length;
  const elongated = (g: Found): boolean => g.lengthMm >= 3 * g.widthMm;
  for (const [l, c] of overlap) {
    const other = ctx.found[l - 1];
    // a feature of the other sign is never the same one seen again (a dark cloud across a bright band)
    if (other.sign !== f.sign) continue;
    const no = other.pixels.length;
    const small = Math.min(n, no);
    if (c <= 0.5 * small) continue;
    // a piece of a band across the panel, of its sign, is that band (cut where another feature crosses it)
    // (not a feature on the band that stands out of it: the search ran with the band's profile taken out,
    // so what it finds on a band is measured against the band, and a remnant is weaker than the band).
    // A round finding clear of the panel's edges is kept though: a remnant is a stretch of the band or
    // its end at an edge, where the surface under the band is least held; a spot on the band is round.
    if (
      other.source === 'profile' &&
      other.sign === f.sign &&
      c > 0.5 * n &&
      Math.abs(f.contrastPct) < Math.abs(other.contrastPct) &&
      !(f.source !== 'profile' && roundInside(f))
    ) {
      return true;
    }
    // ... and one that stands out of the band by more than the band's own contrast is a feature on it,
    // whatever its size (a cloud on a wide band is not that band seen again)
    if (other.source === 'profile' && f.source !== 'profile' && Math.abs(f.contrastPct) >= Math.abs(other.contrastPct)) continue;
    if (Math.max(n, no) < 8 * small) return true;
    if (elongated(f) && elongated(other)) {
      let da = Math.abs(f.angleDeg - other.angleDeg) % 180;
      if (da > 90) da = 180 - da;
      if (da < 20) return true;
    }
  }
  return false;
}

/** Round (length under 1.5 x width) and touching none of the panel's edges. */
function roundInside(f: Found): boolean {
  return f.lengthMm < 1.5 * f.widthMm && f.touch.top + f.touch.bottom + f.touch.left + f.touch.right === 0;
}

/** Record a found region; nested (smaller) regions keep their own labels inside larger ones. */
export function register(ctx: Ctx, f: Found): void {
  ctx.found.push(f);
  const id = ctx.found.length;
  for (let k = 0; k < f.pixels.length; k++) {
    const i = f.pixels[k];
    const l = ctx.label[i];
    if (l === 0 || ctx.found[l - 1].pixels.length > f.pixels.length) ctx.label[i] = id;
  }
}

/**
 * Contrast (%) of one 8-bit code value where the camera saw the working pixel (x, y), from the code level
 * at the panel's centre, the background's level there and the lens transmission there; null when the
 * input is not 8-bit sRGB or the level is unknown. Times the level step (CodeLevel.stepCodes).
 */
export function localCodeStepPct(ctx: Ctx, x: number, y: number): number | null {
  const cl = ctx.opts.codeLevel;
  const level = cameraLevelAt(ctx, x, y);
  return cl && level !== null ? transferCodeStepPct(cl.response ?? 'srgb', level) * (cl.stepCodes ?? 1) : null;
}

/** The camera's linear level (0..1) where it saw the working pixel (x, y), or null. */
function cameraLevelAt(ctx: Ctx, x: number, y: number): number | null {
  const cl = ctx.opts.codeLevel;
  if (!cl || !ctx.B) return null;
  const { w, h, B } = ctx;
  const xi = Math.min(w - 1, Math.max(0, Math.round(x)));
  const yi = Math.min(h - 1, Math.max(0, Math.round(y)));
  const bc = B[(h >> 1) * w + (w >> 1)];
  const bp = B[yi * w + xi];
  if (!(bc > 0) || !(bp > 0)) return null;
  let level = (cl.centreY * bp) / bc;
  if (cl.gain) level *= bilinearNode(cl.gain, (x + 0.5) / w, (y + 0.5) / h);
  return level > 0 && level <= 1 ? level : null;
}

/** Bilinear value of a grid of nodes spanning u, v = 0..1. */
function bilinearNode(g: { cols: number; rows: number; data: Float32Array }, u: number, v: number): number {
  const fx = Math.min(g.cols - 1, Math.max(0, u * (g.cols - 1)));
  const fy = Math.min(g.rows - 1, Math.max(0, v * (g.rows - 1)));
  const x0 = Math.min(g.cols - 2, Math.floor(fx));
  const y0 = Math.min(g.rows - 2, Math.floor(fy));
  const ax = fx - x0;
  const ay = fy - y0;
  const d = g.data;
  const c = g.cols;
  return (
    (1 - ay) * ((1 - ax) * d[y0 * c + x0] + ax * d[y0 * c + x0 + 1]) + ay * ((1 - ax) * d[(y0 + 1) * c + x0] + ax * d[(y0 + 1) * c + x0 + 1])
  );
}
