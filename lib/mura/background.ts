// The panel's own smooth background: a whole-panel polynomial surface fitted robustly to linear
// luminance on a coarse grid of cells, with found features masked out.
//
// What separates a cloud from smooth variation: smooth variation is whatever a single low-order
// polynomial over the whole panel explains (order 2-4; it is graded by the sampled-grid uniformity,
// not by mura). A cloud is a local bump such a surface cannot produce without missing elsewhere, so
// with the cloud's cells masked the surface passes under it and the cloud shows in the contrast map.
// When the cloud is not masked the surface bends towards it and absorbs part of its contrast, which
// biases the measured contrast low and the area small; hence fit -> find -> mask -> refit.
//
// Large clouds: the surface can also be fitted together with Gaussian bumps (analyse.ts measures the
// clouds over a third of the panel's short side again that way); the returned background excludes them.
//
// Tiled displays: with a tile grid the fit carries one level offset per tile (summing to zero), so
// tile-to-tile steps are measured as such instead of bending the surface; the returned background
// excludes them, so the steps stay visible in the contrast map.

import { CholeskyDecomposition, Matrix, QrDecomposition, solve } from 'ml-matrix';
import { EvenfieldError } from '../errors.js';
import type { BackgroundOptions } from './options.js';
import { robustSigma } from './raster.js';

/** The analysed raster: the panel map's luminance box-averaged to working resolution. */
export interface WorkRaster {
  w: number;
  h: number;
  /** mm per working pixel (same in both axes) */
  mmPerPx: number;
  /** linear luminance */
  Y: Float32Array;
  /** fraction of the pixel that had camera data (0 = none) */
  wt: Float32Array;
  /** a lens falloff term for the surface (see lensColumn), or null/absent (none) */
  lens?: LensTerm | null;
  /** the panel's steep roll-off: radial terms about this centre (working px) that every surface fitted
   *  on the raster carries, or null/absent (none; see steepRollOff in analyse.ts) */
  rollOff?: RadialTerms | null;
}

/** Radial terms of a surface: powers of the distance from a centre (px), over the half-diagonal. */
export interface RadialTerms {
  x: number;
  y: number;
  powers: number[];
}

export interface BackgroundFit {
  /** smooth background at working resolution (tile offsets not included) */
  B: Float32Array;
  order: number;
  cellPx: number;
  cellsUsed: number;
  cellsClipped: number;
  cellsMasked: number;
  /** robust sigma of the cell residuals (%) after the fit, noise of the cell means removed: the
   *  background model's own error, which does not average down with feature area */
  fitErrorPct: number;
  /** the cells' own noise (%, median over the cells' photo noise) */
  cellNoisePct: number;
  /** per-tile relative level offsets (%), row by row, mean 0; null without a tile grid */
  tileOffsetsPct: Float64Array | null;
  /** the bumps fitted with the surface, each with the width scale chosen and its fitted amplitude
   *  (relative to the background: 0.05 = a 5 % cloud) */
  bumps: (Bump & { amplitude: number })[];
  /** the lens term's part of B (included in it), or null without a lens term */
  lensPart: Float32Array | null;
  /** the lens term's coefficient (the falloff's power), or null */
  lensPower: number | null;
}

/**
 * A large cloud fitted together with the surface instead of masked out of it: an elliptical Gaussian
 * (working px; sigmas along and across its long axis) scaled by the previous round's background.
 */
export interface Bump {
  x: number;
  y: number;
  sLong: number;
  sShort: number;
  angleRad: number;
}

/** Width scales tried for each bump; the one with the least weighted residual is kept. */
const BUMP_SCALES = [0.8, 1, 1.25, 1.55, 1.9];

/** Squared distance of (x, y) from the bump's centre in its sigmas (widths times scale). */
export function bumpDistance2(b: Bump, x: number, y: number, scale = 1): number {
  const dx = x - b.x;
  const dy = y - b.y;
  const c = Math.cos(b.angleRad);
  const s = Math.sin(b.angleRad);
  const a = (dx * c + dy * s) / (b.sLong * scale);
  const q = (-dx * s + dy * c) / (b.sShort * scale);
  return a * a + q * q;
}

function bumpValue(b: Bump, scale: number, x: number, y: number): number {
  const e = 0.5 * bumpDistance2(b, x, y, scale);
  return e > 30 ? 0 : Math.exp(-e);
}

/** Legendre polynomials P_0..P_n at x in [-1, 1] (three-term recurrence). */
export function legendre(n: number, x: number, out: Float64Array): void {
  out[0] = 1;
  if (n >= 1) out[1] = x;
  for (let k = 1; k < n; k++) out[k + 1] = ((2 * k + 1) * x * out[k] - k * out[k - 1]) / (k + 1);
}

/** Powers of the radial terms (distance from a given centre) a fit may add to the polynomial by default:
 *  with the polynomial's even powers they follow a roll-off whose profile is not a polynomial, e.g. one
 *  falling as the 1.5th power of the distance from its peak (sharper at the peak than any low-order
 *  surface). */
export const SHARP_ROLL_OFF_POWERS = [1, 3];
/** ...and the power for one flatter at its peak than an order-4 surface can follow (falling as the
 *  5th-6th power of the distance: a plateau with a steep fall to the corners). One term, which can only
 *  rise or fall: with the 6th and 8th together, of opposite signs, the terms formed a ring that took up
 *  the flanks of large clouds (three large clouds of the accuracy study gained as much from them as the
 *  generated roll-offs: model error ratios 0.45-0.51). */
export const FLAT_ROLL_OFF_POWERS = [6];

/**
 * A lens falloff term: where each panel point lay in the photo, and the falloff profile's width. Falloff
 * is radial about the optical axis (common practice to take the image centre for it), so seen on the
 * panel it is a function of where each point lay in the photo, not of the panel's own coordinates.
 */
export interface LensTerm {
  /** homography (row-major 3 x 3) from panel mm to image coordinates centred on the image centre, in
   *  half-diagonals of the image */
  toImage: Float64Array;
  /** tangent of the field angle at the image corner (half-diagonal over focal length) */
  tan: number;
}

/**
 * The lens term's column: the logarithm of the cos⁴ law's falloff at image radius r (half-diagonals),
 * ln cos⁴θ = -2 ln(1 + tan² r²) (cos⁴ law of natural vignetting, common optics). Fitted to the
 * logarithm of the level, its coefficient is the power the falloff shows in the photo (1 for the law
 * alone, less where the camera corrected part of it, more with vignetting of the lens barrel).
 */
function lensColumn(L: LensTerm, mmPerPx: number, x: number, y: number): number {
  const xm = (x + 0.5) * mmPerPx;
  const ym = (y + 0.5) * mmPerPx;
  const h = L.toImage;
  const d = h[6] * xm + h[7] * ym + h[8];
  const u = (h[0] * xm + h[1] * ym + h[2]) / d;
  const v = (h[3] * xm + h[4] * ym + h[5]) / d;
  return -2 * Math.log(1 + L.tan * L.tan * (u * u + v * v));
}

function termList(order: number): [number, number][] {
  const t: [number, number][] = [];
  for (let s = 0; s <= order; s++) for (let j = 0; j <= s; j++) t.push([s - j, j]);
  return t;
}

/** The coarse grid's cells with camera data, as columns (one entry per cell). */
interface Cells {
  n: number;
  /** centroid, working px */
  x: Float64Array;
  y: Float64Array;
  /** weighted mean Y */
  value: Float64Array;
  weight: Float64Array;
  /** tile index, 0 without a tile grid */
  tile: Int32Array;
  /** cells more than half masked (counted whether or not they have enough data to be used) */
  masked: number;
}

/** Cells of cellPx × cellPx working px: those at least half covered by unmasked data (and, with a tile
 *  grid, inside one tile). */
function gatherCells(work: WorkRaster, mask: Uint8Array | null, cellPx: number, tileGrid: [number, number] | null): Cells {
  const { w, h, wt, Y } = work;
  const cap = Math.ceil(w / cellPx) * Math.ceil(h / cellPx);
  const cells: Cells = {
    n: 0,
    x: new Float64Array(cap),
    y: new Float64Array(cap),
    value: new Float64Array(cap),
    weight: new Float64Array(cap),
    tile: new Int32Array(cap),
    masked: 0,
  };
  const cols = tileGrid ? tileGrid[0] : 1;
  const rows = tileGrid ? tileGrid[1] : 1;
  for (let cy = 0; cy < h; cy += cellPx) {
    for (let cx = 0; cx < w; cx += cellPx) {
      let sw = 0;
      let sy = 0;
      let sx = 0;
      let syy = 0;
      let total = 0;
      let masked = 0;
      const x1 = Math.min(w, cx + cellPx);
      const y1 = Math.min(h, cy + cellPx);
      for (let y = cy; y < y1; y++) {
        for (let x = cx; x < x1; x++) {
          const i = y * w + x;
          const q = wt[i];
          total++;
          if (q <= 0) continue;
          if (mask !== null && mask[i]) {
            masked++;
            continue;
          }
          sw += q;
          sy += q * Y[i];
          sx += q * x;
          syy += q * y;
        }
      }
      if (masked > 0.5 * total) cells.masked++;
      if (sw < 0.5 * total || sw <= 0) continue;
      let tile = 0;
      if (tileGrid) {
        const tx0 = Math.floor((cx / w) * cols);
        const tx1 = Math.floor(((x1 - 1e-6) / w) * cols);
        const ty0 = Math.floor((cy / h) * rows);
        const ty1 = Math.floor(((y1 - 1e-6) / h) * rows);
        tile = tx0 === tx1 && ty0 === ty1 ? ty0 * cols + tx0 : -1;
        if (tile < 0) continue;
      }
      const k = cells.n++;
      cells.x[k] = sx / sw;
      cells.y[k] = syy / sw;
      cells.value[k] = sy / sw;
      cells.weight[k] = sw;
      cells.tile[k] = tile;
    }
  }
  return cells;
}

/**
 * The fit's terms: Legendre products of order `order`, tile offsets (tile 0 the reference), bumps,
 * radial terms and the lens term, in that order. Kept in one object of fixed shape and used by module-level functions
 * (closures made anew on every fit would each be compiled anew by V8).
 */
interface Terms {
  w: number;
  h: number;
  order: number;
  /** x and y degree of each Legendre product */
  ti: Int32Array;
  tj: Int32Array;
  nTiles: number;
  /** first bump column */
  nBase: number;
  nTerms: number;
  bumpList: Bump[];
  /** width scale of each bump */
  bumpScale: Float64Array;
  /** level the bumps are scaled by (previous background), or null without bumps */
  level: Float32Array | null;
  /** each radial term's centre and power (the raster's roll-off first, then the fit's own) */
  radialX: Float64Array;
  radialY: Float64Array;
  radialPowers: Float64Array;
  nRadial: number;
  radialScale: number;
  /** the lens term (WorkRaster.lens), or null */
  lens: LensTerm | null;
  mmPerPx: number;
  /** Legendre values, scratch */
  px: Float64Array;
  py: Float64Array;
}

/** Radial term t (a power of the distance from the centre, over the half-diagonal) at (x, y). */
function radialAt(T: Terms, x: number, y: number, t: number): number {
  const dx = (x - T.radialX[t]) * T.radialScale;
  const dy = (y - T.radialY[t]) * T.radialScale;
  return radialPower(dx * dx + dy * dy, T.radialPowers[t]);
}

/** r^p from r² (whole powers by products: the radial terms are evaluated at every working pixel). */
function radialPower(r2: number, p: number): number {
  if (!Number.isInteger(p) || p < 0) return Math.pow(r2, p / 2);
  let v = p % 2 ? Math.sqrt(r2) : 1;
  for (let k = 1; k < p; k += 2) v *= r2;
  return v;
}

/** Bump k's column in cell c's row of the design: its Gaussian at the cell times the level there. */
function setBump(T: Terms, cells: Cells, k: number, c: number, design: Float64Array): void {
  let level = 0;
  if (T.level !== null) {
    const xi = Math.min(T.w - 1, Math.max(0, Math.round(cells.x[c])));
    const yi = Math.min(T.h - 1, Math.max(0, Math.round(cells.y[c])));
    level = T.level[yi * T.w + xi];
  }
  design[c * T.nTerms + T.nBase + k] = level * bumpValue(T.bumpList[k], T.bumpScale[k], cells.x[c], cells.y[c]);
}

/** Row c of the design (flat, nTerms per cell). */
function designRow(T: Terms, cells: Cells, c: number, design: Float64Array): void {
  const { px, py, ti, tj } = T;
  const at = c * T.nTerms;
  const x = cells.x[c];
  const y = cells.y[c];
  legendre(T.order, (2 * (x + 0.5)) / T.w - 1, px);
  legendre(T.order, (2 * (y + 0.5)) / T.h - 1, py);
  const nPoly = ti.length;
  for (let t = 0; t < nPoly; t++) design[at + t] = px[ti[t]] * py[tj[t]];
  for (let t = 1; t < T.nTiles; t++) design[at + nPoly + t - 1] = cells.tile[c] === t ? 1 : 0;
  for (let k = 0; k < T.bumpList.length; k++) setBump(T, cells, k, c, design);
  for (let t = 0; t < T.nRadial; t++) design[at + T.nBase + T.bumpList.length + t] = radialAt(T, x, y, t);
  if (T.lens !== null) design[at + T.nBase + T.bumpList.length + T.nRadial] = lensColumn(T.lens, T.mmPerPx, x, y);
}

/** Value of the fitted surface at cell c. */
function predictCell(design: Float64Array, nTerms: number, coef: Float64Array, c: number): number {
  let p = 0;
  const at = c * nTerms;
  for (let t = 0; t < nTerms; t++) p += coef[t] * design[at + t];
  return p;
}

/** What the robust fit works on, in one object of fixed shape. */
interface Fitting {
  cells: Cells;
  design: Float64Array;
  nTerms: number;
  /** cells left out, 1 = clipped */
  clipped: Uint8Array;
  /** edge cells (a neighbour cell missing), clipped only far out on lit fields */
  anchor: Uint8Array;
  /** index of the cell at each grid place, -1 for none */
  gridIndex: Int32Array;
  gw: number;
  gh: number;
  cellPx: number;
  /** median of the cells' own noise, % */
  cellNoise: number;
  clipSigma: number;
  brightOnly: boolean;
  coef: Float64Array;
  resid: Float64Array;
}

/** Robust fit: cells beyond clipSigma of the fit are left out (with their neighbours), until no change. */
function clipRounds(F: Fitting): void {
  const { cells, design, nTerms, anchor, gridIndex, gw, gh, cellPx, resid } = F;
  const n = cells.n;
  for (let iter = 0; iter < 15; iter++) {
    F.coef = solveWeighted(design, nTerms, cells, F.clipped);
    for (let k = 0; k < n; k++) {
      const p = predictCell(design, nTerms, F.coef, k);
      resid[k] = p > 0 ? (100 * (cells.value[k] - p)) / p : 0;
    }
    const sigma = Math.max(robustSigma(resid), F.cellNoise, 1e-4);
    const hiLimit = F.clipSigma * sigma;
    const loLimit = (F.brightOnly ? 2 : 1) * F.clipSigma * sigma;
    const next = new Uint8Array(n);
    for (let k = 0; k < n; k++) {
      // edge cells only for what stands far out of the fit (a bright zone of a hot-spot array on the edge)
      const loose = anchor[k] ? 3 : 1;
      if (resid[k] > loose * hiLimit || resid[k] < -loose * loLimit) {
        const gx = Math.floor(cells.x[k] / cellPx);
        const gy = Math.floor(cells.y[k] / cellPx);
        for (let dy = -1; dy <= 1; dy++) {
          for (let dx = -1; dx <= 1; dx++) {
            const xx = gx + dx;
            const yy = gy + dy;
            if (xx < 0 || yy < 0 || xx >= gw || yy >= gh) continue;
            const j = gridIndex[yy * gw + xx];
            if (j >= 0) next[j] = 1;
          }
        }
      }
    }
    // never clip so much that the fit loses its footing
    let kept = 0;
    for (let k = 0; k < n; k++) if (!next[k]) kept++;
    if (kept < Math.max(3 * nTerms, 0.3 * n)) break;
    let same = true;
    for (let k = 0; k < n; k++) if (next[k] !== F.clipped[k]) same = false;
    F.clipped = next;
    if (same) break;
  }
}

/** Each bump's width: the scale with the least weighted residual over the cells kept. */
function chooseBumpScales(T: Terms, F: Fitting, maxSigma: number): void {
  const { cells, design, nTerms } = F;
  for (let k = 0; k < T.bumpList.length; k++) {
    let best = Infinity;
    let bestScale = 1;
    for (const sc of BUMP_SCALES) {
      if (sc > 1 && T.bumpList[k].sLong * sc > maxSigma) continue;
      T.bumpScale[k] = sc;
      for (let j = 0; j < cells.n; j++) setBump(T, cells, k, j, design);
      const cf = solveWeighted(design, nTerms, cells, F.clipped);
      let ssr = 0;
      for (let j = 0; j < cells.n; j++) {
        if (F.clipped[j]) continue;
        const p = predictCell(design, nTerms, cf, j);
        ssr += cells.weight[j] * (cells.value[j] - p) ** 2;
      }
      if (ssr < best) {
        best = ssr;
        bestScale = sc;
      }
    }
    T.bumpScale[k] = bestScale;
    for (let j = 0; j < cells.n; j++) setBump(T, cells, k, j, design);
  }
}

/** A fit's cells, design and state, set up once (fitBackground, radialCentreError). */
interface SetUp {
  T: Terms;
  F: Fitting;
  cells: Cells;
  terms: [number, number][];
  cellPx: number;
}

/** Gaussian bumps a fit carries: their shapes, the level they are scaled by, the widest sigma (px). */
interface BumpSet {
  list: Bump[];
  level: Float32Array;
  maxSigma: number;
}

/** Radial terms a fit adds about a centre (px); powers SHARP_ROLL_OFF_POWERS unless given. */
type RadialSpec = { x: number; y: number; powers?: number[] };

/** A fit's shared arguments, as fitBackground takes them. */
type FitArgs = [work: WorkRaster, mask: Uint8Array | null, opts: BackgroundOptions, noisePct: number, tileGrid: [number, number] | null, brightOnly: boolean];

function setUpFit(...[work, mask, opts, noisePct, tileGrid, brightOnly, bumps, radial]: [...FitArgs, BumpSet | null, RadialSpec | null]): SetUp {
  const { w, h } = work;
  const longMm = Math.max(w, h) * work.mmPerPx;
  const cellMm = opts.cellMm ?? longMm / 80;
  const cellPx = Math.max(2, Math.round(cellMm / work.mmPerPx));
  const cols = tileGrid ? tileGrid[0] : 1;
  const rows = tileGrid ? tileGrid[1] : 1;
  const nTiles = cols * rows;

  // 1. cells
  const cells = gatherCells(work, mask, cellPx, tileGrid);
  const nCells = cells.n;

  // 2. design: Legendre terms in normalised coordinates, plus tile offsets (tile 0 is the reference)
  let order = opts.order;
  const nTileTerms = nTiles - 1;
  while (order > 0 && nCells < 3 * (termList(order).length + nTileTerms)) order--;
  const terms = termList(order);
  const bumpList = bumps?.list ?? [];
  const nBase = terms.length + nTileTerms;
  const radialSets: RadialTerms[] = [];
  if (work.rollOff) radialSets.push(work.rollOff);
  if (radial) radialSets.push({ x: radial.x, y: radial.y, powers: radial.powers ?? SHARP_ROLL_OFF_POWERS });
  const radialTerms = radialSets.flatMap((r) => r.powers.map((p) => [r.x, r.y, p] as const));
  const nRadial = radialTerms.length;
  const lens = work.lens ?? null;
  const nTerms = nBase + bumpList.length + nRadial + (lens ? 1 : 0);
  // a least-squares fit needs at least as many observations as unknowns
  if (nCells < nTerms) {
    throw new EvenfieldError('internal', `only ${nCells} cells of the panel map hold data, too few for the mura background fit (${nTerms} terms)`);
  }
  const T: Terms = {
    w,
    h,
    order,
    ti: Int32Array.from(terms, (t) => t[0]),
    tj: Int32Array.from(terms, (t) => t[1]),
    nTiles,
    nBase,
    nTerms,
    bumpList,
    bumpScale: new Float64Array(bumpList.length).fill(1),
    level: bumps ? bumps.level : null,
    radialX: Float64Array.from(radialTerms, (t) => t[0]),
    radialY: Float64Array.from(radialTerms, (t) => t[1]),
    radialPowers: Float64Array.from(radialTerms, (t) => t[2]),
    nRadial,
    radialScale: 1 / Math.hypot(w / 2, h / 2),
    lens,
    mmPerPx: work.mmPerPx,
    px: new Float64Array(order + 1),
    py: new Float64Array(order + 1),
  };
  const design = new Float64Array(nCells * nTerms);
  for (let c = 0; c < nCells; c++) designRow(T, cells, c, design);

  const cellNoise = new Float64Array(nCells);
  for (let k = 0; k < nCells; k++) cellNoise[k] = noisePct / Math.sqrt(Math.max(1, cells.weight[k]));
  // cell index lookup for the 1-cell dilation of clipped cells
  const gw = Math.ceil(w / cellPx);
  const gh = Math.ceil(h / cellPx);
  const gridIndex = new Int32Array(gw * gh).fill(-1);
  for (let k = 0; k < nCells; k++) gridIndex[Math.floor(cells.y[k] / cellPx) * gw + Math.floor(cells.x[k] / cellPx)] = k;

  // Lit fields: the cells on the panel's edge (a neighbour cell missing) are clipped only three times as
  // far out as the others. A whole-panel polynomial has the least support there, and with the edge cells
  // left out it swings freely beyond the last cells it was fitted to (tens of % at a corner); black
  // fields, whose glow sits at the edges, clip them like any other cell.
  const anchor = new Uint8Array(nCells);
  if (!brightOnly) {
    for (let k = 0; k < nCells; k++) {
      const gx = Math.floor(cells.x[k] / cellPx);
      const gy = Math.floor(cells.y[k] / cellPx);
      for (const [dx, dy] of [[1, 0], [-1, 0], [0, 1], [0, -1]] as const) {
        const xx = gx + dx;
        const yy = gy + dy;
        if (xx < 0 || yy < 0 || xx >= gw || yy >= gh || gridIndex[yy * gw + xx] < 0) anchor[k] = 1;
      }
    }
  }
  // ...and those towards the corners weigh more than the rest (edgeWeight, cornerZone): a few corner cells
  // against thousands inside leave the corners to the polynomial's swing, which on clean generated fields
  // read as corner "spots" of up to 9 % (an order-4 surface under a steep roll-off, or pulled by a large
  // cloud inside)
  if (opts.edgeWeight !== 1) {
    for (let k = 0; k < nCells; k++) {
      const nearX = cells.x[k] < opts.cornerZone * w || cells.x[k] > (1 - opts.cornerZone) * w;
      const nearY = cells.y[k] < opts.cornerZone * h || cells.y[k] > (1 - opts.cornerZone) * h;
      if (anchor[k] && nearX && nearY) cells.weight[k] *= opts.edgeWeight;
    }
  }
  const F: Fitting = {
    cells,
    design,
    nTerms,
    clipped: new Uint8Array(nCells),
    anchor,
    gridIndex,
    gw,
    gh,
    cellPx,
    cellNoise: median1(cellNoise),
    clipSigma: opts.clipSigma,
    brightOnly,
    coef: new Float64Array(nTerms),
    resid: new Float64Array(nCells),
  };
  return { T, F, cells, terms, cellPx };
}

/**
 * Fit the background.
 * @param mask 1 = leave out (found features); may be null
 * @param noisePct per-working-pixel contrast noise (%), to separate the fit error from cell noise
 * @param tileGrid [cols, rows] or null
 * @param brightOnly black fields: glow and clouding are bright, so bright residuals are clipped at
 *        clipSigma but dark ones only at twice that
 * @param surface false: the fit's figures only, no surface (B and lensPart empty)
 */
export function fitBackground(
  work: WorkRaster,
  mask: Uint8Array | null,
  opts: BackgroundOptions,
  noisePct: number,
  tileGrid: [number, number] | null,
  brightOnly: boolean,
  bumps: BumpSet | null = null,
  radial: RadialSpec | null = null,
  surface = true,
): BackgroundFit {
  const { w, h } = work;
  const cols = tileGrid ? tileGrid[0] : 1;
  const rows = tileGrid ? tileGrid[1] : 1;
  const nTiles = cols * rows;
  const { T, F, cells, terms, cellPx } = setUpFit(work, mask, opts, noisePct, tileGrid, brightOnly, bumps, radial);
  const { order, nBase, nTerms, bumpList, nRadial } = T;
  const nCells = cells.n;
  const design = F.design;
  clipRounds(F);
  // each bump's width, then the clipping once more with the widths chosen
  if (bumpList.length) {
    chooseBumpScales(T, F, bumps!.maxSigma);
    clipRounds(F);
  }
  const clipped = F.clipped;
  const bumpScale = T.bumpScale;
  const coef = solveWeighted(design, nTerms, cells, clipped);

  // 3. fit error: residual scatter of all cells outside the feature mask (clipped ones included: the
  //    clipping removes what the surface cannot follow, so leaving them out would hide its error),
  //    less the cells' own noise
  let nClipped = 0;
  for (let k = 0; k < nCells; k++) if (clipped[k]) nClipped++;
  const noiseLevel = F.cellNoise;
  const fitErrorPct = modelError(F, coef);

  // 4. tile offsets: centre them and move their mean into the constant term
  let tileOffsetsPct: Float64Array | null = null;
  if (tileGrid) {
    const beta = new Float64Array(nTiles);
    for (let t = 1; t < nTiles; t++) beta[t] = coef[terms.length + t - 1];
    let mean = 0;
    for (let t = 0; t < nTiles; t++) mean += beta[t];
    mean /= nTiles;
    coef[0] += mean; // terms[0] is P0 * P0 = 1
    for (let t = 0; t < nTiles; t++) beta[t] -= mean;
    tileOffsetsPct = beta; // converted to % below, once B is known
  }

  // 5. evaluate at working resolution (not when only the fit's figures are asked for)
  const B = surface ? evaluateSurface(T, coef) : new Float32Array(0);
  let lensPart: Float32Array | null = null;
  if (T.lens !== null && surface) {
    lensPart = new Float32Array(w * h);
    writeLensPart(T, coef, lensPart);
    for (let i = 0; i < B.length; i++) B[i] += lensPart[i];
  }

  if (tileOffsetsPct && tileGrid && surface) {
    for (let t = 0; t < nTiles; t++) {
      const tx = t % cols;
      const ty = Math.floor(t / cols);
      const x0 = Math.floor((tx * w) / cols);
      const x1 = Math.floor(((tx + 1) * w) / cols);
      const y0 = Math.floor((ty * h) / rows);
      const y1 = Math.floor(((ty + 1) * h) / rows);
      let s = 0;
      let n = 0;
      for (let y = y0; y < y1; y++) for (let x = x0; x < x1; x++) {
        s += B[y * w + x];
        n++;
      }
      tileOffsetsPct[t] = n > 0 && s > 0 ? (100 * tileOffsetsPct[t]) / (s / n) : 0;
    }
  }

  return {
    B,
    order,
    cellPx,
    cellsUsed: nCells - nClipped,
    cellsClipped: nClipped,
    cellsMasked: cells.masked,
    fitErrorPct,
    cellNoisePct: noiseLevel,
    tileOffsetsPct,
    bumps: bumpList.map((b, k) => ({ ...b, sLong: b.sLong * bumpScale[k], sShort: b.sShort * bumpScale[k], amplitude: coef[nBase + k] })),
    lensPart,
    lensPower: T.lens ? coef[nBase + bumpList.length + nRadial] : null,
  };
}

/** A fit's model error (%): the robust scatter of every cell's relative residual less the cells' own
 *  noise in quadrature. */
function modelError(F: Fitting, coef: Float64Array): number {
  const { cells, design, nTerms } = F;
  const used = new Float64Array(cells.n);
  for (let k = 0; k < cells.n; k++) {
    const p = predictCell(design, nTerms, coef, k);
    used[k] = p > 0 ? (100 * (cells.value[k] - p)) / p : 0;
  }
  const scatter = robustSigma(used);
  return Math.sqrt(Math.max(0, scatter * scatter - F.cellNoise * F.cellNoise));
}

/**
 * The model error (%) of the raster outside the mask fitted by plain least squares (no clipping) with the
 * surface's terms joined by radial terms of the given powers about a centre, as a function of the centre
 * (px), with the radial terms' coefficients (the surface's level units, distance over the half-diagonal):
 * the cells and the rest of the design are set up once, so a search over centres costs one small solve
 * per centre. `polynomialError` is the model error of the surface without the radial terms on the same
 * cells; `outerShare` gives, for a centre, the share of the fall in squared residual against it that
 * comes from cells at least `outer` half-diagonals from the centre.
 */
export function radialCentreError(
  work: WorkRaster,
  mask: Uint8Array | null,
  opts: BackgroundOptions,
  noisePct: number,
  tileGrid: [number, number] | null,
  powers: number[],
): { polynomialError: number; at: (x: number, y: number) => { error: number; coef: number[] }; outerShare: (x: number, y: number, outer: number) => number } {
  const plain = { ...opts, clipSigma: Infinity };
  const { T, F, cells } = setUpFit(work, mask, plain, noisePct, tileGrid, false, null, { x: 0, y: 0, powers });
  // the surface without the radial terms, on the same cells
  const P = setUpFit(work, mask, plain, noisePct, tileGrid, false, null, null);
  const pc = solveWeighted(P.F.design, P.T.nTerms, P.cells, P.F.clipped);
  // the centre's own terms come last among the radial ones (after the raster's roll-off, if any)
  const first = T.nRadial - powers.length;
  const col = T.nBase + T.bumpList.length;
  const solveAt = (x: number, y: number): Float64Array => {
    for (let t = first; t < T.nRadial; t++) {
      T.radialX[t] = x;
      T.radialY[t] = y;
    }
    for (let c = 0; c < cells.n; c++) {
      for (let t = first; t < T.nRadial; t++) F.design[c * T.nTerms + col + t] = radialAt(T, cells.x[c], cells.y[c], t);
    }
    return solveWeighted(F.design, T.nTerms, cells, F.clipped);
  };
  return {
    polynomialError: modelError(P.F, pc),
    at: (x, y) => {
      const coef = solveAt(x, y);
      return { error: modelError(F, coef), coef: Array.from(coef.subarray(col + first, col + T.nRadial)) };
    },
    outerShare: (x, y, outer) => {
      const coef = solveAt(x, y);
      let gainOuter = 0;
      let gain = 0;
      for (let k = 0; k < cells.n; k++) {
        const p1 = predictCell(F.design, T.nTerms, coef, k);
        const p0 = predictCell(P.F.design, P.T.nTerms, pc, k);
        if (!(p0 > 0 && p1 > 0)) continue;
        const g = cells.weight[k] * (((cells.value[k] - p0) / p0) ** 2 - ((cells.value[k] - p1) / p1) ** 2);
        gain += g;
        if (Math.hypot(cells.x[k] - x, cells.y[k] - y) * T.radialScale >= outer) gainOuter += g;
      }
      return gain > 0 ? gainOuter / gain : 0;
    },
  };
}

/** The fitted surface (polynomial and radial terms; tile offsets, bumps and the lens term left out) at working resolution. */
function evaluateSurface(T: Terms, coef: Float64Array): Float32Array {
  const { w, h, order, px, py, ti, tj } = T;
  const B = new Float32Array(w * h);
  const colVals = new Float64Array((order + 1) * w);
  const rowVals = new Float64Array((order + 1) * h);
  for (let x = 0; x < w; x++) {
    legendre(order, (2 * (x + 0.5)) / w - 1, px);
    for (let i = 0; i <= order; i++) colVals[i * w + x] = px[i];
  }
  for (let y = 0; y < h; y++) {
    legendre(order, (2 * (y + 0.5)) / h - 1, py);
    for (let j = 0; j <= order; j++) rowVals[j * h + y] = py[j];
  }
  const rowCoef = new Float64Array(order + 1);
  const acc = new Float64Array(w);
  for (let y = 0; y < h; y++) {
    // collapse the y-dependence: B(x, y) = sum_i P_i(x) * sum_j c_ij P_j(y), summed over i in turn for
    // the whole row
    rowCoef.fill(0);
    for (let t = 0; t < ti.length; t++) rowCoef[ti[t]] += coef[t] * rowVals[tj[t] * h + y];
    acc.fill(0);
    for (let i = 0; i <= order; i++) {
      const a = rowCoef[i];
      const at = i * w;
      for (let x = 0; x < w; x++) acc[x] += a * colVals[at + x];
    }
    B.set(acc, y * w);
  }
  for (let t = 0; t < T.nRadial; t++) {
    const a = coef[T.nBase + T.bumpList.length + t];
    const s2 = T.radialScale * T.radialScale;
    const p = T.radialPowers[t];
    for (let y = 0; y < h; y++) {
      const dy2 = (y - T.radialY[t]) ** 2;
      for (let x = 0; x < w; x++) B[y * w + x] += a * radialPower(((x - T.radialX[t]) ** 2 + dy2) * s2, p);
    }
  }
  return B;
}

/** The lens term's part of the surface, written into out. */
function writeLensPart(T: Terms, coef: Float64Array, out: Float32Array): void {
  const L = T.lens!;
  const a = coef[T.nBase + T.bumpList.length + T.nRadial];
  for (let y = 0; y < T.h; y++) for (let x = 0; x < T.w; x++) out[y * T.w + x] = a * lensColumn(L, T.mmPerPx, x, y);
}

function median1(a: Float64Array): number {
  if (a.length === 0) return 0;
  const s = Float64Array.from(a).sort();
  return s[s.length >> 1];
}

/**
 * Weighted least squares over the cells not clipped: the normal equations (nTerms² sums, one pass over
 * the cells) solved by Cholesky; the Legendre terms on [-1, 1] keep them well conditioned. Falls back
 * to a QR solve of the whole system when they are not positive definite (a tile with no usable cell).
 */
function solveWeighted(design: Float64Array, nTerms: number, cells: Cells, clipped: Uint8Array): Float64Array {
  const ata = new Float64Array(nTerms * nTerms);
  const atb = new Float64Array(nTerms);
  let used = 0;
  for (let k = 0; k < cells.n; k++) {
    if (clipped[k]) continue;
    used++;
    const at = k * nTerms;
    const wk = cells.weight[k];
    const v = cells.value[k] * wk;
    for (let i = 0; i < nTerms; i++) {
      const ri = design[at + i] * wk;
      if (ri === 0) continue;
      atb[i] += design[at + i] * v;
      for (let j = i; j < nTerms; j++) ata[i * nTerms + j] += ri * design[at + j];
    }
  }
  if (used >= nTerms) {
    for (let i = 0; i < nTerms; i++) for (let j = 0; j < i; j++) ata[i * nTerms + j] = ata[j * nTerms + i];
    const chol = new CholeskyDecomposition(new Matrix(Array.from({ length: nTerms }, (_, i) => Array.from(ata.subarray(i * nTerms, (i + 1) * nTerms)))));
    if (chol.isPositiveDefinite()) {
      const x = chol.solve(Matrix.columnVector(Array.from(atb)));
      const out = new Float64Array(nTerms);
      for (let t = 0; t < nTerms; t++) out[t] = x.get(t, 0);
      if (out.every(Number.isFinite)) return out;
    }
  }
  return solveByQr(design, nTerms, cells, clipped);
}

function solveByQr(design: Float64Array, nTerms: number, cells: Cells, clipped: Uint8Array): Float64Array {
  const rowsUsed: number[] = [];
  for (let k = 0; k < cells.n; k++) if (!clipped[k]) rowsUsed.push(k);
  const A = new Matrix(rowsUsed.length, nTerms);
  const b = new Matrix(rowsUsed.length, 1);
  rowsUsed.forEach((k, r) => {
    const s = Math.sqrt(cells.weight[k]);
    for (let t = 0; t < nTerms; t++) A.set(r, t, design[k * nTerms + t] * s);
    b.set(r, 0, cells.value[k] * s);
  });
  let x: Matrix;
  const qr = new QrDecomposition(A);
  if (rowsUsed.length >= nTerms && qr.isFullRank()) x = qr.solve(b);
  else x = solve(A, b, true); // rank-deficient (e.g. a tile with no usable cell): minimum-norm solution
  const out = new Float64Array(nTerms);
  for (let t = 0; t < nTerms; t++) out[t] = x.get(t, 0);
  return out;
}
