// Whether a JPEG's 8-bit codes were dithered by noise before they were coded.
//
// A camera rounds its image to 8-bit codes before the JPEG encoder sees it. Where the image carries
// noise of about half a code value or more, the rounding errors average out over a block, and a block's
// mean keeps the field's level to a fraction of a code (the luma DC quantiser over 8, which is what a
// float decoder gives back: DecodeInfo.levelStepCodes). A photo nearly free of noise (a generated one, a
// camera's strong noise reduction) is rounded into plateaus one whole code apart instead, and a smooth
// field's gradients become a staircase: the mura analysis then sees islands and rings of up to a code
// value, which no averaging removes.
//
// The test: a flat luma block (no AC term) inside a plateau has an integer mean before its DC term is
// quantised, so its decoded mean lies within dcQuant / 16 of a whole code. With noise dithering the
// codes, block means are spread over every fraction, and the decoded means (on a grid of dcQuant / 8)
// land that close to a whole code for a share dcQuant / 8 of blocks (for dcQuant 1..8: the grid points
// within dcQuant / 16 of an integer, counted over one period; computed). The share above that chance,
// rescaled to 0..1, is the plateau share. Where flat blocks are rare, noise reaches the AC terms of nearly
// every block and so dithers the codes; the few flat blocks are then those whose samples happened to
// round alike, which lie on whole codes more often than chance (0.12-0.32 through the study's colour
// filter mosaic, with 0.6-1.0 % of the blocks flat): such a photo counts as dithered.

import type { FlatBlocks } from '../io/jpeg-float.js';
import type { Corners } from '../types.js';
import { insideQuad } from './quality.js';

export interface PlateauFigures {
  /** luma blocks inside the panel's inner part; the flat ones, and how many of them lie on a whole code */
  blocks: number;
  flatBlocks: number;
  nearWhole: number;
  /** the share of those blocks on whole codes beyond chance, 0 (dithered) .. 1 (a bare staircase) */
  share: number;
}

/** Fewest flat blocks, and least spread of their means (codes, 5th to 95th percentile), for a verdict:
 *  a field within a code or two gives its fractions no chance to spread, dithered or not. */
export const PLATEAU_MIN_BLOCKS = 50;
export const PLATEAU_MIN_SPREAD_CODES = 3;
/** Below this share of flat blocks the photo counts as dithered (share 0): the study's photos with the
 *  generator's usual sensor noise had 6.5-16.5 % of their blocks flat and a share of at most 0.05,
 *  those without noise 76-93 %. */
export const PLATEAU_MIN_FLAT_FRACTION = 0.02;

/**
 * The plateau share of the flat luma blocks whose centres lie inside `inner` (full-size pixel
 * coordinates): 0 when flat blocks are rare there (see PLATEAU_MIN_FLAT_FRACTION); null when it cannot
 * be told: too few flat blocks, their means within too narrow a range, or a DC quantiser of 8 or more
 * (block means then move in whole codes anyway).
 */
export function plateauShare(blocks: FlatBlocks & { dcQuant: number }, inner: Corners): PlateauFigures | null {
  const q = blocks.dcQuant;
  if (!(q > 0 && q < 8)) return null;
  const tol = q / 16 + 1e-3;
  const means: number[] = [];
  let near = 0;
  let all = 0;
  for (let j = 0; j < blocks.rows; j++) {
    for (let i = 0; i < blocks.cols; i++) {
      if (!insideQuad(inner, (i + 0.5) * blocks.blockW, (j + 0.5) * blocks.blockH)) continue;
      all++;
      const m = blocks.mean[j * blocks.cols + i]!;
      if (!Number.isFinite(m)) continue;
      means.push(m);
      if (Math.abs(m - Math.round(m)) <= tol) near++;
    }
  }
  if (all > 0 && means.length < PLATEAU_MIN_FLAT_FRACTION * all) return { blocks: all, flatBlocks: means.length, nearWhole: near, share: 0 };
  if (means.length < PLATEAU_MIN_BLOCKS) return null;
  means.sort((a, b) => a - b);
  const spread = means[Math.floor(0.95 * (means.length - 1))]! - means[Math.floor(0.05 * (means.length - 1))]!;
  if (spread < PLATEAU_MIN_SPREAD_CODES) return null;
  const chance = q / 8;
  const share = Math.min(1, Math.max(0, (near / means.length - chance) / (1 - chance)));
  return { blocks: all, flatBlocks: means.length, nearWhole: near, share };
}
