// Hot spots of a direct-lit backlight: a periodic array of bright zones, reported as one finding with
// its pitch instead of dozens of spots.
//
// Bright spots are tested for a common rectangular lattice: the pitch along each axis is the median
// distance to the nearest neighbour in that direction, the lattice origin the circular mean of the
// positions modulo the pitch, and a spot belongs to the array when it lies within a fifth of a pitch of
// a lattice node. Dark spots on the half-pitch offset lattice (the gaps between the zones) are folded
// into the same finding. The array's area and SEMU are those of one typical zone (median area, mean
// contrast): the eye judges each zone, not their sum.

import type { BlobKind } from '../types.js';
import { round } from './classify.js';
import type { Ctx, Found } from './context.js';
import type { MuraOptions } from './options.js';
import { semu } from './semu.js';

export interface Finding {
  kind: BlobKind;
  polarity: 'bright' | 'dark';
  /** centre, working px */
  cx: number;
  cy: number;
  /** working px, [x0, y0, x1, y1), x1/y1 exclusive */
  bbox: [number, number, number, number];
  areaMm2: number;
  contrastPct: number;
  peakContrastPct: number;
  semu: number;
  detail: Record<string, string | number>;
  members: Found[];
}

function medianOf(a: number[]): number {
  const s = [...a].sort((p, q) => p - q);
  return s.length % 2 ? s[s.length >> 1] : 0.5 * (s[s.length / 2 - 1] + s[s.length / 2]);
}

/** Nearest-neighbour distance along one axis (the other offset under a quarter of it), per spot. */
function axisPitches(pts: [number, number][], axis: 0 | 1): number[] {
  const out: number[] = [];
  const o = 1 - axis;
  for (let i = 0; i < pts.length; i++) {
    let best = Infinity;
    for (let j = 0; j < pts.length; j++) {
      if (i === j) continue;
      const d = Math.abs(pts[j][axis] - pts[i][axis]);
      const e = Math.abs(pts[j][o] - pts[i][o]);
      if (d > 0 && e < 0.25 * d && d < best) best = d;
    }
    if (Number.isFinite(best)) out.push(best);
  }
  return out;
}

function circularOrigin(vals: number[], pitch: number): number {
  let s = 0;
  let c = 0;
  for (const v of vals) {
    const a = (2 * Math.PI * v) / pitch;
    s += Math.sin(a);
    c += Math.cos(a);
  }
  const a = Math.atan2(s, c);
  return ((a / (2 * Math.PI)) * pitch + pitch) % pitch;
}

function offLattice(v: number, origin: number, pitch: number): number {
  const r = (((v - origin) % pitch) + pitch) % pitch;
  return Math.min(r, pitch - r);
}

export function groupHotspots(ctx: Ctx, singles: Finding[], opts: MuraOptions): Finding[] {
  const bright = singles.filter((f) => f.polarity === 'bright' && (f.kind === 'spot' || f.kind === 'cloud'));
  // zones cut by a panel edge are smaller and their centroids shift inwards: they join the array but
  // do not set its pitch, origin or typical zone
  // (against the panel's data edges, which lie a few pixels inside the raster: its border is left out)
  let x0 = ctx.w;
  let x1 = -1;
  let y0 = ctx.h;
  let y1 = -1;
  for (let y = 0; y < ctx.h; y++) {
    if (ctx.edges.rowFirst[y] < 0) continue;
    x0 = Math.min(x0, ctx.edges.rowFirst[y]);
    x1 = Math.max(x1, ctx.edges.rowLast[y]);
    y0 = Math.min(y0, y);
    y1 = Math.max(y1, y);
  }
  const cut = (f: Finding): boolean => f.bbox[0] <= x0 + 1 || f.bbox[1] <= y0 + 1 || f.bbox[2] >= x1 - 1 || f.bbox[3] >= y1 - 1;
  const whole = bright.filter((f) => !cut(f));
  if (whole.length < opts.hotspotMinCount) return singles;
  const mm = ctx.mmPerPx;
  const pts = whole.map((f) => [f.cx * mm, f.cy * mm] as [number, number]);
  const px = axisPitches(pts, 0);
  const py = axisPitches(pts, 1);
  if (px.length < whole.length / 2 || py.length < whole.length / 2) return singles;
  const pitchX = medianOf(px);
  const pitchY = medianOf(py);
  // the pitch must be consistent: most nearest-neighbour distances within 20 % of it
  const consistent = (d: number[], p: number): boolean => d.filter((x) => Math.abs(x - p) <= 0.2 * p).length >= 0.6 * d.length;
  if (!consistent(px, pitchX) || !consistent(py, pitchY)) return singles;
  const ox = circularOrigin(pts.map((p) => p[0]), pitchX);
  const oy = circularOrigin(pts.map((p) => p[1]), pitchY);
  const onNode = (x: number, y: number, shift: number, tol: number): boolean =>
    offLattice(x, ox + shift * pitchX, pitchX) <= tol * pitchX && offLattice(y, oy + shift * pitchY, pitchY) <= tol * pitchY;
  const members = whole.filter((f) => onNode(f.cx * mm, f.cy * mm, 0, 0.2));
  if (members.length < opts.hotspotMinCount) return singles;
  // zones of one array look alike: keep those within a factor 4 of the median area
  const medArea = medianOf(members.map((f) => f.areaMm2));
  const zones = members.filter((f) => f.areaMm2 <= 4 * medArea && f.areaMm2 >= medArea / 4);
  if (zones.length < opts.hotspotMinCount) return singles;
  // (a zone whose centre lies about on the edge keeps a sliver along it: classified a line, or a short
  // band when wider, on its own)
  const edgeCandidates = singles.filter((f) => f.polarity === 'bright' && (f.kind === 'spot' || f.kind === 'cloud' || f.kind === 'line' || f.kind === 'band'));
  const edgeZones = edgeCandidates.filter((f) => cut(f) && f.areaMm2 <= 4 * medArea && onNode(f.cx * mm, f.cy * mm, 0, 0.4));
  const gaps = singles.filter((f) => f.polarity === 'dark' && f.kind === 'spot' && onNode(f.cx * mm, f.cy * mm, 0.5, 0.25));
  const inArray = new Set<Finding>([...zones, ...edgeZones, ...gaps]);

  const area = medianOf(zones.map((f) => f.areaMm2));
  const contrast = zones.reduce((s, f) => s + f.contrastPct, 0) / zones.length;
  const peak = zones.reduce((m, f) => Math.max(m, f.peakContrastPct), -Infinity);
  const bbox: [number, number, number, number] = [Infinity, Infinity, -Infinity, -Infinity];
  let cx = 0;
  let cy = 0;
  for (const f of [...zones, ...edgeZones]) {
    bbox[0] = Math.min(bbox[0], f.bbox[0]);
    bbox[1] = Math.min(bbox[1], f.bbox[1]);
    bbox[2] = Math.max(bbox[2], f.bbox[2]);
    bbox[3] = Math.max(bbox[3], f.bbox[3]);
    cx += f.cx / (zones.length + edgeZones.length);
    cy += f.cy / (zones.length + edgeZones.length);
  }
  const array: Finding = {
    kind: 'hotspot-array',
    polarity: 'bright',
    cx,
    cy,
    bbox,
    areaMm2: area,
    contrastPct: contrast,
    peakContrastPct: peak,
    semu: semu(contrast, area, opts.semuConstants),
    detail: {
      pitchUMm: round(pitchX, 1),
      pitchVMm: round(pitchY, 1),
      zones: zones.length + edgeZones.length,
      darkGaps: gaps.length,
      zoneAreaMm2: round(area, 1),
    },
    members: [...zones, ...edgeZones].flatMap((f) => f.members),
  };
  return [array, ...singles.filter((f) => !inArray.has(f))];
}
