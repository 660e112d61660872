// Multi-scale filtering of the contrast map on a weighted pyramid.
//
// Every filter is a normalised convolution (sum k n m / sum k n), so pixels without data and the
// panel edges need no special case. Alongside each filtered map we carry the standard deviation the
// filter would show for white noise of unit sigma per full working pixel:
//   var(sum k n m / sum k n) = sum k^2 n / (sum k n)^2          (m has variance 1/n)
// and for a difference of two such filters the cross term sum k1 k2 n / (S1 S2) enters twice.
// Multiplied by the measured pixel noise (and a correlation factor measured on the map) this gives
// the noise of every filtered pixel, edges included.

import { convolveSeparable, gaussianKernel, halve, kernelProduct, type Level } from './raster.js';

/** Build a pyramid from the working contrast map and its weights, down to a few pixels. */
export function buildPyramid(m: Float32Array, n: Float32Array, w: number, h: number): Level[] {
  const levels: Level[] = [{ w, h, factor: 1, m, n }];
  while (Math.min(levels[levels.length - 1].w, levels[levels.length - 1].h) > 12) {
    levels.push(halve(levels[levels.length - 1]));
  }
  return levels;
}

/** Pyramid level on which a Gaussian of sigma (working px) is computed: 1.5..3 level px wide. */
export function levelFor(sigma: number, nLevels: number): number {
  return Math.max(0, Math.min(nLevels - 1, Math.floor(Math.log2(Math.max(sigma, 1) / 1.5))));
}

/** Kernel sigma at level l giving an effective sigma (working px): the 2^l box averaging of the
 *  level already contributes (4^l - 1)/12 of variance. */
function levelSigma(sigma: number, l: number): number {
  const f = 2 ** l;
  const intrinsic = (f * f - 1) / 12;
  return Math.sqrt(Math.max(sigma * sigma - intrinsic, 0.09)) / f;
}

export interface FilteredMap {
  /** effective Gaussian sigma, working px */
  sigma: number;
  level: number;
  w: number;
  h: number;
  factor: number;
  /** filtered values (weighted mean); 0 where no data */
  v: Float32Array;
  /** noise standard deviation for unit white noise per working pixel; Infinity where no data */
  sdUnit: Float32Array;
}

export interface DogMap extends FilteredMap {
  /** the low-pass at sigma computed on the way, reusable as a member of the low-pass family */
  low: FilteredMap;
}

/** The weight-only half of a filter (normalisation and noise maps): it depends on which pixels have
 *  data, not on their values, so it is computed once and reused for every background round. */
export interface FilterGeometry {
  sigma: number;
  ratio: number | null; // null: plain low-pass
  level: number;
  w: number;
  h: number;
  factor: number;
  k1: Float32Array;
  k2: Float32Array | null;
  S1: Float32Array;
  S2: Float32Array | null;
  sdLow: Float32Array;
  sdDog: Float32Array | null;
}

export function filterGeometry(pyr: Level[], sigma: number, ratio: number | null): FilterGeometry {
  const l = levelFor(sigma, pyr.length);
  const lv = pyr[l];
  const N = lv.w * lv.h;
  const tmp = new Float32Array(N);
  const k1 = gaussianKernel(levelSigma(sigma, l));
  const S1 = new Float32Array(N);
  const Q1 = new Float32Array(N);
  convolveSeparable(lv.n, lv.w, lv.h, k1, S1, tmp);
  convolveSeparable(lv.n, lv.w, lv.h, kernelProduct(k1, k1), Q1, tmp);
  let k2: Float32Array | null = null;
  let S2: Float32Array | null = null;
  let sdDog: Float32Array | null = null;
  const eps1 = 1e-6 * maxOf(S1);
  const sdLow = new Float32Array(N);
  for (let i = 0; i < N; i++) sdLow[i] = S1[i] > eps1 ? Math.sqrt(Math.max(Q1[i], 0)) / S1[i] : Infinity;
  if (ratio !== null) {
    k2 = gaussianKernel(levelSigma(ratio * sigma, l));
    S2 = new Float32Array(N);
    const Q2 = new Float32Array(N);
    const Q12 = new Float32Array(N);
    convolveSeparable(lv.n, lv.w, lv.h, k2, S2, tmp);
    convolveSeparable(lv.n, lv.w, lv.h, kernelProduct(k2, k2), Q2, tmp);
    convolveSeparable(lv.n, lv.w, lv.h, kernelProduct(k1, k2), Q12, tmp);
    sdDog = new Float32Array(N);
    const eps2 = 1e-6 * maxOf(S2);
    for (let i = 0; i < N; i++) {
      const a = S1[i];
      const b = S2[i];
      if (a > eps1 && b > eps2) {
        const v = Q1[i] / (a * a) + Q2[i] / (b * b) - (2 * Q12[i]) / (a * b);
        sdDog[i] = Math.sqrt(Math.max(v, 1e-12));
      } else sdDog[i] = Infinity;
    }
  }
  return { sigma, ratio, level: l, w: lv.w, h: lv.h, factor: lv.factor, k1, k2, S1, S2, sdLow, sdDog };
}

function weightedProduct(lv: Level): Float32Array {
  const mn = new Float32Array(lv.m.length);
  for (let i = 0; i < mn.length; i++) mn[i] = lv.m[i] * lv.n[i];
  return mn;
}

/** Low-pass of the pyramid's values with a geometry computed on the same weights. */
export function applyLowPass(pyr: Level[], g: FilterGeometry): FilteredMap {
  const lv = pyr[g.level];
  const N = g.w * g.h;
  const tmp = new Float32Array(N);
  const num = new Float32Array(N);
  convolveSeparable(weightedProduct(lv), g.w, g.h, g.k1, num, tmp);
  for (let i = 0; i < N; i++) num[i] = Number.isFinite(g.sdLow[i]) ? num[i] / g.S1[i] : 0;
  return { sigma: g.sigma, level: g.level, w: g.w, h: g.h, factor: g.factor, v: num, sdUnit: g.sdLow };
}

/** Difference of Gaussians G(sigma) - G(ratio sigma) with its noise map, and the low-pass G(sigma). */
export function applyDog(pyr: Level[], g: FilterGeometry): DogMap {
  if (!g.k2 || !g.S2 || !g.sdDog) throw new Error('not a DoG geometry');
  const lv = pyr[g.level];
  const N = g.w * g.h;
  const tmp = new Float32Array(N);
  const mn = weightedProduct(lv);
  const low = new Float32Array(N);
  const D = new Float32Array(N);
  convolveSeparable(mn, g.w, g.h, g.k1, low, tmp);
  convolveSeparable(mn, g.w, g.h, g.k2, D, tmp);
  for (let i = 0; i < N; i++) {
    if (Number.isFinite(g.sdDog[i])) {
      low[i] /= g.S1[i];
      D[i] = low[i] - D[i] / g.S2[i];
    } else {
      low[i] = Number.isFinite(g.sdLow[i]) ? low[i] / g.S1[i] : 0;
      D[i] = 0;
    }
  }
  const base = { sigma: g.sigma, level: g.level, w: g.w, h: g.h, factor: g.factor };
  return { ...base, v: D, sdUnit: g.sdDog, low: { ...base, v: low, sdUnit: g.sdLow } };
}

function maxOf(a: Float32Array): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) if (a[i] > m) m = a[i];
  return m;
}

/** Working-pixel coordinate of the centre of level pixel (lx, ly). */
export function levelToWork(lx: number, factor: number): number {
  return (lx + 0.5) * factor - 0.5;
}
