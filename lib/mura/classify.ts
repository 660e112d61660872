// Kind of a found feature from its shape, place and the field it shows on.
//
//  - glow (black fields only): bright, its peak on a panel edge (edge glow, "bleed") or in a corner
//    where two edges meet (corner glow);
//  - line: elongated (length >= 5 x width) and narrower than lineMaxWidthMm;
//  - band: elongated (>= 3 x) along an axis, spanning at least bandMinSpan of the panel that way, or
//    5 x and more along an axis whatever its span (a streak);
//  - otherwise round: cloud when its half-peak region is at least cloudMinMm across (equivalent
//    diameter), spot when smaller.

import type { BlobKind } from '../types.js';
import type { Axis, Ctx, Found } from './context.js';

export interface Kind {
  kind: BlobKind;
  detail: Record<string, string | number>;
}

export type Edge = 'top' | 'bottom' | 'left' | 'right';

/** Length over width from which a feature along an axis is a band (a line when thin) whatever its span. */
const SHORT_BAND_ELONGATION = 5;

export function classify(ctx: Ctx, f: Found): Kind {
  const o = ctx.opts;
  const glow = ctx.black && f.sign > 0 ? glowOf(ctx, f) : null;
  if (glow) return glow;

  const elong = f.lengthMm / Math.max(f.widthMm, 1e-9);
  const axis = f.axis ?? axisOf(f.angleDeg);
  if (axis) {
    const span = axis === 'vertical' ? (f.bbox[3] - f.bbox[1]) / ctx.h : (f.bbox[2] - f.bbox[0]) / ctx.w;
    const thin = f.widthMm < o.lineMaxWidthMm;
    if (elong >= 3 && span >= o.bandMinSpan) {
      return { kind: thin ? 'line' : 'band', detail: { axis, widthMm: round(f.widthMm, 2), lengthMm: round(f.lengthMm, 1) } };
    }
    // a streak along an axis: five times as long as wide is no cloud or spot, however short (a stretch
    // of 10 x 110 mm on a 400 mm panel had been called a spot 34 mm across)
    if (elong >= SHORT_BAND_ELONGATION) {
      return { kind: thin ? 'line' : 'band', detail: { axis, widthMm: round(f.widthMm, 2), lengthMm: round(f.lengthMm, 1) } };
    }
  }
  const diameter = 2 * Math.sqrt(f.areaMm2 / Math.PI);
  return { kind: diameter >= o.cloudMinMm ? 'cloud' : 'spot', detail: { diameterMm: round(diameter, 1) } };
}

/** 'vertical' / 'horizontal' when the long axis lies within 15 degrees of an axis. */
function axisOf(angleDeg: number): Axis | null {
  const a = Math.abs(angleDeg);
  if (a <= 15) return 'horizontal';
  if (a >= 75) return 'vertical';
  return null;
}

function glowOf(ctx: Ctx, f: Found): Kind | null {
  const [x0, y0, x1, y1] = f.bbox;
  const ex = Math.max(1, x1 - x0);
  const ey = Math.max(1, y1 - y0);
  // glow is brightest at the edge it creeps in from: the region touches the edge and is there at
  // least as bright as its own mean (a cloud that merely reaches an edge is dimmer at its rim)
  const near: Record<Edge, boolean> = {
    left: f.touch.left >= 2 && f.sign * f.edgeContrast.left >= f.sign * f.contrastPct,
    right: f.touch.right >= 2 && f.sign * f.edgeContrast.right >= f.sign * f.contrastPct,
    top: f.touch.top >= 2 && f.sign * f.edgeContrast.top >= f.sign * f.contrastPct,
    bottom: f.touch.bottom >= 2 && f.sign * f.edgeContrast.bottom >= f.sign * f.contrastPct,
  };
  const corners: [Edge, Edge, string][] = [
    ['top', 'left', 'top-left'],
    ['top', 'right', 'top-right'],
    ['bottom', 'right', 'bottom-right'],
    ['bottom', 'left', 'bottom-left'],
  ];
  for (const [a, b, name] of corners) {
    if (!(near[a] && near[b])) continue;
    // a corner glow stays in its corner: less than half of either edge
    if (ex < 0.5 * ctx.w && ey < 0.5 * ctx.h) {
      return { kind: 'corner-glow', detail: { corner: name, reachMm: round(Math.max(ex, ey) * ctx.mmPerPx, 1) } };
    }
  }
  let best: Edge | null = null;
  let bestTouch = 0;
  for (const e of ['top', 'bottom', 'left', 'right'] as const) {
    if (near[e] && f.touch[e] > bestTouch) {
      best = e;
      bestTouch = f.touch[e];
    }
  }
  if (!best) return null;
  const depth = (best === 'left' || best === 'right' ? ex : ey) * ctx.mmPerPx;
  const along = (best === 'left' || best === 'right' ? ey : ex) * ctx.mmPerPx;
  const at = best === 'left' || best === 'right' ? (f.cy + 0.5) / ctx.h : (f.cx + 0.5) / ctx.w;
  return { kind: 'edge-glow', detail: { edge: best, depthMm: round(depth, 1), lengthMm: round(along, 1), at: round(at, 3) } };
}

export function round(x: number, d: number): number {
  const k = 10 ** d;
  return Math.round(x * k) / k;
}
