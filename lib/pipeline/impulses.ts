// Single-pixel spikes: the camera's hot (or dead) pixels, and anything else no larger than one pixel of
// the working image. A hot pixel of a long black-field exposure stands tens of times above the lit black
// and would come out of the mura analysis as a spot of SEMU 20–70; a panel dot smaller than one camera
// pixel looks the same, and a photo cannot tell the two apart (pixel defects of a panel are counted by
// other means: by eye, with a magnifier). Such pixels are replaced by the mean of their eight neighbours
// before anything is measured, and counted.
//
// A pixel is a spike when its luminance stands above the highest of its eight neighbours (or below the
// lowest) by more than three times the neighbours' own spread, by more than half its own excess over
// their mean (so it stands alone: the peak of any feature the optics blurred over two pixels or more has
// neighbours at more than half its excess), by more than half their mean (`minExcess`), and by more than
// three 8-bit code values at their level (`minCodes`; sRGB steps: dark JPEG areas come in whole steps
// of 10–30 %). Hot pixels of dark exposures stand many times above the field; a hot pixel a fraction
// above a lit field is left (it reads as a spot of a few SEMU at most).

import type { Plane, RgbImage } from '../types.js';
import { srgbDecode, srgbEncode } from '../photometry/index.js';

export interface ImpulseOptions {
  /** the spike must exceed its neighbours' spread (max − min) this many times (default 3) */
  spreadFactor: number;
  /** ... and its neighbours' mean by this share of that mean (default 0.5: camera JPEGs leave single
   *  pixels 10–25 % off their neighbours in noise and ringing, as the demo's photos show) */
  minExcess: number;
  /** ... and by this many 8-bit sRGB code steps at the neighbours' level (default 3) */
  minCodes: number;
}

export const DEFAULT_IMPULSE_OPTIONS: ImpulseOptions = { spreadFactor: 3, minExcess: 0.5, minCodes: 3 };

/** linear light of `codes` sRGB code steps at level l (the step at code 1 below that level) */
function codeSteps(l: number, codes: number): number {
  const v = Math.max(1 / 255, srgbEncode(Math.max(0, l)));
  return srgbDecode(Math.min(1, v + codes / 255)) - srgbDecode(v);
}

/**
 * Replace single-pixel spikes of `lum` (and the same pixels of `img`, interleaved RGB of the same size) by
 * their eight neighbours' mean, in place. Returns the indices of the pixels replaced. Border pixels are
 * left.
 */
export function removeImpulses(img: RgbImage, lum: Plane, opts: ImpulseOptions = DEFAULT_IMPULSE_OPTIONS): number[] {
  const W = lum.width;
  const H = lum.height;
  const L = lum.data;
  const d = img.data;
  const k = opts.spreadFactor;
  const rel = opts.minExcess;
  const spikes: number[] = [];
  for (let y = 1; y < H - 1; y++) {
    const row = y * W;
    for (let x = 1; x < W - 1; x++) {
      const i = row + x;
      const v = L[i]!;
      // quick exits (a spike beats all eight by k times their spread, so any pair of them by k times the
      // pair's spread): the left and right pair, then the four nearest; nearly every pixel leaves here
      const e = L[i - 1]!;
      const f = L[i + 1]!;
      const hi2 = e > f ? e : f;
      const lo2 = e > f ? f : e;
      const s2 = k * (hi2 - lo2);
      if (v - hi2 <= s2 && lo2 - v <= s2) continue;
      const b = L[i - W]!;
      const h = L[i + W]!;
      const m4 = Math.max(hi2, Math.max(b, h));
      const n4 = Math.min(lo2, Math.min(b, h));
      const s4 = k * (m4 - n4);
      if (v - m4 <= s4 && n4 - v <= s4) continue;
      const a = L[i - W - 1]!;
      const c = L[i - W + 1]!;
      const g = L[i + W - 1]!;
      const j = L[i + W + 1]!;
      const mx = Math.max(m4, Math.max(Math.max(a, c), Math.max(g, j)));
      const mn = Math.min(n4, Math.min(Math.min(a, c), Math.min(g, j)));
      // quick exit: inside the neighbours' range, the usual case
      if (v <= mx && v >= mn) continue;
      const mean = (a + b + c + e + f + g + h + j) / 8;
      const spread = mx - mn;
      const step = v > mx ? v - mx : mn - v;
      if (step <= k * spread || step <= 0.5 * Math.abs(v - mean) || step <= rel * Math.abs(mean)) continue;
      if (step > codeSteps(mean, opts.minCodes)) spikes.push(i);
    }
  }
  // replace after finding them all, so that a neighbour's replacement does not change another's test
  for (const i of spikes) {
    let r = 0;
    let g = 0;
    let b = 0;
    let l = 0;
    for (const o of [-W - 1, -W, -W + 1, -1, 1, W - 1, W, W + 1]) {
      const n = i + o;
      r += d[3 * n]!;
      g += d[3 * n + 1]!;
      b += d[3 * n + 2]!;
      l += L[n]!;
    }
    d[3 * i] = r / 8;
    d[3 * i + 1] = g / 8;
    d[3 * i + 2] = b / 8;
    L[i] = l / 8;
  }
  return spikes;
}
