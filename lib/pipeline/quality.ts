// Photo quality gates: a photo that cannot be measured honestly is refused with a named reason,
// never measured badly. Every limit is an option with a documented default and the reason for it.
//
// The gates, in the order their reasons are reported when several apply:
//   glare        a compact bright region at odds with the rest of the panel (a reflection on the glass)
//   clipped      highlights clipped on the panel
//   too-dark     panel signal down in the quantisation / noise floor
//   blurred      panel edges out of focus or motion-blurred, judged against the smallest mura sought
//   flicker      bands along the camera's rows from the display's pulsed light (rolling shutter; flicker.ts);
//                reported first when found, since deep bands also pass for glare or a blurred edge
//   moire        a periodic coloured ripple strong enough to survive into the panel map
//   too-oblique  a part of the panel seen too far off its normal for its luminance to hold
// The photo is refused with the first failing gate's code; the message names every failing gate.
//
// All gates work on the camera image at working scale (after decoding, before rectification), in
// linear light. Glare and the exposure gates use the luminance before the falloff correction (the
// camera's own levels); falloff is smooth and is absorbed by the background fit of the glare gate.

import { Matrix, solve } from 'ml-matrix';
import { EvenfieldError, type ErrorCode } from '../errors.js';
import { cornerAngles, isConvexClockwise, panelToCamera, quadraticFit, rectifyPlane, signedArea } from '../geometry/index.js';
import { srgbCodeStepPct, srgbDecode, srgbEncode, transferCodeStepPct, transferEncode, type ResponseCurve } from '../photometry/index.js';
import type { Corners, Pattern, Plane, Point, RgbImage } from '../types.js';
import { findFlicker, type FlickerFinding } from './flicker.js';

export interface QualityLimits {
  /** linear value at or above which a channel counts as clipped (sRGB code 0.98 ≈ linear 0.955) */
  clipLinear: number;
  /** largest fraction of the panel's pixels that may be clipped */
  maxClippedFraction: number;
  /** smallest median panel code value (sRGB-encoded, 0..1) for the photo to be measurable */
  minPanelCode: number;
  /**
   * Blur: an edge counts as blurred when its 10–90 % width exceeds this fraction of the smallest mura
   * feature searched for (MeasureOptions.muraOptions.minFeatureMm, default 3 mm) AND sharpEdgePx.
   * Default 0.5. Why: a Gaussian blur whose edge 10–90 % width is E lowers the peak contrast of a
   * Gaussian spot of half-peak diameter d by the factor d² / (d² + 0.845 E²) (the blur's own half-peak
   * width is 0.919 E; widths add in quadrature) [computed]; E = d/2 costs the smallest spot 17 % of its
   * contrast, E = d would cost 46 % and turn failing spots into passing ones.
   */
  maxEdgeWidthFeatureFraction: number;
  /**
   * Edges no wider than this (pixels of the working image) are as sharp as the camera's pixels allow and
   * never count as blurred: a coarse photo of a large panel is a resolution limit, reported by the mura
   * analysis, not a focus problem. Default 3 (a focused edge measures about 1–2 px, common practice).
   */
  sharpEdgePx: number;
  /**
   * Glare on a lit field (white, gray, red, green, blue): a compact region whose peak stands more than
   * this fraction above the panel's own smooth level. Default 0.3. Why: backlight hot spots and clouds
   * reach 15-20 % on panels buyers reject (from memory), and such a panel must be graded, not sent back
   * for a retake; a lamp or window reflected in the glass typically stands well above that and often clips
   * (from memory). A fainter reflection is measured as mura: the report's photo shows it.
   */
  glareExcess: number;
  /**
   * The same on a black field, where bleed, clouding and corner glow legitimately reach several times
   * the black level. Default 9 (a patch at 10 times its surroundings).
   */
  glareExcessBlack: number;
  /** a bright region larger than this fraction of the panel is not "at odds with the rest" (default 0.25) */
  glareMaxAreaFraction: number;
  /**
   * A bright region whose peak lies within this fraction of the panel's width/height from its edge is
   * left to the mura analysis as edge glow, bleed or edge-lit brightening, never called glare.
   * Default 0.04.
   */
  glareEdgeMargin: number;
  /**
   * Moiré: largest amplitude (fraction of the mean level) of a periodic ripple, in luminance or in the
   * ratio of two colour channels, that survives into the panel map. Default 0.01. Why: the rectified map averages each map pixel's camera footprint, which
   * attenuates a ripple of frequency (fx, fy) by |sinc(fx w) sinc(fy w)| (w = footprint); what survives
   * at 1 % is as large as the mura contrasts sought (a few tenths of a percent to a few percent, from
   * memory) and shows as false lines, bands or spot arrays.
   */
  maxMoireAmplitude: number;
  /**
   * Periods (working pixels) searched for moiré: 2 up to this. Default 32. Longer beats cannot be told
   * from banding mura in one photo (shoot again from another distance: mura stays, moiré moves).
   */
  moireMaxPeriodPx: number;
  /**
   * Ripples longer than this (working pixels) count only when they are coloured (the channel ratios
   * ripple at least half as much as luminance), the usual mark of moiré from the panel's colour stripes
   * against the camera's colour filter mosaic; a neutral periodic pattern that long may be the backlight's
   * own hot-spot array, which is mura. Shorter ripples count whatever their colour: JPEG chroma
   * subsampling (4:2:0) halves the colour resolution, so fine colour ripple cannot be seen. Default 8.
   * On a primary-colour field (fewer than two channels carry light) every ripple counts.
   */
  moireColourTestPeriodPx: number;
  /**
   * A ripple counts as moiré only where its power stands this many times above the noise's mean power
   * at its frequency (estimated from the median over all directions at that frequency), and its
   * amplitude is given with that noise power taken out. Default 25. Why: the power of one frequency bin
   * of random noise is exponentially distributed, so it exceeds t times its mean with probability
   * e^-t (computed); the search looks at about 1.5e5 bins per photo (three windows of 256², two ripple
   * kinds), so t = 25 keeps noise alone from passing in all but about 2e-6 of photos, while a ripple at
   * the 1 % limit stands 25 times above a noise of up to 0.2 % per bin. Without it the colour noise of a
   * dark field (a camera's colour matrix amplifies it) was read as a coloured ripple of about 1 %.
   */
  moireMinPowerRatio: number;
  /**
   * Flicker bands (flicker.ts): largest peak-to-peak ripple (percent of the level) of a periodic pattern
   * along the camera's rows, the same across the panel's width and with no counterpart along them, for
   * the photo to be measured. Default 1 %. Why: a ripple of 1 % peak to peak (amplitude 0.5 %) is
   * measured as bands of about 0.41 % mean contrast over their half-peak regions [computed: a sinusoid's
   * mean over the part above half its peak is sin 60° / (π/3) = 0.83 of its amplitude], SEMU about 0.5
   * for bands 20 mm wide across a 600 mm wide panel (SEMI D31's formula) — below the usual limits;
   * twice that reaches them. 0 turns the check off (a panel whose own stripes lie exactly along the
   * camera's rows, when turning the camera cannot be done).
   */
  maxFlickerPct: number;
  /** above this peak-to-peak ripple (percent) the photo is measured with a warning. Default 0.4 %. */
  warnFlickerPct: number;
  /**
   * Too oblique: largest angle between the panel normal and the line of sight to any point of the
   * active area, degrees, beyond which the photo is refused. Default 60. Why 60: past it the panel is
   * foreshortened more than 2:1 (cos 60° = 0.5), so a map pixel rests on half the camera pixels, and
   * every panel technology's luminance has changed by far more than any uniformity tolerance; a
   * buyer who measures LCDs strictly sets this lower in the criteria or with --max-view-angle.
   * Between warnViewAngleDeg and this the photo is measured with a warning that says why: LCD
   * luminance and colour depend on the viewing angle and the falloff correction removes the lens's
   * cos⁴ loss, not the panel's own angular emission. Measurement practice keeps the meter
   * perpendicular (from memory: FPDM/IDMS); IPS white luminance is already down a few percent at 15°
   * and VA/TN panels lose more (from memory). Self-emitting panels (OLED, LED tiles) change less.
   * Needs the focal length (EXIF); without it the angle is unchecked and the photo carries a warning.
   */
  maxViewAngleDeg: number;
  /** above this viewing angle (degrees) the photo is measured with a warning. Default 15 (the README's
   *  advice is corners within about 10° of the axis, about 3 screen diagonals away). */
  warnViewAngleDeg: number;
}

export const DEFAULT_QUALITY_LIMITS: QualityLimits = {
  clipLinear: srgbDecode(0.98),
  maxClippedFraction: 0.001,
  // 8 code values of 255: below that, 8-bit quantisation alone is a ±6 % step (common practice)
  minPanelCode: 8 / 255,
  maxEdgeWidthFeatureFraction: 0.5,
  sharpEdgePx: 3,
  glareExcess: 0.3,
  glareExcessBlack: 9,
  glareMaxAreaFraction: 0.25,
  glareEdgeMargin: 0.04,
  maxMoireAmplitude: 0.01,
  moireMaxPeriodPx: 32,
  moireColourTestPeriodPx: 8,
  moireMinPowerRatio: 25,
  maxFlickerPct: 1,
  warnFlickerPct: 0.4,
  maxViewAngleDeg: 60,
  warnViewAngleDeg: 15,
};

/** 1 where any channel is at or above the clip level. */
export function nearWhiteMask(img: RgbImage, clipLinear: number): Uint8Array {
  const n = img.width * img.height;
  const out = new Uint8Array(n);
  const d = img.data;
  for (let i = 0, k = 0; i < n; i++, k += 3) {
    if (d[k] >= clipLinear || d[k + 1] >= clipLinear || d[k + 2] >= clipLinear) out[i] = 1;
  }
  return out;
}

/** Is (x, y) inside the convex quadrilateral (corners in order)? */
export function insideQuad(c: Corners, x: number, y: number): boolean {
  let sign = 0;
  for (let i = 0; i < 4; i++) {
    const [x0, y0] = c[i];
    const [x1, y1] = c[(i + 1) % 4];
    const cross = (x1 - x0) * (y - y0) - (y1 - y0) * (x - x0);
    if (cross !== 0) {
      const s = Math.sign(cross);
      if (sign === 0) sign = s;
      else if (s !== sign) return false;
    }
  }
  return true;
}

/**
 * The first and last x of the lattice x0, x0 + step, … ≤ x1 on row y that lie inside the convex
 * quadrilateral `c` (as insideQuad decides, boundary included); null when none does. The run is found
 * from the edges' crossings of the row and checked against insideQuad at its ends.
 */
export function quadRowRun(c: Corners, y: number, x0: number, x1: number, step: number): [number, number] | null {
  let ylo = Infinity;
  let yhi = -Infinity;
  for (const p of c) {
    if (p[1] < ylo) ylo = p[1];
    if (p[1] > yhi) yhi = p[1];
  }
  if (y < ylo || y > yhi) return null;
  // the row meets the quadrilateral in the span of its crossings with the edges
  let xa = Infinity;
  let xb = -Infinity;
  for (let i = 0; i < 4; i++) {
    const [ax, ay] = c[i];
    const [bx, by] = c[(i + 1) % 4];
    if ((y < ay && y < by) || (y > ay && y > by)) continue;
    if (ay === by) {
      xa = Math.min(xa, ax, bx);
      xb = Math.max(xb, ax, bx);
    } else {
      const x = ax + ((y - ay) * (bx - ax)) / (by - ay);
      xa = Math.min(xa, x);
      xb = Math.max(xb, x);
    }
  }
  if (!(xb >= xa)) return null;
  let lo = Math.max(x0, x0 + Math.ceil((xa - x0) / step) * step);
  let hi = Math.min(x0 + Math.floor((x1 - x0) / step) * step, x0 + Math.floor((xb - x0) / step) * step);
  // rounding at the ends: move each end to the lattice point insideQuad agrees with
  while (lo <= hi && !insideQuad(c, lo, y)) lo += step;
  while (hi >= lo && !insideQuad(c, hi, y)) hi -= step;
  if (lo > hi) return null;
  while (lo - step >= x0 && insideQuad(c, lo - step, y)) lo -= step;
  while (hi + step <= x1 && insideQuad(c, hi + step, y)) hi += step;
  return [lo, hi];
}

/** The k-th smallest value (0-based) of `a`, which it reorders (Hoare's selection). */
export function selectKth(a: Float32Array, k: number): number {
  let l = 0;
  let r = a.length - 1;
  while (r > l) {
    const pivot = a[(l + r) >> 1];
    let i = l;
    let j = r;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) r = j;
    else if (k >= i) l = i;
    else break;
  }
  return a[k];
}

export interface QualityInput {
  /** linear luminance at working scale, before the falloff correction */
  rawLum: Plane;
  /** 1 where any channel was at the clip level (working scale) */
  clipMask: Uint8Array;
  /** linear RGB at working scale (falloff-corrected or not: the moiré gate uses relative ripple only) */
  image: RgbImage;
  /** active-area corners, working-scale pixels */
  corners: Corners;
  /** decode scale: working pixel = scale full-size pixels */
  scale: number;
  pattern: Pattern;
  /** active area in mm (nominal when the size is unknown; the mura search uses the same units) */
  panelSizeMm: { width: number; height: number };
  /** smallest mura feature searched for, mm (same units as panelSizeMm) */
  minFeatureMm: number;
  /** working-scale camera pixels per map pixel of the rectified map (1 or less: no averaging) */
  mapFootprintPx: number;
  /** largest angle between the panel normal and the line of sight to the active area, degrees; null
   *  when it cannot be estimated (no focal length) */
  viewAngleMaxDeg: number | null;
  /** a measured camera response the photo was decoded with (code values are then read through it);
   *  absent or null: the sRGB curve */
  response?: ResponseCurve | null;
  /** the display's tile grid (columns, rows), when it is tiled: ripples at its seams' pitch are its own */
  tileGrid?: [number, number] | null;
  /** the photo's exposure time in seconds (EXIF), for the flicker message; null when unknown */
  exposureTimeS?: number | null;
  /** how far the photo's 8-bit codes form a bare staircase of whole codes (0..1, DecodeInfo.codePlateauShare;
   *  absent or null: dithered by noise, or not known). Without noise the contours of the three channels'
   *  codes lie side by side along every gradient and read as a coloured ripple of up to about a code
   *  value; a ripple no stronger than this share of a code at the panel's level is not called moiré. */
  codePlateauShare?: number | null;
}

export interface EdgeWidth {
  side: 'top' | 'right' | 'bottom' | 'left';
  /** 10–90 % width, working pixels; null when the edge step is too weak to trace */
  px: number | null;
  /** the same in panel mm (or nominal units) */
  mm: number | null;
}

export interface GlareFinding {
  /** peak excess over the fitted panel level (0.5 = 50 % brighter) */
  peakExcess: number;
  u: number;
  v: number;
  /** fraction of the panel area above the threshold in this region */
  areaFraction: number;
  /** the region's cells include clipped camera pixels */
  clipped: boolean;
}

export interface MoireFinding {
  /** amplitude surviving into the panel map, fraction of the mean level */
  amplitude: number;
  /** amplitude in the camera image before the map's averaging */
  cameraAmplitude: number;
  /** period, working pixels */
  periodPx: number;
  /** direction of the ripple's wave vector, degrees from the x axis */
  angleDeg: number;
  /** whether the ripple differs between colour channels (the usual mark of moiré) */
  coloured: boolean;
}

/** Every figure the gates look at, for reports, tests and accuracy studies. */
export interface QualityFigures {
  pixels: number;
  clippedFraction: number;
  medianCode: number;
  edges: EdgeWidth[];
  glare: GlareFinding | null;
  moire: MoireFinding | null;
  flicker: FlickerFinding | null;
  viewAngleMaxDeg: number | null;
}

export interface QualityOutcome {
  figures: QualityFigures;
  /** failing gates in reporting order, each with its message */
  problems: { code: ErrorCode; message: string }[];
  warnings: string[];
}

const SIDES = ['top', 'right', 'bottom', 'left'] as const;

/** The outline scaled by `f` about its centre (the mean of its corners). */
export function shrink(corners: Corners, f: number): Corners {
  const cx = corners.reduce((a, p) => a + p[0], 0) / 4;
  const cy = corners.reduce((a, p) => a + p[1], 0) / 4;
  return corners.map(([x, y]) => [cx + f * (x - cx), cy + f * (y - cy)]) as Corners;
}

export function bilinear(p: Plane, x: number, y: number): number {
  const w = p.width;
  const h = p.height;
  if (!(x >= 0 && y >= 0 && x <= w - 1 && y <= h - 1)) return Number.NaN;
  const x0 = Math.min(w - 2, Math.floor(x));
  const y0 = Math.min(h - 2, Math.floor(y));
  const fx = x - x0;
  const fy = y - y0;
  const d = p.data;
  const k = y0 * w + x0;
  return (1 - fy) * ((1 - fx) * d[k] + fx * d[k + 1]) + fy * ((1 - fx) * d[k + w] + fx * d[k + w + 1]);
}

/**
 * 10–90 % width of one side's edge: profiles across the side at 24 places along its middle 70 %, each
 * averaged over ±2 px along the side, summed into one profile sampled every 0.25 px; the levels are the
 * medians of the outer halves of the profile, and the crossings are searched outward from the line.
 * Before the sum each place's profile is moved by where a quadratic through the places' own 50 %
 * crossings puts the edge there, as the slanted-edge method's polynomial edge fit does (ISO 12233 e-SFR;
 * from memory): an edge bowed by lens distortion or a curved panel would otherwise read as blurred by its
 * sagitta. The half-length grows until the profile has flattened on both sides. Null when the step is too
 * weak.
 */
export function edgeWidthPx(lum: Plane, a: Point, b: Point): number | null {
  const dx = b[0] - a[0];
  const dy = b[1] - a[1];
  const len = Math.hypot(dx, dy);
  if (!(len > 8)) return null;
  const tx = dx / len;
  const ty = dy / len;
  // inward normal for corners listed clockwise on screen
  const nx = -ty;
  const ny = tx;
  const step = 0.25;
  const places = 24;
  for (let R = 12; R <= 160; R *= 2) {
    if (R > len / 3) break;
    const nb = Math.round((2 * R) / step) + 1;
    const sample = (k: number, shift: number, prof: Float64Array, cnt: Float64Array): void => {
      const s = len * (0.15 + (0.7 * (k + 0.5)) / places);
      for (let j = -2; j <= 2; j++) {
        const bx = a[0] + (s + j) * tx;
        const by = a[1] + (s + j) * ty;
        for (let i = 0; i < nb; i++) {
          const t = -R + i * step + shift;
          const v = bilinear(lum, bx + t * nx, by + t * ny);
          if (Number.isFinite(v)) {
            prof[i] += v;
            cnt[i]++;
          }
        }
      }
    };
    // each place's own 50 % crossing, then a quadratic through them along the side
    const at: number[] = [];
    const t50: number[] = [];
    for (let k = 0; k < places; k++) {
      const one = new Float64Array(nb);
      const n1 = new Float64Array(nb);
      sample(k, 0, one, n1);
      for (let i = 0; i < nb; i++) one[i] = n1[i] > 0 ? one[i] / n1[i] : Number.NaN;
      const c = halfCrossing(one, step, R);
      if (c !== null) {
        at.push((k + 0.5) / places - 0.5);
        t50.push(c);
      }
    }
    const shift = at.length >= 6 ? quadraticFit(at, t50) : null;
    const prof = new Float64Array(nb);
    const cnt = new Float64Array(nb);
    for (let k = 0; k < places; k++) {
      const x = (k + 0.5) / places - 0.5;
      sample(k, shift ? shift[0] + shift[1] * x + shift[2] * x * x : 0, prof, cnt);
    }
    for (let i = 0; i < nb; i++) prof[i] = cnt[i] > 0 ? prof[i] / cnt[i] : Number.NaN;
    const levels = stepLevels(prof);
    if (!levels) return null;
    const { lo, hi } = levels;
    const l10 = lo + 0.1 * (hi - lo);
    const l90 = lo + 0.9 * (hi - lo);
    const mid = Math.round(R / step);
    // from the line inward to the first sample at or above 90 %, outward to the first at or below 10 %
    let i90 = -1;
    for (let i = mid; i < nb; i++) {
      if (prof[i] >= l90) {
        i90 = i;
        break;
      }
    }
    let i10 = -1;
    for (let i = mid; i >= 0; i--) {
      if (prof[i] <= l10) {
        i10 = i;
        break;
      }
    }
    // the line may sit a little off the 50 % point: also allow the crossings on the other side of it
    if (i90 < 0 || i10 < 0) continue;
    const t90 = crossing(prof, i90, -1, l90, step, R);
    const t10 = crossing(prof, i10, +1, l10, step, R);
    const width = t90 - t10;
    // the profile must be flat well beyond the transition, or the levels are not the plateaus
    if (width < R / 3) return Math.max(0, width);
  }
  return null;
}

/** Linear interpolation of the level crossing between sample i and its neighbour i + dir. */
function crossing(prof: Float64Array, i: number, dir: number, level: number, step: number, R: number): number {
  const j = i + dir;
  const t = (k: number) => -R + k * step;
  if (j < 0 || j >= prof.length || !Number.isFinite(prof[j])) return t(i);
  const a = prof[i];
  const b = prof[j];
  if (a === b) return t(i);
  const f = (level - a) / (b - a);
  return t(i) + dir * step * Math.max(0, Math.min(1, f));
}

/** An edge profile's outside and inside levels: the medians of its outer quarters; null when either
 *  quarter is mostly off the image or the step is weak (inside under 1.5 times outside). */
function stepLevels(prof: Float64Array): { lo: number; hi: number } | null {
  const nb = prof.length;
  const q = Math.floor(nb / 4);
  const outer: number[] = [];
  const inner: number[] = [];
  for (let i = 0; i < q; i++) if (Number.isFinite(prof[i])) outer.push(prof[i]);
  for (let i = nb - q; i < nb; i++) if (Number.isFinite(prof[i])) inner.push(prof[i]);
  if (outer.length < q / 2 || inner.length < q / 2) return null;
  const lo = medianOf(outer);
  const hi = medianOf(inner);
  return hi > 1.5 * lo && hi > 0 ? { lo, hi } : null;
}

/** Position (px from the profile's middle) of the 50 % crossing nearest the middle, levels from the
 *  outer quarters; null when the step is weak or not crossed. */
function halfCrossing(prof: Float64Array, step: number, R: number): number | null {
  const nb = prof.length;
  const levels = stepLevels(prof);
  if (!levels) return null;
  const l50 = 0.5 * (levels.lo + levels.hi);
  let best: number | null = null;
  for (let i = 0; i + 1 < nb; i++) {
    const p0 = prof[i];
    const p1 = prof[i + 1];
    if (!Number.isFinite(p0) || !Number.isFinite(p1) || p0 === p1 || (p0 - l50) * (p1 - l50) > 0) continue;
    const t = -R + (i + (l50 - p0) / (p1 - p0)) * step;
    if (best === null || Math.abs(t) < Math.abs(best)) best = t;
  }
  return best;
}

function medianOf(v: number[]): number {
  const s = v.slice().sort((x, y) => x - y);
  const n = s.length;
  return n % 2 ? s[(n - 1) / 2] : 0.5 * (s[n / 2 - 1] + s[n / 2]);
}

/** Edge widths of the four sides, in working pixels and panel mm. */
export function edgeWidths(lum: Plane, corners: Corners, panelSizeMm: { width: number; height: number }): EdgeWidth[] {
  return SIDES.map((side, i) => {
    const a = corners[i];
    const b = corners[(i + 1) % 4];
    const px = edgeWidthPx(lum, a, b);
    const lenPx = Math.hypot(b[0] - a[0], b[1] - a[1]);
    const lenMm = i % 2 === 0 ? panelSizeMm.width : panelSizeMm.height;
    return { side, px, mm: px === null ? null : (px * lenMm) / lenPx };
  });
}

/** Monomials U^i V^j, i + j <= order, on U, V in -1..1. */
function monomials(order: number): [number, number][] {
  const t: [number, number][] = [];
  for (let d = 0; d <= order; d++) for (let i = d; i >= 0; i--) t.push([i, d - i]);
  return t;
}

/**
 * Robust low-order fit of log luminance over a small rectified map (cells with a valid value), iterated
 * with cells beyond 3 robust sigmas left out. Returns the fitted log level per cell.
 */
export function robustLogSurface(values: Float64Array, w: number, h: number, use: Uint8Array, order: number): Float64Array {
  const terms = monomials(order);
  const nt = terms.length;
  const n = w * h;
  // the basis of every cell, made once: B[k * nt + r] = U^i V^j of term r at cell k
  const B = new Float64Array(n * nt);
  for (let j = 0; j < h; j++) {
    const v = (2 * (j + 0.5)) / h - 1;
    for (let i = 0; i < w; i++) {
      const u = (2 * (i + 0.5)) / w - 1;
      const o = (j * w + i) * nt;
      for (let r = 0; r < nt; r++) B[o + r] = u ** terms[r][0] * v ** terms[r][1];
    }
  }
  const keep = use.slice();
  const fit = new Float64Array(n);
  const AtA = new Float64Array(nt * nt);
  const Aty = new Float64Array(nt);
  const res = new Float64Array(n);
  for (let round = 0; round < 5; round++) {
    AtA.fill(0);
    Aty.fill(0);
    let m = 0;
    for (let k = 0; k < n; k++) {
      if (!keep[k]) continue;
      m++;
      const o = k * nt;
      const val = values[k];
      for (let r = 0; r < nt; r++) {
        const br = B[o + r];
        Aty[r] += br * val;
        for (let c = 0; c < nt; c++) AtA[r * nt + c] += br * B[o + c];
      }
    }
    if (m < nt * 2) break;
    const A = new Matrix(nt, nt);
    const y = new Matrix(nt, 1);
    for (let r = 0; r < nt; r++) {
      y.set(r, 0, Aty[r]);
      for (let c = 0; c < nt; c++) A.set(r, c, AtA[r * nt + c]);
    }
    const coef = solve(A, y).to1DArray();
    let nr = 0;
    for (let k = 0; k < n; k++) {
      const o = k * nt;
      let s = 0;
      for (let r = 0; r < nt; r++) s += coef[r] * B[o + r];
      fit[k] = s;
      if (use[k]) res[nr++] = Math.abs(values[k] - s);
    }
    const sigma = Math.max(0.003, 1.4826 * medianOfSorted(res.subarray(0, nr).sort()));
    let changed = false;
    for (let k = 0; k < n; k++) {
      const next = use[k] && Math.abs(values[k] - fit[k]) <= 3 * sigma ? 1 : 0;
      if (next !== keep[k]) changed = true;
      keep[k] = next;
    }
    if (!changed) break;
  }
  return fit;
}

/** Median of ascending values (mean of the middle two for an even count). */
function medianOfSorted(s: Float64Array): number {
  const n = s.length;
  return n % 2 ? s[(n - 1) / 2] : 0.5 * (s[n / 2 - 1] + s[n / 2]);
}

/**
 * Glare: the panel's camera luminance on a coarse rectified map (64 cells across), a robust low-order
 * surface fitted to its logarithm, and the compact regions standing above it by more than the limit.
 * Regions peaking next to the panel's edge are left to the mura analysis (edge glow, bleed).
 */
export function findGlare(q: QualityInput, limits: QualityLimits): GlareFinding | null {
  const aspect = q.panelSizeMm.width / q.panelSizeMm.height;
  const w = aspect >= 1 ? 64 : Math.max(8, Math.round(64 * aspect));
  const h = aspect >= 1 ? Math.max(8, Math.round(64 / aspect)) : 64;
  const rect = rectifyPlane(q.rawLum, q.corners, w, h);
  // which cells hold clipped camera pixels: only asked about when a region stands out (rare)
  let clipCells: Float32Array | null = null;
  const clipAt = (k: number): boolean => {
    clipCells ??= rectifyPlane({ width: q.rawLum.width, height: q.rawLum.height, data: Float32Array.from(q.clipMask) }, q.corners, w, h).plane.data;
    return clipCells[k] > 0;
  };
  const n = w * h;
  const logv = new Float64Array(n);
  const use = new Uint8Array(n);
  const floor = 1e-6;
  for (let k = 0; k < n; k++) {
    const i = k % w;
    const j = Math.floor(k / w);
    logv[k] = Math.log(Math.max(floor, rect.plane.data[k]));
    // the outermost cell ring straddles the edge transition
    use[k] = rect.valid[k] && i > 0 && j > 0 && i < w - 1 && j < h - 1 ? 1 : 0;
  }
  const black = q.pattern === 'black';
  const fit = robustLogSurface(logv, w, h, use, black ? 2 : 3);
  const limit = black ? limits.glareExcessBlack : limits.glareExcess;
  const thr = Math.log(1 + limit);
  const above = new Uint8Array(n);
  for (let k = 0; k < n; k++) if (use[k] && logv[k] - fit[k] > thr) above[k] = 1;
  // 8-connected regions
  const label = new Int32Array(n).fill(-1);
  const mi = Math.max(1, Math.round(limits.glareEdgeMargin * w));
  const mj = Math.max(1, Math.round(limits.glareEdgeMargin * h));
  let best: GlareFinding | null = null;
  const stack: number[] = [];
  let nextLabel = 0;
  for (let k0 = 0; k0 < n; k0++) {
    if (!above[k0] || label[k0] >= 0) continue;
    const id = nextLabel++;
    label[k0] = id;
    stack.push(k0);
    let count = 0;
    let peak = -Infinity;
    let peakK = k0;
    let clipped = false;
    while (stack.length) {
      const k = stack.pop()!;
      count++;
      const e = logv[k] - fit[k];
      if (e > peak) {
        peak = e;
        peakK = k;
      }
      if (!clipped && clipAt(k)) clipped = true;
      const i = k % w;
      const j = (k - i) / w;
      for (let dj = -1; dj <= 1; dj++)
        for (let di = -1; di <= 1; di++) {
          const ii = i + di;
          const jj = j + dj;
          if (ii < 0 || jj < 0 || ii >= w || jj >= h) continue;
          const kk = jj * w + ii;
          if (above[kk] && label[kk] < 0) {
            label[kk] = id;
            stack.push(kk);
          }
        }
    }
    const pi = peakK % w;
    const pj = (peakK - pi) / w;
    const nearEdge = pi < mi || pj < mj || pi >= w - mi || pj >= h - mj;
    const areaFraction = count / n;
    if (nearEdge || areaFraction > limits.glareMaxAreaFraction) continue;
    const g: GlareFinding = { peakExcess: Math.exp(peak) - 1, u: (pi + 0.5) / w, v: (pj + 0.5) / h, areaFraction, clipped };
    if (!best || g.peakExcess > best.peakExcess) best = g;
  }
  return best;
}

/** cos and sin of −2πk/n for k < n/2, per n (the FFT's twiddle factors), made once per size. */
const twiddleCache = new Map<number, { cos: Float64Array; sin: Float64Array }>();
function twiddles(n: number): { cos: Float64Array; sin: Float64Array } {
  let t = twiddleCache.get(n);
  if (!t) {
    const cos = new Float64Array(Math.max(1, n >> 1));
    const sin = new Float64Array(Math.max(1, n >> 1));
    for (let k = 0; k < n >> 1; k++) {
      cos[k] = Math.cos((-2 * Math.PI * k) / n);
      sin[k] = Math.sin((-2 * Math.PI * k) / n);
    }
    t = { cos, sin };
    twiddleCache.set(n, t);
  }
  return t;
}

/** In-place iterative radix-2 FFT of (re, im), length a power of two. */
export function fft(re: Float64Array, im: Float64Array): void {
  const n = re.length;
  for (let i = 1, j = 0; i < n; i++) {
    let bit = n >> 1;
    for (; j & bit; bit >>= 1) j ^= bit;
    j ^= bit;
    if (i < j) {
      let t = re[i];
      re[i] = re[j];
      re[j] = t;
      t = im[i];
      im[i] = im[j];
      im[j] = t;
    }
  }
  const { cos, sin } = twiddles(n);
  for (let len = 2; len <= n; len <<= 1) {
    const half = len >> 1;
    const stride = n / len;
    for (let i = 0; i < n; i += len) {
      for (let k = 0, t = 0; k < half; k++, t += stride) {
        const cr = cos[t];
        const ci = sin[t];
        const a = i + k;
        const b = a + half;
        const xr = re[b] * cr - im[b] * ci;
        const xi = re[b] * ci + im[b] * cr;
        re[b] = re[a] - xr;
        im[b] = im[a] - xi;
        re[a] += xr;
        im[a] += xi;
      }
    }
  }
}

/** In-place 2-D FFT of an N×N complex array (row-major). */
function fft2InPlace(re: Float64Array, im: Float64Array, N: number): void {
  for (let y = 0; y < N; y++) fft(re.subarray(y * N, y * N + N), im.subarray(y * N, y * N + N));
  // Columns: the same radix-2 steps as fft, each applied to whole rows at once (contiguous memory
  // instead of gathering every column), so every column gets exactly fft's arithmetic.
  const tmp = new Float64Array(N);
  for (let i = 1, j = 0; i < N; i++) {
    let bit = N >> 1;
    for (; j & bit; bit >>= 1) j ^= bit;
    j ^= bit;
    if (i < j) {
      for (const p of [re, im]) {
        tmp.set(p.subarray(i * N, i * N + N));
        p.copyWithin(i * N, j * N, j * N + N);
        p.set(tmp, j * N);
      }
    }
  }
  const { cos, sin } = twiddles(N);
  for (let len = 2; len <= N; len <<= 1) {
    const half = len >> 1;
    const stride = N / len;
    for (let i = 0; i < N; i += len) {
      for (let k = 0, t = 0; k < half; k++, t += stride) {
        const cr = cos[t];
        const ci = sin[t];
        const a = (i + k) * N;
        const b = a + half * N;
        for (let x = 0; x < N; x++) {
          const br = re[b + x];
          const bi = im[b + x];
          const xr = br * cr - bi * ci;
          const xi = br * ci + bi * cr;
          re[b + x] = re[a + x] - xr;
          im[b + x] = im[a + x] - xi;
          re[a + x] += xr;
          im[a + x] += xi;
        }
      }
    }
  }
}

/**
 * 2-D FFTs of one or two real N×N arrays (row-major) with one complex transform: Z = FFT(a + i b), then
 * A_k = (Z_k + conj Z_−k)/2 and B_k = (Z_k − conj Z_−k)/(2i).
 */
function fft2Real(a: Float64Array, b: Float64Array | null, N: number): { re: Float64Array; im: Float64Array }[] {
  const zr = Float64Array.from(a);
  const zi = b ? Float64Array.from(b) : new Float64Array(N * N);
  fft2InPlace(zr, zi, N);
  if (!b) return [{ re: zr, im: zi }];
  const ar = new Float64Array(N * N);
  const ai = new Float64Array(N * N);
  const br = new Float64Array(N * N);
  const bi = new Float64Array(N * N);
  for (let y = 0; y < N; y++) {
    const my = ((N - y) % N) * N;
    for (let x = 0; x < N; x++) {
      const k = y * N + x;
      const m = my + ((N - x) % N);
      const pr = zr[k];
      const pi = zi[k];
      const qr = zr[m];
      const qi = zi[m];
      ar[k] = 0.5 * (pr + qr);
      ai[k] = 0.5 * (pi - qi);
      br[k] = 0.5 * (pi + qi);
      bi[k] = -0.5 * (pr - qr);
    }
  }
  return [
    { re: ar, im: ai },
    { re: br, im: bi },
  ];
}

const sinc = (t: number) => (t === 0 ? 1 : Math.sin(Math.PI * t) / (Math.PI * t));

/** Copies the N×N window at (x0, y0) of each channel into c0, c1, c2; returns the channel means. */
function windowChannels(img: RgbImage, x0: number, y0: number, N: number, c0: Float64Array, c1: Float64Array, c2: Float64Array): number[] {
  const d = img.data;
  let m0 = 0;
  let m1 = 0;
  let m2 = 0;
  for (let j = 0; j < N; j++) {
    let k = ((y0 + j) * img.width + x0) * 3;
    for (let i = 0, o = j * N; i < N; i++, o++, k += 3) {
      const r = d[k];
      const g = d[k + 1];
      const b = d[k + 2];
      c0[o] = r;
      c1[o] = g;
      c2[o] = b;
      m0 += r;
      m1 += g;
      m2 += b;
    }
  }
  return [m0 / (N * N), m1 / (N * N), m2 / (N * N)];
}

/**
 * The strongest ripple of one window that survives into the map: over the frequencies with periods from
 * 2 to N/minK pixels (each real ripple once), the luminance ripple (spectra weighted by `weights`) and
 * the largest difference between two channels' ripples (its colour), attenuated by the map's box
 * average of width fw (none when 0).
 */
function scanSpectra(
  spectra: { re: Float64Array; im: Float64Array }[],
  weights: number[],
  N: number,
  minK: number,
  sumW: number,
  fw: number,
  colourTestPeriodPx: number,
  minPowerRatio: number,
): MoireFinding | null {
  const nU = spectra.length;
  // unused channels get weight 0 (and are left out of the colour test)
  const R0 = spectra[0].re;
  const I0 = spectra[0].im;
  const R1 = nU > 1 ? spectra[1].re : R0;
  const I1 = nU > 1 ? spectra[1].im : I0;
  const R2 = nU > 2 ? spectra[2].re : R0;
  const I2 = nU > 2 ? spectra[2].im : I0;
  const w0 = weights[0];
  const w1 = nU > 1 ? weights[1] : 0;
  const w2 = nU > 2 ? weights[2] : 0;
  const canColour = nU >= 2;
  const half = N / 2;
  // the box average's attenuation factors along x and y
  const attX = new Float64Array(half + 1);
  const attY = new Float64Array(N + 1);
  for (let k = 0; k <= half; k++) attX[k] = fw > 0 ? sinc((k / N) * fw) : 1;
  for (let k = -half; k <= half; k++) attY[k + half] = fw > 0 ? sinc((k / N) * fw) : 1;
  const toAmp = 2 / sumW;
  // first pass: each bin's luminance and colour ripple amplitudes, and its ring (integer radius)
  const aYs = new Float64Array(N * N);
  const aCs = new Float64Array(N * N);
  const ring = new Int32Array(N * N).fill(-1);
  const rings: number[][] = [];
  const ringsC: number[][] = [];
  for (let r = 0; r <= half + 1; r++) {
    rings.push([]);
    ringsC.push([]);
  }
  for (let ky = -half + 1; ky < half; ky++) {
    const row = ((ky + N) % N) * N;
    for (let kx = 0; kx < half; kx++) {
      if (kx === 0 && ky <= 0) continue; // each real ripple once
      const kk = Math.sqrt(kx * kx + ky * ky);
      if (kk < minK || kk > half) continue;
      const idx = row + kx;
      const r0 = R0[idx];
      const i0 = I0[idx];
      const r1 = R1[idx];
      const i1 = I1[idx];
      const r2 = R2[idx];
      const i2 = I2[idx];
      const lr = w0 * r0 + w1 * r1 + w2 * r2;
      const li = w0 * i0 + w1 * i1 + w2 * i2;
      const aY = toAmp * Math.sqrt(lr * lr + li * li);
      let aC = 0;
      if (canColour) {
        let dr = r0 - r1;
        let di = i0 - i1;
        aC = toAmp * Math.sqrt(dr * dr + di * di);
        if (nU > 2) {
          dr = r0 - r2;
          di = i0 - i2;
          aC = Math.max(aC, toAmp * Math.sqrt(dr * dr + di * di));
          dr = r1 - r2;
          di = i1 - i2;
          aC = Math.max(aC, toAmp * Math.sqrt(dr * dr + di * di));
        }
      }
      aYs[idx] = aY;
      aCs[idx] = aC;
      const r = Math.round(kk);
      ring[idx] = r;
      rings[r].push(aY * aY);
      ringsC[r].push(aC * aC);
    }
  }
  // the noise's power at each frequency radius: the median bin of its ring over ln 2 (a noise bin's
  // power is exponentially distributed, whose median is ln 2 of its mean); a ripple's few bins do not
  // move a median of dozens
  const noiseOf = (list: number[][]): Float64Array =>
    Float64Array.from(list, (v) => {
      if (v.length === 0) return 0;
      const sorted = Float64Array.from(v).sort();
      return sorted[sorted.length >> 1] / Math.LN2;
    });
  const noiseY = noiseOf(rings);
  const noiseC = noiseOf(ringsC);
  let best: MoireFinding | null = null;
  let bestAmp = -Infinity;
  for (let ky = -half + 1; ky < half; ky++) {
    const row = ((ky + N) % N) * N;
    const ay = attY[ky + half];
    for (let kx = 0; kx < half; kx++) {
      const idx = row + kx;
      const r = ring[idx];
      if (r < 0) continue;
      const pY = aYs[idx] * aYs[idx];
      const pC = aCs[idx] * aCs[idx];
      // amplitudes with the noise's mean power taken out, and how far each stands above that noise
      const aY = Math.sqrt(Math.max(0, pY - noiseY[r]));
      const aC = Math.sqrt(Math.max(0, pC - noiseC[r]));
      const coloured = canColour && aC >= 0.5 * aY;
      // beyond the colour test's reach (fine chroma is lost to JPEG chroma subsampling) any ripple counts
      const kk = Math.sqrt(kx * kx + ky * ky);
      if (canColour && !coloured && N / kk > colourTestPeriodPx) continue;
      const useY = aY > aC;
      const cam = useY ? aY : aC;
      const power = useY ? pY : pC;
      const noise = useY ? noiseY[r] : noiseC[r];
      if (!(cam > 0) || power < minPowerRatio * noise) continue;
      const amp = cam * Math.abs(attX[kx] * ay);
      if (amp > bestAmp) {
        bestAmp = amp;
        best = { amplitude: amp, cameraAmplitude: cam, periodPx: N / kk, angleDeg: (Math.atan2(ky, kx) * 180) / Math.PI, coloured };
      }
    }
  }
  return best;
}

/**
 * Moiré: square windows (Hann-tapered) inside the panel; per window the spectra of each usable colour
 * channel's relative ripple, of relative luminance, and of the channel differences (the ripple's
 * colour). Every frequency with a period from 2 to moireMaxPeriodPx pixels is weighed by the
 * attenuation of the map's box average; the strongest surviving coloured ripple is the finding.
 * Where fewer than two channels carry light (a primary colour field) the colour test cannot be made and
 * the luminance ripple alone counts.
 */
export function findMoire(q: QualityInput, limits: QualityLimits): MoireFinding | null {
  const img = q.image;
  const inner = shrink(q.corners, 0.9);
  const xs = inner.map((p) => p[0]);
  const ys = inner.map((p) => p[1]);
  const span = Math.min(Math.max(...xs) - Math.min(...xs), Math.max(...ys) - Math.min(...ys));
  let N = 256;
  while (N > 32 && N > 0.5 * span) N >>= 1;
  if (N > 0.5 * span) return null;
  const H = panelToCamera(q.corners);
  const at = (u: number, v: number): Point => {
    const w = H[6] * u + H[7] * v + H[8];
    return [(H[0] * u + H[1] * v + H[2]) / w, (H[3] * u + H[4] * v + H[5]) / w];
  };
  const hann = new Float64Array(N);
  for (let i = 0; i < N; i++) hann[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * (i + 0.5)) / N);
  let sumW = 0;
  for (let j = 0; j < N; j++) for (let i = 0; i < N; i++) sumW += hann[i] * hann[j];
  const fw = q.mapFootprintPx > 1 ? q.mapFootprintPx : 0;
  const minK = Math.ceil(N / limits.moireMaxPeriodPx);
  let best: MoireFinding | null = null;
  for (const [u, v] of [
    [0.5, 0.5],
    [0.3, 0.5],
    [0.7, 0.5],
  ]) {
    const [cx, cy] = at(u, v);
    const x0 = Math.round(cx - N / 2);
    const y0 = Math.round(cy - N / 2);
    const box: Point[] = [
      [x0, y0],
      [x0 + N - 1, y0],
      [x0 + N - 1, y0 + N - 1],
      [x0, y0 + N - 1],
    ];
    if (!box.every(([x, y]) => insideQuad(inner, x, y) && x >= 0 && y >= 0 && x < img.width && y < img.height)) continue;
    const ch = [new Float64Array(N * N), new Float64Array(N * N), new Float64Array(N * N)];
    const mean = windowChannels(img, x0, y0, N, ch[0], ch[1], ch[2]);
    const top = Math.max(...mean);
    if (!(top > 0)) continue;
    const usable = [0, 1, 2].filter((c) => mean[c] >= 0.05 * top);
    // relative ripple per channel, windowed, with its windowed mean removed (in place over ch)
    const ripples = usable.map((c) => {
      const s = ch[c];
      let wm = 0;
      for (let j = 0; j < N; j++) for (let i = 0; i < N; i++) wm += hann[i] * hann[j] * s[j * N + i];
      wm /= sumW;
      for (let j = 0; j < N; j++) for (let i = 0; i < N; i++) s[j * N + i] = (hann[i] * hann[j] * (s[j * N + i] - wm)) / mean[c];
      return s;
    });
    // two real channels per complex transform
    const spectra: { re: Float64Array; im: Float64Array }[] = [];
    for (let s = 0; s < ripples.length; s += 2) spectra.push(...fft2Real(ripples[s], ripples[s + 1] ?? null, N));
    // luminance weights of the usable channels (BT.709), renormalised
    const wY = [0.2126, 0.7152, 0.0722];
    const lw = usable.map((c) => wY[c] * mean[c]);
    const lsum = lw.reduce((x, y) => x + y, 0);
    const found = scanSpectra(spectra, lw.map((x) => x / lsum), N, minK, sumW, fw, limits.moireColourTestPeriodPx, limits.moireMinPowerRatio);
    if (found && (!best || found.amplitude > best.amplitude)) best = found;
  }
  return best;
}

/** Measure every gate's figure and decide; never throws for a bad photo (see checkPanelQuality). */
export function assessPanelQuality(q: QualityInput, limits: QualityLimits): QualityOutcome {
  const { rawLum, clipMask, corners } = q;
  const w = rawLum.width;
  const h = rawLum.height;
  const problems: QualityOutcome['problems'] = [];
  const warnings: string[] = [];
  // an outline given by hand can be anything: every gate below needs a proper quadrilateral
  const proper =
    corners.every((p) => Number.isFinite(p[0]) && Number.isFinite(p[1])) &&
    isConvexClockwise(corners) &&
    signedArea(corners) >= 16 &&
    cornerAngles(corners).every((a) => a >= 5 && a <= 175);
  if (!proper) {
    return {
      figures: { pixels: 0, clippedFraction: 0, medianCode: 0, edges: [], glare: null, moire: null, flicker: null, viewAngleMaxDeg: q.viewAngleMaxDeg },
      problems: [
        {
          code: 'no-panel',
          message:
            'the panel outline is not a convex quadrilateral (corners top-left, top-right, bottom-right, bottom-left; every corner angle 5–175°; at least 16 pixels)',
        },
      ],
      warnings,
    };
  }
  // shrink the outline 3 % towards its centre so edge pixels do not count
  const inner = shrink(corners, 0.97);
  const xs = inner.map((p) => p[0]);
  const ys = inner.map((p) => p[1]);
  const x0 = Math.max(0, Math.floor(Math.min(...xs)));
  const x1 = Math.min(w - 1, Math.ceil(Math.max(...xs)));
  const y0 = Math.max(0, Math.floor(Math.min(...ys)));
  const y1 = Math.min(h - 1, Math.ceil(Math.max(...ys)));
  const step = Math.max(1, Math.floor(Math.sqrt(((x1 - x0) * (y1 - y0)) / 250_000)));
  let n = 0;
  let clipped = 0;
  const sample = new Float32Array(Math.floor((x1 - x0) / step + 1) * Math.floor((y1 - y0) / step + 1));
  const lumData = rawLum.data;
  for (let y = y0; y <= y1; y += step) {
    // the lattice points of this row inside the quadrilateral: one run (it is convex)
    const run = quadRowRun(inner, y, x0, x1, step);
    if (run === null) continue;
    for (let x = run[0], k = y * w + run[0]; x <= run[1]; x += step, k += step) {
      if (clipMask[k]) clipped++;
      sample[n++] = lumData[k];
    }
  }
  if (n === 0) {
    return {
      figures: { pixels: 0, clippedFraction: 0, medianCode: 0, edges: [], glare: null, moire: null, flicker: null, viewAngleMaxDeg: q.viewAngleMaxDeg },
      problems: [{ code: 'no-panel', message: 'the panel outline encloses no pixels' }],
      warnings,
    };
  }
  const median = selectKth(sample.subarray(0, n), Math.floor(n / 2));
  const medianCode = q.response ? transferEncode(q.response, Math.max(0, median)) : srgbEncode(Math.max(0, median));
  const clippedFraction = clipped / n;
  const dark = medianCode < limits.minPanelCode;

  // glare (needs light to see against; a panel lost in the floor is refused as too dark instead)
  const glare = dark ? null : findGlare(q, limits);
  if (glare) {
    problems.push({
      code: 'glare',
      message:
        `a bright patch at u ${glare.u.toFixed(2)}, v ${glare.v.toFixed(2)} (${(100 * glare.areaFraction).toFixed(1)} % of the panel) ` +
        `stands ${(100 * glare.peakExcess).toFixed(0)} % above the rest of the panel (limit ${(100 * (q.pattern === 'black' ? limits.glareExcessBlack : limits.glareExcess)).toFixed(0)} %)` +
        `${glare.clipped ? ' and is clipped' : ''}: a reflection on the screen? Darken the room or move the light or the camera`,
    });
  }
  if (clippedFraction > limits.maxClippedFraction) {
    problems.push({
      code: 'clipped',
      message: `${(100 * clippedFraction).toFixed(2)} % of the panel is clipped (limit ${(100 * limits.maxClippedFraction).toFixed(2)} %): shorten the exposure`,
    });
  } else if (clipped > 0) {
    warnings.push(`${(100 * clippedFraction).toFixed(3)} % of the panel pixels are at the clip level`);
  }
  if (dark) {
    problems.push({
      code: 'too-dark',
      message: `the panel is too dark to measure (median code ${(255 * medianCode).toFixed(1)} of 255, need ${(255 * limits.minPanelCode).toFixed(0)}): lengthen the exposure`,
    });
  }

  // blur: the worst traceable side (motion blur widens only the sides across the motion)
  const edges = q.pattern === 'black' || dark ? [] : edgeWidths(rawLum, corners, q.panelSizeMm);
  const traced = edges.filter((e) => e.px !== null && e.mm !== null);
  const limitMm = limits.maxEdgeWidthFeatureFraction * q.minFeatureMm;
  const blurred = traced.filter((e) => e.px! > limits.sharpEdgePx && e.mm! > limitMm);
  if (blurred.length > 0) {
    const worst = blurred.reduce((a, b) => (b.mm! > a.mm! ? b : a));
    const names = blurred.map((e) => e.side).join(', ');
    problems.push({
      code: 'blurred',
      message:
        `the panel outline is blurred (${names} edge${blurred.length > 1 ? 's' : ''}; worst ${worst.px!.toFixed(1)} px = ${worst.mm!.toFixed(1)} mm wide, ` +
        `limit ${limits.sharpEdgePx} px and ${limitMm.toFixed(1)} mm, half the smallest feature sought): refocus or steady the camera`,
    });
  } else if (q.pattern !== 'black' && !dark && traced.length < 2) {
    warnings.push('the sharpness of the panel outline could not be checked (edges too faint to trace)');
  }

  // flicker bands along the camera's rows
  const flicker = dark || !(limits.maxFlickerPct > 0) ? null : findFlicker(rawLum, corners, { scale: q.scale, tileGrid: q.tileGrid ?? null });
  if (flicker && 100 * flicker.peakToPeak > Math.min(limits.warnFlickerPct, limits.maxFlickerPct)) {
    const t = q.exposureTimeS;
    const what =
      `bands along the camera's rows, ${(100 * flicker.peakToPeak).toFixed(1)} % peak to peak every ${flicker.periodSensorRows.toFixed(0)} rows of the photo ` +
      `(${flicker.cycles.toFixed(1)} cycles, the same across the panel)` +
      (t ? ` at an exposure of ${t >= 1 ? `${t} s` : `1/${Math.round(1 / t)} s`}` : '') +
      ": the display's pulsed dimming (PWM) caught by the camera's rolling shutter?";
    const how =
      'retake with a longer exposure (1/30 s or longer; lower the ISO or stop down to keep the level), or at full display brightness, where many backlights do not pulse; ' +
      "if the panel itself is striped along the camera's rows, turn the camera 10–20° about its axis (flicker bands stay along the camera's rows)";
    if (100 * flicker.peakToPeak > limits.maxFlickerPct) {
      problems.push({ code: 'flicker', message: `${what} (limit ${limits.maxFlickerPct} %): ${how}, or raise --max-flicker` });
    } else {
      warnings.push(`${what} (warned from ${limits.warnFlickerPct} %, refused from ${limits.maxFlickerPct} %): mura bands along them may be this ripple; ${how}`);
    }
  }

  // moiré
  const moire = dark ? null : findMoire(q, limits);
  const staircase = (q.codePlateauShare ?? 0) * (q.response ? transferCodeStepPct(q.response, Math.min(1, Math.max(1e-6, median))) : srgbCodeStepPct(Math.min(1, Math.max(1e-6, median)))) / 100;
  if (moire && moire.amplitude > limits.maxMoireAmplitude && moire.cameraAmplitude > staircase) {
    problems.push({
      code: 'moire',
      message:
        `moiré: a ${moire.coloured ? 'coloured ' : ''}ripple of period ${moire.periodPx.toFixed(1)} px and ${(100 * moire.cameraAmplitude).toFixed(1)} % amplitude ` +
        `(${(100 * moire.amplitude).toFixed(1)} % left after the map's averaging, limit ${(100 * limits.maxMoireAmplitude).toFixed(1)} %): ` +
        'change the distance or zoom slightly, or defocus a little',
    });
  }

  // viewing angle
  const va = q.viewAngleMaxDeg;
  if (va === null) {
    warnings.push('the viewing angle could not be checked (no focal length in the photo\'s EXIF): keep the panel\'s corners within about 10° of the camera axis');
  } else if (va > limits.maxViewAngleDeg) {
    problems.push({
      code: 'too-oblique',
      message:
        `part of the panel is seen ${va.toFixed(1)}° off its normal (limit ${limits.maxViewAngleDeg}°): too oblique to measure, as the panel's own ` +
        'angular emission and the foreshortening dominate; shoot square-on from farther away with a longer lens',
    });
  } else if (va > limits.warnViewAngleDeg) {
    warnings.push(`part of the panel is seen ${va.toFixed(1)}° off its normal: the panel's own angular emission may bias the corner values by a few percent`);
  }

  // deep flicker bands also pass for glare (a bright band) and for a blurred edge (one that falls in a
  // dark band): named first, with its own code, since retaking at a longer exposure mends them all
  const fi = problems.findIndex((p) => p.code === 'flicker');
  if (fi > 0) problems.unshift(...problems.splice(fi, 1));
  return {
    figures: { pixels: n, clippedFraction, medianCode, edges, glare, moire, flicker, viewAngleMaxDeg: va },
    problems,
    warnings,
  };
}

/** Throws EvenfieldError for an unmeasurable photo (the first failing gate's code, every failing gate
 *  named in the message); returns warnings and figures for a measurable one. */
export function checkPanelQuality(file: string, q: QualityInput, limits: QualityLimits): QualityOutcome & { clippedFraction: number; medianCode: number } {
  const out = assessPanelQuality(q, limits);
  if (out.problems.length > 0) {
    const [first, ...rest] = out.problems;
    const also = rest.length > 0 ? `; also ${rest.map((p) => `${p.code}: ${p.message}`).join('; ')}` : '';
    throw new EvenfieldError(first.code, first.message + also, file);
  }
  return { ...out, clippedFraction: out.figures.clippedFraction, medianCode: out.figures.medianCode };
}
