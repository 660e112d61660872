// Vector plots drawn straight into the PDF: line plots (profiles) and histograms (lot distributions).
// Axes always carry their quantity and unit.

import { type Doc, INK, MUTED, setStyle, textAt, VERDICT_COLOUR } from './doc.js';

export interface Box {
  x: number;
  y: number;
  w: number;
  h: number;
}

/** Ticks at 1, 2 or 5 times a power of ten, covering [lo, hi]. */
export function niceTicks(lo: number, hi: number, target = 5): { lo: number; hi: number; step: number; ticks: number[] } {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) throw new Error('niceTicks needs finite limits');
  if (hi < lo) [lo, hi] = [hi, lo];
  if (hi === lo) {
    const d = lo === 0 ? 1 : Math.abs(lo) * 0.05;
    lo -= d;
    hi += d;
  }
  const raw = (hi - lo) / Math.max(1, target);
  const p = 10 ** Math.floor(Math.log10(raw));
  const m = raw / p;
  const step = (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
  const nlo = Math.floor(lo / step + 1e-9) * step;
  const nhi = Math.ceil(hi / step - 1e-9) * step;
  const ticks: number[] = [];
  for (let i = 0; nlo + i * step <= nhi + step * 1e-6; i++) ticks.push(roundTo(nlo + i * step, step));
  return { lo: nlo, hi: nhi, step, ticks };
}

function roundTo(v: number, step: number): number {
  const d = Math.max(0, -Math.floor(Math.log10(step)) + 1);
  return Number(v.toFixed(Math.min(12, d)));
}

/** Label for a tick value with just enough decimals for the step. */
export function tickLabel(v: number, step: number): string {
  const d = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  const s = v.toFixed(Math.min(6, d));
  return /^-0\.?0*$/.test(s) ? s.slice(1) : s;
}

export interface Series {
  x: ArrayLike<number>;
  y: ArrayLike<number>;
  colour: string;
  width?: number;
}

export interface LinePlotSpec {
  title?: string;
  xLabel: string;
  yLabel: string;
  xRange: [number, number];
  yRange: [number, number];
  series: Series[];
  markers?: Array<{ x: number; y: number; label: string }>;
  refLines?: Array<{ y: number; label?: string }>;
}

const AXIS_SIZE = 7;

function drawYLabel(doc: Doc, label: string, x: number, yMid: number, length: number): void {
  doc.save();
  doc.rotate(-90, { origin: [x, yMid] });
  textAt(doc, label, x - length / 2, yMid - 4, length, { size: AXIS_SIZE, colour: MUTED, align: 'center' });
  doc.restore();
}

/** Inner plotting area of a box once room is left for the title, tick labels and axis labels. */
export function plotArea(box: Box, hasTitle: boolean): Box {
  const left = 44;
  const bottom = 26;
  const top = hasTitle ? 15 : 4;
  return { x: box.x + left, y: box.y + top, w: box.w - left - 6, h: box.h - top - bottom };
}

export function drawLinePlot(doc: Doc, box: Box, spec: LinePlotSpec): void {
  const a = plotArea(box, !!spec.title);
  if (spec.title) textAt(doc, spec.title, box.x, box.y, box.w, { font: 'Sans-Bold', size: 8 });
  const xt = niceTicks(spec.xRange[0], spec.xRange[1], 6);
  const yt = niceTicks(spec.yRange[0], spec.yRange[1], 5);
  const [x0, x1] = spec.xRange;
  const y0 = yt.lo;
  const y1 = yt.hi;
  const px = (x: number): number => a.x + ((x - x0) / (x1 - x0 || 1)) * a.w;
  const py = (y: number): number => a.y + a.h - ((y - y0) / (y1 - y0 || 1)) * a.h;

  doc.save();
  // grid and ticks
  doc.lineWidth(0.3).strokeColor('#dddddd');
  for (const t of yt.ticks) doc.moveTo(a.x, py(t)).lineTo(a.x + a.w, py(t)).stroke();
  for (const t of xt.ticks) if (t >= x0 - 1e-9 && t <= x1 + 1e-9) doc.moveTo(px(t), a.y).lineTo(px(t), a.y + a.h).stroke();
  doc.rect(a.x, a.y, a.w, a.h).lineWidth(0.6).strokeColor(INK).stroke();
  for (const t of yt.ticks) {
    textAt(doc, tickLabel(t, yt.step), a.x - 34, py(t) - 3.5, 31, { size: AXIS_SIZE - 0.5, align: 'right' });
  }
  for (const t of xt.ticks) {
    if (t < x0 - 1e-9 || t > x1 + 1e-9) continue;
    textAt(doc, tickLabel(t, xt.step), px(t) - 20, a.y + a.h + 2.5, 40, { size: AXIS_SIZE - 0.5, align: 'center' });
  }
  textAt(doc, spec.xLabel, a.x, a.y + a.h + 12, a.w, { size: AXIS_SIZE, colour: MUTED, align: 'center' });
  drawYLabel(doc, spec.yLabel, box.x + 4, a.y + a.h / 2, a.h + 20);

  // reference lines
  for (const r of spec.refLines ?? []) {
    if (r.y < y0 || r.y > y1) continue;
    doc.moveTo(a.x, py(r.y)).lineTo(a.x + a.w, py(r.y)).lineWidth(0.6).dash(3, { space: 2 }).strokeColor(MUTED).stroke();
    doc.undash();
    if (r.label) textAt(doc, r.label, a.x + a.w - 80, py(r.y) - 8.5, 78, { size: 6, colour: MUTED, align: 'right' });
  }

  // series, clipped to the plot area; gaps where values are missing
  doc.save();
  doc.rect(a.x, a.y, a.w, a.h).clip();
  for (const s of spec.series) {
    let pen = false;
    for (let i = 0; i < s.x.length; i++) {
      const x = s.x[i]!;
      const y = s.y[i]!;
      if (!Number.isFinite(x) || !Number.isFinite(y)) {
        pen = false;
        continue;
      }
      if (pen) doc.lineTo(px(x), py(y));
      else doc.moveTo(px(x), py(y));
      pen = true;
    }
    doc.lineWidth(s.width ?? 0.9).lineJoin('round').strokeColor(s.colour).stroke();
  }
  doc.restore();

  for (const m of spec.markers ?? []) {
    if (!Number.isFinite(m.y) || m.y < y0 || m.y > y1) continue;
    doc.circle(px(m.x), py(m.y), 2.2).fillColor('#ffffff').fill();
    doc.circle(px(m.x), py(m.y), 2.2).lineWidth(0.9).strokeColor(INK).stroke();
    textAt(doc, m.label, px(m.x) - 15, py(m.y) - 11, 30, { size: 6, align: 'center' });
  }
  doc.restore();
}

export interface HistogramSpec {
  title: string;
  subtitle?: string;
  xLabel: string;
  values: number[];
  limit: number | null;
  limitKind: 'max' | 'min';
  limitLabel?: string;
}

function beyond(v: number, limit: number | null, kind: 'max' | 'min'): boolean {
  if (limit === null) return false;
  return kind === 'max' ? v > limit : v < limit;
}

/** Bin edges of equal width, one edge on the limit so no bar straddles it. */
export function histogramBins(
  values: number[],
  limit: number | null,
  limitKind: 'max' | 'min' = 'max',
): { edges: number[]; counts: number[] } {
  const finite = values.filter(Number.isFinite);
  let lo = Math.min(...finite, ...(limit !== null ? [limit] : []));
  let hi = Math.max(...finite, ...(limit !== null ? [limit] : []));
  if (!Number.isFinite(lo)) {
    lo = 0;
    hi = 1;
  }
  if (hi === lo) {
    const d = lo === 0 ? 1 : Math.abs(lo) * 0.1;
    lo -= d;
    hi += d;
  }
  const k = Math.max(6, Math.min(24, Math.ceil(Math.sqrt(finite.length)) + 3));
  const w = niceTicks(0, (hi - lo) / k, 1).step;
  const anchor = limit ?? 0;
  const start = anchor - Math.ceil((anchor - lo) / w + 1e-9) * w;
  const edges: number[] = [];
  for (let e = start; edges.length < 200; e += w) {
    edges.push(roundTo(e, w));
    if (e > hi - 1e-12 && edges.length >= 2) break;
  }
  const counts = new Array<number>(edges.length - 1).fill(0);
  const limitEdge = limit !== null ? Math.round((limit - start) / w) : -1;
  for (const v of finite) {
    let i = Math.floor((v - start) / w + 1e-9);
    // a value exactly on the limit is inside it, so it goes in the bar on the inside
    if (limit !== null && Math.abs(v - limit) <= 1e-9 * Math.max(1, Math.abs(limit))) {
      i = limitKind === 'max' ? limitEdge - 1 : limitEdge;
    }
    i = Math.max(0, Math.min(counts.length - 1, i));
    counts[i]!++;
  }
  return { edges, counts };
}

export function drawHistogram(doc: Doc, box: Box, spec: HistogramSpec): void {
  textAt(doc, spec.title, box.x, box.y, box.w, { font: 'Sans-Bold', size: 8 });
  let top = box.y + 11;
  if (spec.subtitle) {
    textAt(doc, spec.subtitle, box.x, top, box.w, { size: 6.5, colour: MUTED });
    top += 9;
  }
  const a = plotArea({ x: box.x, y: top, w: box.w, h: box.y + box.h - top }, false);
  a.h -= 6; // room for the rug
  const { edges, counts } = histogramBins(spec.values, spec.limit, spec.limitKind);
  const x0 = edges[0]!;
  const x1 = edges[edges.length - 1]!;
  const maxCount = Math.max(1, ...counts);
  const yt = niceTicks(0, maxCount, Math.min(5, maxCount));
  const yticks = yt.ticks.filter((t) => Number.isInteger(t));
  const px = (x: number): number => a.x + ((x - x0) / (x1 - x0)) * a.w;
  const py = (c: number): number => a.y + a.h - (c / yt.hi) * a.h;
  const fail = VERDICT_COLOUR.fail;

  doc.save();
  doc.lineWidth(0.3).strokeColor('#dddddd');
  for (const t of yticks) doc.moveTo(a.x, py(t)).lineTo(a.x + a.w, py(t)).stroke();
  for (const t of yticks) textAt(doc, String(t), a.x - 34, py(t) - 3.5, 31, { size: AXIS_SIZE - 0.5, align: 'right' });
  drawYLabel(doc, 'panels', box.x + 4, a.y + a.h / 2, a.h);

  counts.forEach((c, i) => {
    if (c === 0) return;
    const l = px(edges[i]!);
    const r = px(edges[i + 1]!);
    const mid = (edges[i]! + edges[i + 1]!) / 2;
    const out = beyond(mid, spec.limit, spec.limitKind);
    doc.rect(l + 0.4, py(c), r - l - 0.8, a.y + a.h - py(c)).fillColor(out ? '#f3c7a8' : '#9fb9d6').fill();
    if (out) {
      // hatching, so bars beyond the limit read without colour
      doc.save();
      doc.rect(l + 0.4, py(c), r - l - 0.8, a.y + a.h - py(c)).clip();
      for (let d = -a.h; d < r - l + a.h; d += 4) {
        doc.moveTo(l + d, a.y + a.h).lineTo(l + d + a.h, a.y).lineWidth(0.6).strokeColor(fail).stroke();
      }
      doc.restore();
    }
    doc.rect(l + 0.4, py(c), r - l - 0.8, a.y + a.h - py(c)).lineWidth(0.5).strokeColor(INK).stroke();
  });
  doc.moveTo(a.x, a.y + a.h).lineTo(a.x + a.w, a.y + a.h).lineWidth(0.6).strokeColor(INK).stroke();
  doc.moveTo(a.x, a.y).lineTo(a.x, a.y + a.h).lineWidth(0.6).strokeColor(INK).stroke();

  // rug: one tick per panel
  for (const v of spec.values) {
    if (!Number.isFinite(v)) continue;
    const out = beyond(v, spec.limit, spec.limitKind);
    doc.moveTo(px(v), a.y + a.h + 1).lineTo(px(v), a.y + a.h + (out ? 6 : 4)).lineWidth(out ? 0.9 : 0.5).strokeColor(out ? fail : INK).stroke();
  }

  const xt = niceTicks(x0, x1, 6);
  for (const t of xt.ticks) {
    if (t < x0 - 1e-9 || t > x1 + 1e-9) continue;
    textAt(doc, tickLabel(t, xt.step), px(t) - 20, a.y + a.h + 7, 40, { size: AXIS_SIZE - 0.5, align: 'center' });
  }
  textAt(doc, spec.xLabel, a.x, a.y + a.h + 16, a.w, { size: AXIS_SIZE, colour: MUTED, align: 'center' });

  if (spec.limit !== null) {
    const lx = px(spec.limit);
    doc.moveTo(lx, a.y - 2).lineTo(lx, a.y + a.h).lineWidth(1.1).dash(4, { space: 2 }).strokeColor(INK).stroke();
    doc.undash();
    const label = spec.limitLabel ?? `limit ${spec.limit}`;
    setStyle(doc, { size: 6.5 });
    const w = doc.widthOfString(label) + 4;
    const onRight = lx + w < a.x + a.w;
    doc.rect(onRight ? lx + 2 : lx - w - 2, a.y, w, 9).fillColor('#ffffff').fill();
    textAt(doc, label, onRight ? lx + 4 : lx - w, a.y + 1, w, { size: 6.5 });
  }
  doc.restore();
}
