// Straight panel edges photographed through a lens with barrel distortion come out as arcs. The panel
// finder measures how far they bow (so the mura analysis can leave that strip out), and the edge-width
// measures (the blur gate, the finder's edge spread) follow the arc, as the slanted-edge method's
// polynomial edge fit does (ISO 12233 e-SFR; from memory), so that a bowed sharp edge does not read as
// blurred. Distortion model: the one-parameter radial polynomial p_u = c + (p_d - c)(1 + k r_d²), r_d in
// half-diagonals (Brown's radial model, first term; common practice).
import { describe, expect, it } from 'vitest';
import { findPanel } from '../../lib/geometry/index.js';
import { edgeWidthPx } from '../../lib/pipeline/quality.js';
import type { Corners, Plane, Point } from '../../lib/types.js';

const W = 1200;
const H = 900;
const CX = (W - 1) / 2;
const CY = (H - 1) / 2;
const HALF = Math.hypot(W, H) / 2;
// the undistorted active area (screen-clockwise), filling most of the frame
const PANEL: Corners = [
  [130, 150],
  [1080, 120],
  [1090, 770],
  [120, 790],
];

function undistort(x: number, y: number, k: number): Point {
  const dx = (x - CX) / HALF;
  const dy = (y - CY) / HALF;
  const f = 1 + k * (dx * dx + dy * dy);
  return [CX + dx * f * HALF, CY + dy * f * HALF];
}

/** Distorted image point of an undistorted one (Newton on the radius). */
function distort(p: Point, k: number): Point {
  const ux = (p[0] - CX) / HALF;
  const uy = (p[1] - CY) / HALF;
  const ru = Math.hypot(ux, uy);
  let r = ru;
  for (let i = 0; i < 30; i++) r -= (r * (1 + k * r * r) - ru) / (1 + 3 * k * r * r);
  const s = ru > 0 ? r / ru : 1;
  return [CX + ux * s * HALF, CY + uy * s * HALF];
}

function inside(q: Corners, x: number, y: number): boolean {
  for (let i = 0; i < 4; i++) {
    const a = q[i];
    const b = q[(i + 1) % 4];
    if ((b[0] - a[0]) * (y - a[1]) - (b[1] - a[1]) * (x - a[0]) < 0) return false;
  }
  return true;
}

/** A lit panel (0.6) on a dark bezel (0.02), each pixel the mean of 6 x 6 samples. */
function render(k: number): Plane {
  const data = new Float32Array(W * H);
  const S = 6;
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      let n = 0;
      for (let j = 0; j < S; j++) {
        for (let i = 0; i < S; i++) {
          const [ux, uy] = undistort(x - 0.5 + (i + 0.5) / S, y - 0.5 + (j + 0.5) / S, k);
          if (inside(PANEL, ux, uy)) n++;
        }
      }
      const f = n / (S * S);
      data[y * W + x] = 0.02 + 0.58 * f;
    }
  }
  return { width: W, height: H, data };
}

/** Largest sagitta of the distorted edges: each edge's farthest point from the chord of its ends. */
function chordSagitta(k: number): number {
  let worst = 0;
  for (let e = 0; e < 4; e++) {
    const a = PANEL[e];
    const b = PANEL[(e + 1) % 4];
    const da = distort(a, k);
    const db = distort(b, k);
    const len = Math.hypot(db[0] - da[0], db[1] - da[1]);
    for (let t = 0; t <= 1; t += 0.01) {
      const p = distort([a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])], k);
      const d = Math.abs((db[0] - da[0]) * (p[1] - da[1]) - (db[1] - da[1]) * (p[0] - da[0])) / len;
      worst = Math.max(worst, d);
    }
  }
  return worst;
}

describe('bowed panel edges', () => {
  const straight = render(0);
  // k = 0.03: about 1.5 % barrel distortion at the frame's corners
  const K = 0.03;
  const bowed = render(K);
  const sagitta = chordSagitta(K);

  it('measures how far the edges bow', () => {
    expect(sagitta).toBeGreaterThan(3);
    const s = findPanel(straight, { pattern: 'white' });
    const b = findPanel(bowed, { pattern: 'white' });
    expect(s.edgeBowPx).toBeLessThan(0.1);
    // the arc is measured over the edge points the finder used, most but not all of each edge: at most
    // the chord's sagitta, and more than half of it
    expect(b.edgeBowPx).toBeGreaterThan(0.5 * sagitta);
    expect(b.edgeBowPx).toBeLessThan(1.05 * sagitta);
  });

  it('does not read a sharp bowed edge as blurred', () => {
    const s = findPanel(straight, { pattern: 'white' });
    const b = findPanel(bowed, { pattern: 'white' });
    // the finder's edge spread: the same sharp edge (an area-sampled step) either way
    expect(Math.abs(b.edgeWidthPx - s.edgeWidthPx)).toBeLessThan(0.3);
    // the blur gate's width, per side
    for (let i = 0; i < 4; i++) {
      const ws = edgeWidthPx(straight, s.corners[i], s.corners[(i + 1) % 4]);
      const wb = edgeWidthPx(bowed, b.corners[i], b.corners[(i + 1) % 4]);
      expect(ws).not.toBeNull();
      expect(wb).not.toBeNull();
      expect(Math.abs(wb! - ws!)).toBeLessThan(0.3);
    }
  });
});
