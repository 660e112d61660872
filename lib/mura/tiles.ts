// Tiled displays (video walls, modular panels): tile-to-tile level steps and seam lines on a tile grid
// given by the user.
//
// Steps come from the background fit, which carries one level offset per tile; each tile is compared
// with the median tile, so one odd tile shows as one step instead of smearing a little offset over all
// the others. Seams are measured on the profile across each inner tile boundary, averaged over the
// whole boundary, with the tile steps already taken out: peak within a millimetre or so of the
// boundary, half-peak width, mean contrast against the flanks. Both are reported as kind 'seam'
// (detail.form 'tile-step' or 'line').

import type { BackgroundFit } from './background.js';
import { round } from './classify.js';
import type { Ctx } from './context.js';
import type { Finding } from './hotspots.js';
import type { MuraOptions } from './options.js';
import { semu } from './semu.js';
import { thinMeasure } from './profiles.js';

export interface TileAnalysis {
  findings: Finding[];
  /** true for a line/band finding that lies on a seam (the seam finding replaces it) */
  onSeam: (f: Finding) => boolean;
}

export function analyseTiles(ctx: Ctx, fit: BackgroundFit, grid: [number, number], opts: MuraOptions): TileAnalysis {
  const [cols, rows] = grid;
  const { w, h, mmPerPx: mm } = ctx;
  const out: Finding[] = [];
  const noise = ctx.rho * ctx.noisePct;
  const fitFloor = opts.fitSigma * ctx.fitErrorPct;

  // 1. tile steps against the median tile
  const offs = Array.from(fit.tileOffsetsPct ?? []);
  if (offs.length === cols * rows) {
    const sorted = [...offs].sort((a, b) => a - b);
    const med = sorted.length % 2 ? sorted[sorted.length >> 1] : 0.5 * (sorted[sorted.length / 2 - 1] + sorted[sorted.length / 2]);
    for (let r = 0; r < rows; r++) {
      for (let c = 0; c < cols; c++) {
        const o = offs[r * cols + c];
        const d = (100 * (1 + o / 100)) / (1 + med / 100) - 100;
        const x0 = Math.floor((c * w) / cols);
        const x1 = Math.floor(((c + 1) * w) / cols);
        const y0 = Math.floor((r * h) / rows);
        const y1 = Math.floor(((r + 1) * h) / rows);
        const px = (x1 - x0) * (y1 - y0);
        const area = px * mm * mm;
        if (Math.abs(d) < opts.thresholdSigma * (noise / Math.sqrt(px)) || Math.abs(d) < fitFloor) continue;
        out.push({
          kind: 'seam',
          polarity: d > 0 ? 'bright' : 'dark',
          cx: (x0 + x1) / 2 - 0.5,
          cy: (y0 + y1) / 2 - 0.5,
          bbox: [x0, y0, x1, y1],
          areaMm2: area,
          contrastPct: d,
          peakContrastPct: d,
          semu: semu(d, area, opts.semuConstants),
          detail: { form: 'tile-step', tile: `r${r + 1}c${c + 1}`, stepPct: round(d, 3) },
          members: [],
        });
      }
    }
  }

  // 2. seam lines along the inner boundaries
  const seamPos: { axis: 'vertical' | 'horizontal'; at: number }[] = [];
  for (let c = 1; c < cols; c++) seamPos.push({ axis: 'vertical', at: (c * w) / cols - 0.5 });
  for (let r = 1; r < rows; r++) seamPos.push({ axis: 'horizontal', at: (r * h) / rows - 0.5 });
  const win = Math.max(8, Math.ceil(10 / mm));
  const near = Math.max(1.5, 1 / mm);
  for (const s of seamPos) {
    const vertical = s.axis === 'vertical';
    const nA = vertical ? w : h;
    const nL = vertical ? h : w;
    const a0 = Math.max(0, Math.floor(s.at - win));
    const a1 = Math.min(nA - 1, Math.ceil(s.at + win));
    const n = a1 - a0 + 1;
    const p = new Float64Array(n);
    const pw = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      const a = a0 + k;
      let sv = 0;
      let sw = 0;
      for (let l = 0; l < nL; l++) {
        const i = vertical ? l * w + a : a * w + l;
        const q = ctx.wt[i];
        if (q <= 0) continue;
        sv += q * ctx.C[i];
        sw += q;
      }
      p[k] = sw > 0 ? sv / sw : NaN;
      pw[k] = sw;
    }
    const flank: number[] = [];
    for (let k = 0; k < n; k++) {
      const d = Math.abs(a0 + k - s.at);
      if (d >= win / 2 && Number.isFinite(p[k])) flank.push(p[k]);
    }
    if (flank.length < 4) continue;
    flank.sort((x, y) => x - y);
    const P = flank[flank.length >> 1];
    let pk = -1;
    let best = 0;
    for (let k = 0; k < n; k++) {
      if (Math.abs(a0 + k - s.at) > near || !Number.isFinite(p[k])) continue;
      if (Math.abs(p[k] - P) > best) {
        best = Math.abs(p[k] - P);
        pk = k;
      }
    }
    if (pk < 0) continue;
    const sign = p[pk] > P ? 1 : -1;
    const tm = thinMeasure(p, p, pw, pk, P, sign, 0);
    const mean = (tm.mean - P) / (1 + P / 100);
    const widthPx = tm.width;
    const lo = Math.max(0, Math.floor(tm.centre - tm.width / 2 + 0.5));
    const hi = Math.min(n - 1, Math.ceil(tm.centre + tm.width / 2 - 0.5));
    let sw = 0;
    for (let k = lo; k <= hi; k++) sw += pw[k];
    sw *= tm.width / Math.max(1, hi - lo + 1);
    const z = Math.abs(mean) / (noise / Math.sqrt(sw));
    if (z < opts.thresholdSigma || Math.abs(mean) < fitFloor) continue;
    const area = widthPx * nL * mm * mm;
    const c = a0 + tm.centre;
    out.push({
      kind: 'seam',
      polarity: sign > 0 ? 'bright' : 'dark',
      cx: vertical ? c : (w - 1) / 2,
      cy: vertical ? (h - 1) / 2 : c,
      bbox: vertical ? [a0 + lo, 0, a0 + hi + 1, h] : [0, a0 + lo, w, a0 + hi + 1],
      areaMm2: area,
      contrastPct: mean,
      peakContrastPct: (tm.peak - P) / (1 + P / 100),
      semu: semu(mean, area, opts.semuConstants),
      detail: {
        form: 'line',
        axis: s.axis,
        seam: vertical ? `x=${Math.round(((s.at + 0.5) / w) * cols)}/${cols}` : `y=${Math.round(((s.at + 0.5) / h) * rows)}/${rows}`,
        widthMm: round(widthPx * mm, 2),
        significanceSigma: round(Math.min(z, 1e6), 1),
      },
      members: [],
    });
  }

  const onSeam = (f: Finding): boolean => {
    if (f.kind !== 'line' && f.kind !== 'band') return false;
    for (const s of seamPos) {
      if (f.detail.axis !== s.axis) continue;
      const c = s.axis === 'vertical' ? f.cx : f.cy;
      if (Math.abs(c - s.at) <= win / 2) return true;
    }
    return false;
  };
  return { findings: out, onSeam };
}
