// Plane-to-plane projective maps (3x3 homographies).
//
// solveHomography is the normalised direct linear transform: each point set is moved so its centroid
// is at the origin and its mean distance from it is sqrt(2); every correspondence gives two rows of a
// 2n x 9 matrix A; h is the right singular vector of A for the smallest singular value; the result is
// mapped back through the two normalising similarities (Hartley & Zisserman, Multiple View Geometry,
// 2nd ed., ch. 4).

import { Matrix, SVD } from 'ml-matrix';
import { EvenfieldError } from '../errors.js';
import type { Corners, Homography, Point } from '../types.js';

/** Relative size below which a singular value counts as zero when judging degeneracy. */
const DEGENERACY_TOLERANCE = 1e-9;

interface Similarity {
  /** x' = s (x - cx) */
  s: number;
  cx: number;
  cy: number;
}

function normalisingSimilarity(pts: readonly Point[], which: string): Similarity {
  let cx = 0;
  let cy = 0;
  for (const [x, y] of pts) {
    if (!Number.isFinite(x) || !Number.isFinite(y)) {
      throw new EvenfieldError('internal', `homography: ${which} point is not finite`);
    }
    cx += x;
    cy += y;
  }
  cx /= pts.length;
  cy /= pts.length;
  let meanDist = 0;
  for (const [x, y] of pts) meanDist += Math.hypot(x - cx, y - cy);
  meanDist /= pts.length;
  if (!(meanDist > 0)) {
    throw new EvenfieldError('internal', `homography: all ${which} points coincide`);
  }
  return { s: Math.SQRT2 / meanDist, cx, cy };
}

/**
 * True when the points (after centring) span less than two dimensions, i.e. are collinear or coincide.
 * Uses the ratio of the two singular values of the centred 2 x n scatter.
 */
function isCollinear(pts: readonly Point[], sim: Similarity): boolean {
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (const [x, y] of pts) {
    const u = sim.s * (x - sim.cx);
    const v = sim.s * (y - sim.cy);
    sxx += u * u;
    sxy += u * v;
    syy += v * v;
  }
  // eigenvalues of [[sxx, sxy], [sxy, syy]]
  const tr = sxx + syy;
  const det = sxx * syy - sxy * sxy;
  const disc = Math.sqrt(Math.max(0, (tr * tr) / 4 - det));
  const lmax = tr / 2 + disc;
  const lmin = tr / 2 - disc;
  return lmin <= DEGENERACY_TOLERANCE * lmax;
}

/** True if three of the points are (nearly) collinear; with exactly four points this makes the map singular. */
function hasCollinearTriple(pts: readonly Point[], sim: Similarity): boolean {
  const n = pts.length;
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) {
      for (let k = j + 1; k < n; k++) {
        const ax = sim.s * (pts[j][0] - pts[i][0]);
        const ay = sim.s * (pts[j][1] - pts[i][1]);
        const bx = sim.s * (pts[k][0] - pts[i][0]);
        const by = sim.s * (pts[k][1] - pts[i][1]);
        const cross = Math.abs(ax * by - ay * bx);
        const scale = Math.max(ax * ax + ay * ay, bx * bx + by * by);
        if (cross <= 1e-7 * scale) return true;
      }
    }
  }
  return false;
}

/**
 * Homography H (row-major, H[8] scaled to 1 when possible) with dst ~ H * src, from n >= 4 point pairs.
 * Throws EvenfieldError('internal') on degenerate input: fewer than 4 pairs, non-finite values,
 * coincident or collinear points, three collinear points among exactly four, or an underdetermined system.
 */
export function solveHomography(src: readonly Point[], dst: readonly Point[]): Homography {
  const n = src.length;
  if (n !== dst.length) {
    throw new EvenfieldError('internal', `homography: ${n} source points but ${dst.length} destination points`);
  }
  if (n < 4) throw new EvenfieldError('internal', `homography: need at least 4 point pairs, got ${n}`);
  const ts = normalisingSimilarity(src, 'source');
  const td = normalisingSimilarity(dst, 'destination');
  if (isCollinear(src, ts) || isCollinear(dst, td)) {
    throw new EvenfieldError('internal', 'homography: points are collinear');
  }
  if (n === 4 && (hasCollinearTriple(src, ts) || hasCollinearTriple(dst, td))) {
    throw new EvenfieldError('internal', 'homography: three of the four points are collinear');
  }

  // Pad with zero rows to at least 9 rows so the SVD returns the full 9x9 right singular basis.
  const rows = Math.max(2 * n, 9);
  const A = Matrix.zeros(rows, 9);
  for (let i = 0; i < n; i++) {
    const x = ts.s * (src[i][0] - ts.cx);
    const y = ts.s * (src[i][1] - ts.cy);
    const xp = td.s * (dst[i][0] - td.cx);
    const yp = td.s * (dst[i][1] - td.cy);
    const r0 = 2 * i;
    const r1 = r0 + 1;
    // [0ᵀ, -w' xᵀ, y' xᵀ]
    A.set(r0, 3, -x);
    A.set(r0, 4, -y);
    A.set(r0, 5, -1);
    A.set(r0, 6, yp * x);
    A.set(r0, 7, yp * y);
    A.set(r0, 8, yp);
    // [w' xᵀ, 0ᵀ, -x' xᵀ]
    A.set(r1, 0, x);
    A.set(r1, 1, y);
    A.set(r1, 2, 1);
    A.set(r1, 6, -xp * x);
    A.set(r1, 7, -xp * y);
    A.set(r1, 8, -xp);
  }
  const svd = new SVD(A, { computeLeftSingularVectors: false, computeRightSingularVectors: true });
  const sv = svd.diagonal;
  const order = sv.map((v, i) => [v, i] as const).sort((a, b) => a[0] - b[0]);
  const smallest = order[0][1];
  const secondSmallest = order[1][0];
  const largest = order[order.length - 1][0];
  if (secondSmallest <= DEGENERACY_TOLERANCE * largest) {
    throw new EvenfieldError('internal', 'homography: point configuration does not determine a unique map');
  }
  const V = svd.rightSingularVectors;
  const hn: number[] = [];
  for (let k = 0; k < 9; k++) hn.push(V.get(k, smallest));

  // H = Td^-1 * Hn * Ts, with Ts = [[s,0,-s cx],[0,s,-s cy],[0,0,1]], Td^-1 = [[1/s,0,cx],[0,1/s,cy],[0,0,1]].
  const Ts = [ts.s, 0, -ts.s * ts.cx, 0, ts.s, -ts.s * ts.cy, 0, 0, 1];
  const TdInv = [1 / td.s, 0, td.cx, 0, 1 / td.s, td.cy, 0, 0, 1];
  const H = multiply3(TdInv, multiply3(hn, Ts));
  const out = normaliseHomography(H);
  if (isSingular(out)) throw new EvenfieldError('internal', 'homography: the fitted map is singular');
  return out;
}

/** Scale H so that H[8] = 1 (or, if H[8] is ~0, so that its Frobenius norm is 1 with a positive largest entry). */
export function normaliseHomography(H: readonly number[]): Homography {
  let norm = 0;
  for (const v of H) norm += v * v;
  norm = Math.sqrt(norm);
  if (Math.abs(H[8]) > 1e-12 * norm) return H.map((v) => v / H[8]);
  let big = 0;
  for (const v of H) if (Math.abs(v) > Math.abs(big)) big = v;
  const s = Math.sign(big) / norm;
  return H.map((v) => v * s);
}

function det3(m: readonly number[]): number {
  return (
    m[0] * (m[4] * m[8] - m[5] * m[7]) - m[1] * (m[3] * m[8] - m[5] * m[6]) + m[2] * (m[3] * m[7] - m[4] * m[6])
  );
}

function isSingular(H: readonly number[]): boolean {
  let norm = 0;
  for (const v of H) norm += v * v;
  return Math.abs(det3(H)) <= 1e-12 * Math.pow(norm, 1.5);
}

/** Row-major 3x3 product a*b. */
export function multiply3(a: readonly number[], b: readonly number[]): number[] {
  const r = new Array<number>(9);
  for (let i = 0; i < 3; i++) {
    for (let j = 0; j < 3; j++) {
      r[i * 3 + j] = a[i * 3] * b[j] + a[i * 3 + 1] * b[3 + j] + a[i * 3 + 2] * b[6 + j];
    }
  }
  return r;
}

/** Map one point through H. Returns [NaN, NaN] for points mapped to infinity. */
export function applyHomography(H: readonly number[], p: Point): Point {
  const [x, y] = p;
  const w = H[6] * x + H[7] * y + H[8];
  if (w === 0) return [Number.NaN, Number.NaN];
  return [(H[0] * x + H[1] * y + H[2]) / w, (H[3] * x + H[4] * y + H[5]) / w];
}

/** Inverse map (adjugate, then normalised). Throws on a singular H. */
export function invertHomography(H: readonly number[]): Homography {
  const [a, b, c, d, e, f, g, h, i] = H;
  const adj = [
    e * i - f * h,
    c * h - b * i,
    b * f - c * e,
    f * g - d * i,
    a * i - c * g,
    c * d - a * f,
    d * h - e * g,
    b * g - a * h,
    a * e - b * d,
  ];
  if (isSingular(H)) throw new EvenfieldError('internal', 'homography: cannot invert a singular map');
  return normaliseHomography(adj);
}

export interface ReprojectionError {
  /** root-mean-square distance between H(src[i]) and dst[i] */
  rms: number;
  max: number;
  /** per-pair distances */
  errors: number[];
}

/** Distances between mapped source points and their destinations (destination units). */
export function reprojectionError(H: readonly number[], src: readonly Point[], dst: readonly Point[]): ReprojectionError {
  if (src.length !== dst.length) throw new EvenfieldError('internal', 'reprojectionError: point counts differ');
  const errors = src.map((p, i) => {
    const q = applyHomography(H, p);
    return Math.hypot(q[0] - dst[i][0], q[1] - dst[i][1]);
  });
  let ss = 0;
  let max = 0;
  for (const e of errors) {
    ss += e * e;
    if (e > max) max = e;
  }
  return { rms: errors.length ? Math.sqrt(ss / errors.length) : 0, max, errors };
}

/** The unit square of panel coordinates, in corner order (top-left, top-right, bottom-right, bottom-left). */
export const UNIT_SQUARE: Corners = [
  [0, 0],
  [1, 0],
  [1, 1],
  [0, 1],
];

/** Homography from panel coordinates (u, v in 0..1) to camera pixels, for the given corners. */
export function panelToCamera(corners: Corners): Homography {
  return solveHomography(UNIT_SQUARE, corners);
}
