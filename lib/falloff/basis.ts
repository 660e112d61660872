// Coordinates and basis functions shared by every falloff model.
//
// Normalised camera coordinates (scale-free, so a model made on one decode size evaluates on any):
//   u = (x_full + 0.5) / (W / 2) - 1,   v = (y_full + 0.5) / (H / 2) - 1
// where x_full, y_full are full-size pixel-centre coordinates and W x H is the full image size, so
// u, v run from -1 to 1 across the outer pixel edges and (0, 0) is the image centre. A pixel x of an
// image decoded at 1/s of full size has x_full = (x + 0.5) s - 0.5, hence u = (x + 0.5) s / (W / 2) - 1.
//
// Radial coordinate: r = distance from the optical centre in full-size pixels divided by the distance
// from the optical centre to the farthest image corner (r = 1 there), as in the DNG radial vignette
// opcode. The models use t = r^2.

export interface FrameGeometry {
  /** full-size image width and height in pixels */
  fullWidth: number;
  fullHeight: number;
}

/** Normalised u of a decoded pixel column x at decode scale s. */
export function normU(x: number, scale: number, fullWidth: number): number {
  return ((x + 0.5) * scale) / (fullWidth / 2) - 1;
}

/** Normalised v of a decoded pixel row y at decode scale s. */
export function normV(y: number, scale: number, fullHeight: number): number {
  return ((y + 0.5) * scale) / (fullHeight / 2) - 1;
}

/** Distance (full-size pixels) from a normalised centre to the farthest image corner. */
export function farthestCornerDistance(centre: readonly [number, number], g: FrameGeometry): number {
  const hw = g.fullWidth / 2;
  const hh = g.fullHeight / 2;
  let best = 0;
  for (const cu of [-1, 1]) {
    for (const cv of [-1, 1]) {
      const dx = (cu - centre[0]) * hw;
      const dy = (cv - centre[1]) * hh;
      best = Math.max(best, Math.hypot(dx, dy));
    }
  }
  return best;
}

/**
 * t = r^2 at normalised (u, v) for an optical centre (cu, cv); rMaxPx from farthestCornerDistance.
 */
export function radiusSquared(
  u: number,
  v: number,
  centre: readonly [number, number],
  g: FrameGeometry,
  rMaxPx: number,
): number {
  const dx = ((u - centre[0]) * g.fullWidth) / 2;
  const dy = ((v - centre[1]) * g.fullHeight) / 2;
  return (dx * dx + dy * dy) / (rMaxPx * rMaxPx);
}

/**
 * Legendre polynomials P_0..P_order at x, written into out (length >= order + 1).
 * Recurrence (n + 1) P_{n+1} = (2n + 1) x P_n - n P_{n-1}, P_0 = 1, P_1 = x
 * [Abramowitz & Stegun, Handbook of Mathematical Functions, ch. 22; equation number 22.7.10 from memory].
 */
export function legendreInto(x: number, order: number, out: Float64Array): Float64Array {
  out[0] = 1;
  if (order >= 1) out[1] = x;
  for (let n = 1; n < order; n++) {
    out[n + 1] = ((2 * n + 1) * x * out[n] - n * out[n - 1]) / (n + 1);
  }
  return out;
}

/**
 * Derivatives P_0'..P_order' at x given P_0..P_order in p: P'_{n+1} = P'_{n-1} + (2n + 1) P_n
 * [Abramowitz & Stegun ch. 22, the derivative relations; exact equation number not checked, from memory].
 */
export function legendreDerivInto(p: Float64Array, order: number, out: Float64Array): Float64Array {
  out[0] = 0;
  if (order >= 1) out[1] = 1;
  for (let n = 1; n < order; n++) out[n + 1] = out[n - 1] + (2 * n + 1) * p[n];
  return out;
}

/** (i, j) exponent pairs of the 2-D Legendre surface with minOrder <= i + j <= maxOrder, in a fixed order. */
export function surfaceTerms(minOrder: number, maxOrder: number): [number, number][] {
  const out: [number, number][] = [];
  for (let total = minOrder; total <= maxOrder; total++) {
    for (let i = total; i >= 0; i--) out.push([i, total - i]);
  }
  return out;
}

/** A surface term: coefficient c of P_i(u) P_j(v). */
export type SurfaceTerm = [number, number, number];

/** Value of sum c P_i(u) P_j(v) at one point (not for hot loops). */
export function surfaceAt(terms: readonly SurfaceTerm[], u: number, v: number): number {
  let order = 0;
  for (const [i, j] of terms) order = Math.max(order, i, j);
  const pu = legendreInto(u, order, new Float64Array(order + 1));
  const pv = legendreInto(v, order, new Float64Array(order + 1));
  let s = 0;
  for (const [i, j, c] of terms) s += c * pu[i] * pv[j];
  return s;
}

/** 1 + k1 t + k2 t^2 + ... (Horner), t = r^2. */
export function radialPolynomial(k: readonly number[], t: number): number {
  let acc = 0;
  for (let i = k.length - 1; i >= 0; i--) acc = (acc + k[i]) * t;
  return 1 + acc;
}

/** The 9 numbers of a 3x3 homography applied to (x, y). */
export function applyH(h: readonly number[], x: number, y: number): [number, number] {
  const w = h[6] * x + h[7] * y + h[8];
  return [(h[0] * x + h[1] * y + h[2]) / w, (h[3] * x + h[4] * y + h[5]) / w];
}
