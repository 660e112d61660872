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

/** Powers of the radial terms (distance from a given centre) a fit may add to the polynomial: with the
 *  polynomial's even powers they follow a roll-off whose profile is not a polynomial, e.g. one falling
 *  as the 1.5th power of the distance from its peak (sharper at the peak than any low-order surface). */
const RADIAL_POWERS = [1, 3];

function termList(order: number): [number, number][] {
  const t: [number, number][] = [];
  for (let s = 0; s <= order; s++) for (let j = 0; j <= s; j++) t.push([s - j, j]);
  return t;
}

interface Cell {
  x: number; // centroid, working px
  y: number;
  value: number; // mean Y
  weight: number;
  tile: number; // -1 when straddling a tile boundary
}

/**
 * Fit the background.
 * @param mask 1 = leave out (found features); may be null
 * @param noisePct per-working-pixel contrast noise (%), to separate the fit error from cell noise
 * @param tileGrid [cols, rows] or null
 * @param brightOnly black fields: glow and clouding are bright, so bright residuals are clipped at
 *        clipSigma but dark ones only at twice that
 */
export function fitBackground(
  work: WorkRaster,
  mask: Uint8Array | null,
  opts: BackgroundOptions,
  noisePct: number,
  tileGrid: [number, number] | null,
  brightOnly: boolean,
  bumps: { list: Bump[]; level: Float32Array; maxSigma: number } | null = null,
  radial: { x: number; y: number } | null = null,
): BackgroundFit {
  const { w, h } = work;
  const longMm = Math.max(w, h) * work.mmPerPx;
  const cellMm = opts.cellMm ?? longMm / 80;
  const cellPx = Math.max(2, Math.round(cellMm / work.mmPerPx));
  const cols = tileGrid ? tileGrid[0] : 1;
  const rows = tileGrid ? tileGrid[1] : 1;
  const nTiles = cols * rows;

  // 1. cells
  const cells: Cell[] = [];
  let cellsMasked = 0;
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
          const q = work.wt[i];
          total++;
          if (q <= 0) continue;
          if (mask && mask[i]) {
            masked++;
            continue;
          }
          sw += q;
          sy += q * work.Y[i];
          sx += q * x;
          syy += q * y;
        }
      }
      if (masked > 0.5 * total) cellsMasked++;
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
      cells.push({ x: sx / sw, y: syy / sw, value: sy / sw, weight: sw, tile });
    }
  }

  // 2. design: Legendre terms in normalised coordinates, plus tile offsets (tile 0 is the reference)
  let order = opts.order;
  const nTileTerms = nTiles - 1;
  while (order > 0 && cells.length < 3 * (termList(order).length + nTileTerms)) order--;
  const terms = termList(order);
  const bumpList = bumps?.list ?? [];
  const nBase = terms.length + nTileTerms;
  const nRadial = radial ? RADIAL_POWERS.length : 0;
  const nTerms = nBase + bumpList.length + nRadial;
  // radial terms: odd powers of the distance from a centre, over the half-diagonal
  const radialScale = 1 / Math.hypot(w / 2, h / 2);
  const radialAt = (x: number, y: number, t: number): number => Math.hypot(x - radial!.x, y - radial!.y) ** RADIAL_POWERS[t] * radialScale ** RADIAL_POWERS[t];
  const bumpScale = bumpList.map(() => 1);
  const levelAt = (c: Cell): number => {
    if (!bumps) return 0;
    const xi = Math.min(w - 1, Math.max(0, Math.round(c.x)));
    const yi = Math.min(h - 1, Math.max(0, Math.round(c.y)));
    return bumps.level[yi * w + xi];
  };
  const setBump = (k: number, c: Cell, r: Float64Array): void => {
    r[nBase + k] = levelAt(c) * bumpValue(bumpList[k], bumpScale[k], c.x, c.y);
  };
  const px = new Float64Array(order + 1);
  const py = new Float64Array(order + 1);
  const rowsOf = (c: Cell, out: Float64Array): void => {
    legendre(order, (2 * (c.x + 0.5)) / w - 1, px);
    legendre(order, (2 * (c.y + 0.5)) / h - 1, py);
    for (let t = 0; t < terms.length; t++) out[t] = px[terms[t][0]] * py[terms[t][1]];
    for (let t = 1; t < nTiles; t++) out[terms.length + t - 1] = c.tile === t ? 1 : 0;
    for (let k = 0; k < bumpList.length; k++) setBump(k, c, out);
    for (let t = 0; t < nRadial; t++) out[nBase + bumpList.length + t] = radialAt(c.x, c.y, t);
  };
  const design = cells.map((c) => {
    const r = new Float64Array(nTerms);
    rowsOf(c, r);
    return r;
  });

  const cellNoise = cells.map((c) => noisePct / Math.sqrt(Math.max(1, c.weight)));
  let clipped = new Uint8Array(cells.length);
  let coef: Float64Array = new Float64Array(nTerms);
  const predicted = new Float64Array(cells.length);
  const resid = new Float64Array(cells.length);
  // cell index lookup for the 1-cell dilation of clipped cells
  const gw = Math.ceil(w / cellPx);
  const gh = Math.ceil(h / cellPx);
  const gridIndex = new Int32Array(gw * gh).fill(-1);
  cells.forEach((c, k) => {
    gridIndex[Math.floor(c.y / cellPx) * gw + Math.floor(c.x / cellPx)] = k;
  });

  // Lit fields: the cells on the panel's edge (a neighbour cell missing) are clipped only three times as
  // far out as the others. A whole-panel polynomial has the least support there, and with the edge cells
  // left out it swings freely beyond the last cells it was fitted to (tens of % at a corner); black
  // fields, whose glow sits at the edges, clip them like any other cell.
  const anchor = new Uint8Array(cells.length);
  if (!brightOnly) {
    cells.forEach((c, k) => {
      const gx = Math.floor(c.x / cellPx);
      const gy = Math.floor(c.y / cellPx);
      for (const [dx, dy] of [[1, 0], [-1, 0], [0, 1], [0, -1]] as const) {
        const xx = gx + dx;
        const yy = gy + dy;
        if (xx < 0 || yy < 0 || xx >= gw || yy >= gh || gridIndex[yy * gw + xx] < 0) anchor[k] = 1;
      }
    });
  }
  // ...and those towards the corners weigh more than the rest (edgeWeight, cornerZone): a few corner cells
  // against thousands inside leave the corners to the polynomial's swing, which on clean generated fields
  // read as corner "spots" of up to 9 % (an order-4 surface under a steep roll-off, or pulled by a large
  // cloud inside)
  if (opts.edgeWeight !== 1) cells.forEach((c, k) => {
    const nearX = c.x < opts.cornerZone * w || c.x > (1 - opts.cornerZone) * w;
    const nearY = c.y < opts.cornerZone * h || c.y > (1 - opts.cornerZone) * h;
    if (anchor[k] && nearX && nearY) c.weight *= opts.edgeWeight;
  });
  // robust fit: cells beyond clipSigma of the fit are left out (with their neighbours), until no change
  const clipRounds = (): void => {
    for (let iter = 0; iter < 15; iter++) {
      coef = solveWeighted(design, cells, clipped, nTerms);
      for (let k = 0; k < cells.length; k++) {
        let p = 0;
        const r = design[k];
        for (let t = 0; t < nTerms; t++) p += coef[t] * r[t];
        predicted[k] = p;
        resid[k] = p > 0 ? (100 * (cells[k].value - p)) / p : 0;
      }
      const sigma = Math.max(robustSigma(resid), median1(cellNoise), 1e-4);
      const hiLimit = opts.clipSigma * sigma;
      const loLimit = (brightOnly ? 2 : 1) * opts.clipSigma * sigma;
      const next = new Uint8Array(cells.length);
      for (let k = 0; k < cells.length; k++) {
        // edge cells only for what stands far out of the fit (a bright zone of a hot-spot array on the edge)
        const loose = anchor[k] ? 3 : 1;
        if (resid[k] > loose * hiLimit || resid[k] < -loose * loLimit) {
          const gx = Math.floor(cells[k].x / cellPx);
          const gy = Math.floor(cells[k].y / cellPx);
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
      for (let k = 0; k < cells.length; k++) if (!next[k]) kept++;
      if (kept < Math.max(3 * nTerms, 0.3 * cells.length)) break;
      let same = true;
      for (let k = 0; k < cells.length; k++) if (next[k] !== clipped[k]) same = false;
      clipped = next;
      if (same) break;
    }
  };
  clipRounds();
  // each bump's width: the scale with the least weighted residual over the cells kept, then the
  // clipping once more with the widths chosen
  if (bumpList.length) {
    for (let k = 0; k < bumpList.length; k++) {
      let best = Infinity;
      let bestScale = 1;
      for (const sc of BUMP_SCALES) {
        if (sc > 1 && bumpList[k].sLong * sc > bumps!.maxSigma) continue;
        bumpScale[k] = sc;
        cells.forEach((c, j) => setBump(k, c, design[j]));
        const cf = solveWeighted(design, cells, clipped, nTerms);
        let ssr = 0;
        for (let j = 0; j < cells.length; j++) {
          if (clipped[j]) continue;
          let p = 0;
          for (let t = 0; t < nTerms; t++) p += cf[t] * design[j][t];
          ssr += cells[j].weight * (cells[j].value - p) ** 2;
        }
        if (ssr < best) {
          best = ssr;
          bestScale = sc;
        }
      }
      bumpScale[k] = bestScale;
      cells.forEach((c, j) => setBump(k, c, design[j]));
    }
    clipRounds();
  }
  coef = solveWeighted(design, cells, clipped, nTerms);

  // 3. fit error: residual scatter of all cells outside the feature mask (clipped ones included: the
  //    clipping removes what the surface cannot follow, so leaving them out would hide its error),
  //    less the cells' own noise
  const used: number[] = [];
  const usedNoise: number[] = [];
  let nClipped = 0;
  for (let k = 0; k < cells.length; k++) {
    let p = 0;
    for (let t = 0; t < nTerms; t++) p += coef[t] * design[k][t];
    if (clipped[k]) nClipped++;
    used.push(p > 0 ? (100 * (cells[k].value - p)) / p : 0);
    usedNoise.push(cellNoise[k]);
  }
  const scatter = robustSigma(used);
  const noiseLevel = median1(usedNoise);
  const fitErrorPct = Math.sqrt(Math.max(0, scatter * scatter - noiseLevel * noiseLevel));

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

  // 5. evaluate at working resolution
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
  for (let y = 0; y < h; y++) {
    // collapse the y-dependence: B(x, y) = sum_i P_i(x) * sum_j c_ij P_j(y)
    rowCoef.fill(0);
    for (let t = 0; t < terms.length; t++) rowCoef[terms[t][0]] += coef[t] * rowVals[terms[t][1] * h + y];
    const row = y * w;
    for (let x = 0; x < w; x++) {
      let s = 0;
      for (let i = 0; i <= order; i++) s += rowCoef[i] * colVals[i * w + x];
      B[row + x] = s;
    }
  }
  for (let t = 0; t < nRadial; t++) {
    const a = coef[nBase + bumpList.length + t];
    for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) B[y * w + x] += a * radialAt(x, y, t);
  }

  if (tileOffsetsPct && tileGrid) {
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
    cellsUsed: cells.length - nClipped,
    cellsClipped: nClipped,
    cellsMasked,
    fitErrorPct,
    cellNoisePct: noiseLevel,
    tileOffsetsPct,
    bumps: bumpList.map((b, k) => ({ ...b, sLong: b.sLong * bumpScale[k], sShort: b.sShort * bumpScale[k], amplitude: coef[nBase + k] })),
  };
}

function median1(a: number[]): number {
  if (a.length === 0) return 0;
  const s = [...a].sort((p, q) => p - q);
  return s[s.length >> 1];
}

/**
 * Weighted least squares over the cells not clipped: the normal equations (nTerms² sums, one pass over
 * the cells) solved by Cholesky; the Legendre terms on [-1, 1] keep them well conditioned. Falls back
 * to a QR solve of the whole system when they are not positive definite (a tile with no usable cell).
 */
function solveWeighted(design: Float64Array[], cells: Cell[], clipped: Uint8Array, nTerms: number): Float64Array {
  const ata = new Float64Array(nTerms * nTerms);
  const atb = new Float64Array(nTerms);
  let used = 0;
  for (let k = 0; k < cells.length; k++) {
    if (clipped[k]) continue;
    used++;
    const r = design[k];
    const wk = cells[k].weight;
    const v = cells[k].value * wk;
    for (let i = 0; i < nTerms; i++) {
      const ri = r[i] * wk;
      if (ri === 0) continue;
      atb[i] += r[i] * v;
      for (let j = i; j < nTerms; j++) ata[i * nTerms + j] += ri * r[j];
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
  return solveByQr(design, cells, clipped, nTerms);
}

function solveByQr(design: Float64Array[], cells: Cell[], clipped: Uint8Array, nTerms: number): Float64Array {
  const rowsUsed: number[] = [];
  for (let k = 0; k < cells.length; k++) if (!clipped[k]) rowsUsed.push(k);
  const A = new Matrix(rowsUsed.length, nTerms);
  const b = new Matrix(rowsUsed.length, 1);
  rowsUsed.forEach((k, r) => {
    const s = Math.sqrt(cells[k].weight);
    for (let t = 0; t < nTerms; t++) A.set(r, t, design[k][t] * s);
    b.set(r, 0, cells[k].value * s);
  });
  let x: Matrix;
  const qr = new QrDecomposition(A);
  if (rowsUsed.length >= nTerms && qr.isFullRank()) x = qr.solve(b);
  else x = solve(A, b, true); // rank-deficient (e.g. a tile with no usable cell): minimum-norm solution
  const out = new Float64Array(nTerms);
  for (let t = 0; t < nTerms; t++) out[t] = x.get(t, 0);
  return out;
}
