// Find the lit active area of a display in a photo: a coarse outline from a thresholded, downsampled
// copy (coarse.ts), then sub-pixel edge lines from luminance profiles across each edge (edges.ts), and
// the corners where adjacent lines meet.

import { EvenfieldError } from '../errors.js';
import type { Corners, Pattern, Plane, Point } from '../types.js';
import { coarseQuad, downsampleLog, findCandidates, type CoarseCandidate } from './coarse.js';
import { edgeBow, edgeSpreadWidth, fitEdge, ProfileScratch, type EdgeFit, type EdgeOptions } from './edges.js';
import { checkQuadrilateral, intersectLines } from './quad.js';

export interface FindPanelOptions {
  /** Test pattern shown, if known; only used to word error messages (black fields have weak edges). */
  pattern?: Pattern;
  /** Long side of the downsampled copy used for the coarse outline, pixels. Default 480. */
  coarseMaxSize?: number;
  /** Smallest panel area as a fraction of the frame. Default 0.02. */
  minAreaFraction?: number;
  /** Smallest ratio of a candidate region's area to its convex hull's area. Default 0.85. */
  minSolidity?: number;
  /** Smallest mean log-luminance step across a candidate's coarse outline (0.25 = ratio 1.28). Default 0.25. */
  minCoarseContrast?: number;
  /** Largest number of profiles per edge. Default 120. */
  maxProfilesPerEdge?: number;
  /** Fraction of each side left out next to each corner. Default 0.06. */
  cornerMargin?: number;
  /**
   * Half-width (pixels) of the along-edge average in each profile. Default: half the profile spacing,
   * between 2 and 10, so the profiles together use most pixels along each edge.
   */
  profileHalfWidthPx?: number;
  /** A profile counts only if inside level >= this times the outside level. Default 1.3. */
  minEdgeRatio?: number;
  /** A profile counts only if its step is at least this many times its own noise. Default 3. */
  minStepSnr?: number;
  /** Drop profiles whose log contrast is below this fraction of the edge's median (glare). Default 0.5. */
  glareContrastFraction?: number;
  /**
   * Largest level gradient across an edge that is modelled (falloff, veiling glare), as a fraction of the
   * level per pixel of the input plane. Steeper gradients are structure, not shading. Default 0.01
   * (a 60 % corner falloff on a 400-pixel-wide image stays under about 0.006).
   */
  maxLevelSlope?: number;
  /** Each edge needs at least this fraction of its profiles in the final fit. Default 0.25. */
  minInlierFraction?: number;
  /** Edge signal-to-noise at which an edge's contribution to `strength` is one half. Default 20. */
  strengthHalfSnr?: number;
  /** Plausible interior corner angles, degrees. Defaults 40 and 140. */
  minCornerAngleDeg?: number;
  maxCornerAngleDeg?: number;
}

export interface PanelFind {
  /** top-left, top-right, bottom-right, bottom-left, in the input plane's pixel coordinates */
  corners: Corners;
  /** rms distance of the edge points to their fitted lines, input-plane pixels */
  edgeResidualPx: number;
  /** median ratio of the luminance just inside the edges to that just outside */
  edgeContrast: number;
  /**
   * 0..1: how clearly the edges were seen. The weakest edge's (fraction of profiles used) x snr/(snr + h),
   * snr being the median step over the noise of one profile sample and h = strengthHalfSnr.
   */
  strength: number;
  /** 10-90 % width of the edge transition (median over the edges), input-plane pixels; NaN if not traceable */
  edgeWidthPx: number;
  /** per edge (top, right, bottom, left): profiles used / profiles taken */
  edgeInlierFractions: [number, number, number, number];
  /** largest sagitta of the edges' arcs about their fitted lines (edgeBow), input-plane pixels: lens
   *  distortion or a curved panel */
  edgeBowPx: number;
}

type Resolved = Required<Omit<FindPanelOptions, 'profileHalfWidthPx' | 'pattern'>> & {
  profileHalfWidthPx: number | undefined;
  pattern: Pattern | undefined;
};

function resolve(o: FindPanelOptions): Resolved {
  return {
    coarseMaxSize: o.coarseMaxSize ?? 480,
    minAreaFraction: o.minAreaFraction ?? 0.02,
    minSolidity: o.minSolidity ?? 0.85,
    minCoarseContrast: o.minCoarseContrast ?? 0.25,
    maxProfilesPerEdge: o.maxProfilesPerEdge ?? 120,
    cornerMargin: o.cornerMargin ?? 0.06,
    profileHalfWidthPx: o.profileHalfWidthPx,
    pattern: o.pattern,
    minEdgeRatio: o.minEdgeRatio ?? 1.3,
    minStepSnr: o.minStepSnr ?? 3,
    glareContrastFraction: o.glareContrastFraction ?? 0.5,
    maxLevelSlope: o.maxLevelSlope ?? 0.01,
    minInlierFraction: o.minInlierFraction ?? 0.25,
    strengthHalfSnr: o.strengthHalfSnr ?? 20,
    minCornerAngleDeg: o.minCornerAngleDeg ?? 40,
    maxCornerAngleDeg: o.maxCornerAngleDeg ?? 140,
  };
}

const EDGE_NAMES = ['top', 'right', 'bottom', 'left'] as const;

function median(v: number[]): number {
  const c = v.filter((x) => Number.isFinite(x)).sort((a, b) => a - b);
  if (c.length === 0) return Number.NaN;
  const n = c.length;
  return n % 2 ? c[(n - 1) / 2] : 0.5 * (c[n / 2 - 1] + c[n / 2]);
}

interface Refined {
  corners: Corners;
  fits: EdgeFit[];
  widths: number[];
}

/** Profile all four edges of the quadrilateral q and intersect the fitted lines. */
function refineOnce(
  lum: Plane,
  q: Corners,
  g: number,
  R: number,
  o: Resolved,
  scratch: ProfileScratch,
  rough: boolean,
): EdgeFit[] {
  const fits: EdgeFit[] = [];
  // The first, rough pass only has to bring the lines within a pixel or so: fewer, thinner profiles.
  const maxProfiles = rough ? Math.min(48, o.maxProfilesPerEdge) : o.maxProfilesPerEdge;
  for (let e = 0; e < 4; e++) {
    const a = q[e];
    const b = q[(e + 1) % 4];
    const len = Math.hypot(b[0] - a[0], b[1] - a[1]);
    const usable = len * (1 - 2 * o.cornerMargin);
    const spacing = usable / maxProfiles;
    const autoHalf = Math.max(2, Math.min(rough ? 3 : 10, Math.floor((spacing - 1) / 2)));
    const half = o.profileHalfWidthPx ?? autoHalf;
    const eo: EdgeOptions = {
      maxProfilesPerEdge: maxProfiles,
      cornerMargin: o.cornerMargin,
      profileHalfWidthPx: half,
      minEdgeRatio: o.minEdgeRatio,
      minStepSnr: o.minStepSnr,
      glareContrastFraction: o.glareContrastFraction,
      maxLevelSlope: o.maxLevelSlope,
    };
    const fit = fitEdge(lum, a, b, g, R, eo, scratch, rough ? 'peak' : 'area');
    if (!fit || fit.inliers / fit.profiles.length < o.minInlierFraction) {
      // An edge whose profiles run off the image lies along or beyond the frame border.
      const off = fit ? fit.offFrame / fit.profiles.length : offFrameFraction(lum, a, b, R);
      if (off > 0.3) {
        throw new EvenfieldError('partly-outside', `the panel's ${EDGE_NAMES[e]} edge runs off the frame`);
      }
    }
    if (!fit) throw new EvenfieldError('no-panel', `the panel's ${EDGE_NAMES[e]} edge could not be traced`);
    const frac = fit.inliers / fit.profiles.length;
    if (frac < o.minInlierFraction) {
      throw new EvenfieldError(
        'no-panel',
        `the panel's ${EDGE_NAMES[e]} edge is unclear (only ${(100 * frac).toFixed(0)} % of its profiles usable)`,
      );
    }
    fits.push(fit);
  }
  return fits;
}

/** Fraction of the side a-b (inside the corner margins) whose profiles of half-length R leave the image. */
function offFrameFraction(lum: Plane, a: Point, b: Point, R: number): number {
  const dx = b[0] - a[0];
  const dy = b[1] - a[1];
  const len = Math.hypot(dx, dy);
  if (!(len > 0)) return 1;
  const nx = dy / len;
  const ny = -dx / len;
  let off = 0;
  const N = 32;
  for (let k = 0; k < N; k++) {
    const t = (k + 0.5) / N;
    const x = a[0] + t * dx;
    const y = a[1] + t * dy;
    for (const s of [-R, R]) {
      const xx = x + s * nx;
      const yy = y + s * ny;
      if (xx < 0 || yy < 0 || xx > lum.width - 1 || yy > lum.height - 1) {
        off++;
        break;
      }
    }
  }
  return off / N;
}

function cornersFromFits(fits: EdgeFit[]): Corners {
  const [top, right, bottom, left] = fits.map((f) => f.line);
  const pts = [
    intersectLines(top, left),
    intersectLines(top, right),
    intersectLines(bottom, right),
    intersectLines(bottom, left),
  ];
  return pts.map((p) => (p ? p : [Number.NaN, Number.NaN])) as Corners;
}

function refine(lum: Plane, start: Corners, f: number, o: Resolved): Refined {
  const scratch = new ProfileScratch(256);
  // Pass 1: the steepest drop near the coarse outline, searched over a few coarse pixels either side.
  let g = 1.5 * f + 4;
  let R = g + 3;
  let q = start;
  let fits = refineOnce(lum, q, g, R, o, scratch, true);
  q = cornersFromFits(fits);
  // For a Gaussian spread, the 10-90 % width is 1.09 times the FWHM of the drop (2.563 σ vs 2.355 σ);
  // the 1-px Gaussian smoothing of pass 1 (FWHM 2.355 px) is taken out in quadrature first.
  let widths = fits.map((fit) => 1.09 * Math.sqrt(Math.max(0, fit.lsfFwhm ** 2 - 2.355 ** 2)));
  // Passes 2 and 3: windows sized to the measured edge width, centred on the previous lines. The
  // integration window reaches just past the blur (a Gaussian edge is within 1 % of its levels 0.91 of
  // the 10-90 % width from its centre; bilinear sampling adds up to half a pixel), the level windows just
  // beyond it, so a narrow bezel matters as little as possible.
  for (let pass = 0; pass < 2; pass++) {
    checkQuadrilateral(q, lum.width, lum.height, {
      minCornerAngleDeg: o.minCornerAngleDeg,
      maxCornerAngleDeg: o.maxCornerAngleDeg,
      minAreaFraction: o.minAreaFraction,
    });
    const w = median(widths);
    g = Math.max(2, (Number.isFinite(w) ? w : 2) + 1);
    R = g + Math.max(4, 0.75 * g);
    fits = refineOnce(lum, q, g, R, o, scratch, false);
    q = cornersFromFits(fits);
  }
  widths = fits.map((fit) => edgeSpreadWidth(lum, fit, R, 3));
  return { corners: q, fits, widths };
}

/**
 * Locate the panel's active area in a linear luminance plane. Throws EvenfieldError 'no-panel' when no
 * plausible outline is found and 'partly-outside' when the panel runs off the frame.
 * The panel is assumed upright in the photo (roll well under 45°); perspective may make it any convex
 * quadrilateral. Works on uncorrected falloff: every profile uses its own local levels.
 */
export function findPanel(lum: Plane, opts: FindPanelOptions = {}): PanelFind {
  const o = resolve(opts);
  if (lum.width < 16 || lum.height < 16) throw new EvenfieldError('no-panel', 'image too small to find a panel in');
  const coarse = downsampleLog(lum, o.coarseMaxSize);
  const cands = findCandidates(coarse, {
    coarseMaxSize: o.coarseMaxSize,
    minAreaFraction: o.minAreaFraction,
    minSolidity: o.minSolidity,
  }).filter((c) => c.contrast >= o.minCoarseContrast);
  // Try the clearest candidates first. Candidates cut by the frame border are tried too: a glare patch
  // reaching the border can join the panel's region, and the robust outline fit ignores it; a panel that
  // really is cut by the frame fails with 'partly-outside' (a corner or an edge off the image).
  const order = [...cands].sort((a, b) => b.contrast - a.contrast);
  if (order.length === 0) {
    throw new EvenfieldError('no-panel', 'no bright, roughly quadrilateral region found' + darkHint(o.pattern));
  }
  let firstError: unknown = null;
  const tried: CoarseCandidate[] = [];
  for (const cand of order) {
    if (tried.length >= 4) break;
    // The same region found at several thresholds: skip near-duplicates.
    if (
      tried.some(
        (t) => Math.abs(t.area - cand.area) < 0.02 * cand.area && t.bbox.every((v, i) => Math.abs(v - cand.bbox[i]) <= 2),
      )
    ) {
      continue;
    }
    tried.push(cand);
    try {
      const start = coarseQuad(cand, coarse);
      if (!start) throw new EvenfieldError('no-panel', 'the bright region has no clear four sides');
      checkQuadrilateral(start as Corners, lum.width, lum.height, {
        minCornerAngleDeg: o.minCornerAngleDeg,
        maxCornerAngleDeg: o.maxCornerAngleDeg,
        minAreaFraction: o.minAreaFraction,
      });
      const r = refine(lum, start as Corners, coarse.f, o);
      checkQuadrilateral(r.corners, lum.width, lum.height, {
        minCornerAngleDeg: o.minCornerAngleDeg,
        maxCornerAngleDeg: o.maxCornerAngleDeg,
        minAreaFraction: o.minAreaFraction,
      });
      return summarise(r, o);
    } catch (e) {
      if (!(e instanceof EvenfieldError)) throw e;
      // A panel cut by the frame: report it, unless a larger candidate is still to be tried.
      if (e.code === 'partly-outside' && !order.some((c) => !tried.includes(c) && c.area > cand.area)) throw e;
      if (firstError === null || (e.code === 'partly-outside' && !(firstError instanceof EvenfieldError && firstError.code === 'partly-outside'))) {
        firstError = e;
      }
    }
  }
  if (firstError instanceof EvenfieldError && firstError.code === 'no-panel') {
    throw new EvenfieldError('no-panel', firstError.message + darkHint(o.pattern));
  }
  throw firstError ?? new EvenfieldError('no-panel', 'no panel outline found' + darkHint(o.pattern));
}

function darkHint(pattern: Pattern | undefined): string {
  return pattern === 'black'
    ? ' (a black field has weak edges: take the corners from a bright photo taken from the same position)'
    : '';
}

function summarise(r: Refined, o: Resolved): PanelFind {
  let ss = 0;
  for (const f of r.fits) ss += f.residualRms * f.residualRms;
  let strength = 1;
  const fractions = r.fits.map((f) => f.inliers / f.profiles.length);
  r.fits.forEach((f, i) => {
    const s = fractions[i] * (f.snr / (f.snr + o.strengthHalfSnr));
    if (s < strength) strength = s;
  });
  const corners = r.corners.map((p) => [p[0], p[1]] as Point) as Corners;
  return {
    corners,
    edgeResidualPx: Math.sqrt(ss / r.fits.length),
    edgeContrast: median(r.fits.map((f) => f.contrastRatio)),
    strength: Math.max(0, Math.min(1, strength)),
    edgeWidthPx: median(r.widths),
    edgeInlierFractions: fractions as [number, number, number, number],
    edgeBowPx: Math.max(...r.fits.map((f) => edgeBow(f).bowPx)),
  };
}
