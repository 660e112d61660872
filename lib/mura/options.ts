// Options of the mura analysis, their documented defaults and validation.

import { EvenfieldError } from '../errors.js';
import type { Pattern } from '../types.js';
import type { ResponseCurve } from '../photometry/index.js';
import { DEFAULT_SEMU_CONSTANTS, type SemuConstants } from './semu.js';

export interface BackgroundOptions {
  /** order of the whole-panel polynomial surface that counts as smooth variation (default 4 on lit
   *  fields, 2 on black, where a stiffer surface leaves a glow's tails to the glow). Orders above 4 start
   *  to swallow clouds. */
  order: number;
  /** cells of the coarse grid the surface is fitted on, mm (default: long side / 80, at least 2 map px) */
  cellMm: number | null;
  /** cells whose residual is beyond this many robust sigmas are left out of the fit (default 3) */
  clipSigma: number;
  /** fit -> detect -> mask -> refit rounds (default 3) */
  rounds: number;
  /** found features are masked out to this multiple of their half-peak radius before the refit
   *  (default 2.5; shrunk when the mask would cover more than maxMaskedFraction of the panel) */
  maskRadiusFactor: number;
  /** largest fraction of the panel the feature mask may cover (default 0.5) */
  maxMaskedFraction: number;
  /** lit fields: weight of the edge cells towards the corners (see cornerZone) in the surface fit,
   *  relative to the other cells (default 10). A few corner cells against thousands inside leave the
   *  corners to the polynomial's swing, which on clean generated fields read as corner "spots" of up to
   *  9 % (an order-4 surface under a steep roll-off, or pulled by a large cloud inside). Higher keeps the
   *  surface on the panel's own level there, at the cost of features touching those edges being partly
   *  absorbed. Accuracy study (scripts/mura-accuracy.ts): false findings of SEMU >= 1 on clean fields
   *  0.83 per photo unweighted, 0.23 with the defaults. */
  edgeWeight: number;
  /** the weighted edge cells lie within this fraction of the panel's width and height from a corner
   *  (default 0.3: the outer 30 % of each edge; all edge cells at 0.5). The middle of each edge is left
   *  unweighted so that a periodic structure along it (a hot-spot array) is not pinned. */
  cornerZone: number;
  /** the margin masked past a feature's half-peak region is at most this fraction of the panel's short
   *  side (default 0.1); the feature's measured tails are masked whatever their reach */
  maskPadMaxFraction: number;
  /** lit fields: round clouds at least this fraction of the panel's short side across (half-peak,
   *  equal-area diameter) are measured again against a surface fitted together with a Gaussian bump of
   *  their size (default 0.3; see remeasureLargeClouds in analyse.ts). Accuracy study: contrast within
   *  25 % 89.9 -> 94.4 %, area within 30 % 86.5 -> 91.0 % of features of SEMU >= 2 */
  bumpMinFraction: number;
  /** ...and whose mean contrast is at least this (%, default 2): fainter ones are as likely the
   *  surface missing a sharp-peaked roll-off, which a bump would fit and so make stronger */
  bumpMinContrastPct: number;
  /** a cloud centred on the surface's peak or dip inside the panel, whose contrast is at most this share
   *  of the surface's whole fall (max - min over max; default 0.1), is explained both as a radial
   *  roll-off about it and as a cloud, and left out if the roll-off explains it better (see
   *  dropRollOffClouds in analyse.ts). The false "clouds" a sharp-peaked or flat-topped roll-off leaves measured 2-6 % of
   *  its fall (generated panels and photos, 19-44 % fall). 0 turns the test off. */
  rollOffMaxShare: number;
  /** ...and it is left out when, within 3 times its radius, the surface with a radial roll-off about it
   *  leaves less model error (rms cell residual less the cells' noise) than this times what a surface with
   *  a Gaussian cloud of its size leaves (default 1: the better of two explanations with as many free
   *  parameters). Measured ratios: false clouds of generated roll-offs 0.46-0.96, real clouds at a
   *  roll-off's peak 1.07 and more */
  rollOffMaxErrorRatio: number;
  /** black fields: a finding is kept only if a feature of its sign is also found over some of its pixels
   *  against a surface of this order, fitted with the same features masked (default 4; 0 = off). An order-2
   *  surface cannot follow a strong drop-off, which the black field shares with the lit ones: what it
   *  leaves along the edges and in the corners reads as weak glows and specks (the demo's HX27-3103,
   *  55 % corner loss: five glows and a corner speck of SEMU 3.5 on black, none of them found against
   *  order 4). A real glow's exponential fall is too sharp for order 4 to follow, so it is found against
   *  both, and measured against the order-2 surface. */
  blackCheckOrder: number;
  /** lit fields: when at least this many round clouds of one sign, of bumpMinContrastPct and more, are
   *  found (default 2; 0 = never), the surface is fitted once more together with a Gaussian bump for each
   *  of them (a lone cloud of the other sign beside them is left masked, as it is as likely the panel's
   *  own level between them), and every feature is found again against that surface (see jointCloudFit
   *  in analyse.ts). Three clouds
   *  of 94-118 mm on a 600 x 340 mm panel (test/mura/large-clouds.test.ts): against the common surface
   *  23-26 % faint, 27-30 % small, with two false dark clouds between them; with the joint fit contrast
   *  +3 %, area +1 to +7 %, none. Accuracy study: both sets' tallies unchanged, unmatched findings
   *  13 -> 12 and 23 -> 22. A single cloud is left to remeasureLargeClouds: joined, a faint band on its
   *  flank was lost (first set, seed 1036); so was one with clouds of either sign joined (second set,
   *  seed 1159), and the 25 MP study photo's bright cloud came out 3.7 % instead of 8.9 % */
  jointMinClouds: number;
  /** lit fields: a round feature (spot or cloud) whose peak lies within 1.5 of its equivalent radii of the
   *  panel's edge is measured again against a quadratic of the luminance fitted over a ring this many of its
   *  radii (inner) to edgeRingOuter radii (outer) around it (default 3; 0 = off; see remeasureEdgeFeatures
   *  in analyse.ts; the other reported features are kept out of the ring). The whole-panel surface is
   *  freest at the edges and took 20-55 % of such features'
   *  contrast. Accuracy study, scenes with the features moved against the edges (`--edges`): contrast
   *  within 25 % 79.5 -> 88.0 % (85.1 -> 97.9 % of the features standing alone), area within 30 %
   *  91.6 -> 92.8 %; the usual sets unchanged or better */
  edgeRingInner: number;
  /** ...the ring's outer radius in the feature's radii (default 4.8) */
  edgeRingOuter: number;
  /** ...features of at least this SEMU are measured so (default 1; 0.5 changed nothing in the study) */
  edgeRingMinSemu: number;
  /** ...and the new figures are taken only when no sector of the ring (12 around x 2 across) is off the
   *  quadratic by more than this share of the feature's contrast on average (default 0.25): a ring
   *  crossed by a band or by the panel's roll-off is no surface to measure against */
  edgeRingMaxLack: number;
  /** lit fields: the surface is joined by a term falling as the 6th power of the distance from a centre
   *  (found by search) when, fitted after the rounds with the features masked, it leaves a model error
   *  of at most this share of the polynomial's (default 0.5; 0 = never). A panel whose light holds up
   *  over the middle and falls steeply into the corners (as the 5th-6th power of the distance) is more
   *  than an order-4 surface can follow: faint clouds over the plateau and dark specks in the far
   *  corners (see steepRollOff in analyse.ts). Measured: 0.14-0.50 on 31 of the 90 photos of
   *  `mura-accuracy.js --smooth=steep` (the rest, mostly falls of the 3rd-4th power, which the
   *  polynomial follows, or features outweighing the fall, 0.51-1.0); 0.57 and more on the 180 photos
   *  of the usual first and second sets where the term falls */
  steepRollOffMaxRatio: number;
  /** ...and only when at least this share of what the term gains (fall in squared residual) comes from
   *  the cells at least 0.75 of the half-diagonal from its centre, where a steep roll-off lives (default
   *  0.5: most of it). A large bright cloud near the middle, its flanks beyond its mask, gains nearly as
   *  much from the term, but nearer its centre: a 188 mm cloud of +6 % on a 600 x 340 mm panel
   *  (test/mura/large-clouds.test.ts) 0.39 at a ratio of 0.44, and carried, the term took its flanks
   *  (mean contrast 1.98 % for 4.33 %). Generated steep roll-offs: 0.39-0.84; the five under 0.5 are
   *  left to the polynomial, and four of them keep a faint cloud over the plateau (SEMU 1.3-1.8) */
  steepRollOffMinOuterShare: number;
}

export interface MuraOptions {
  /** test pattern on the photo; black fields get the edge/corner glow logic */
  pattern: Pattern;
  /** tile grid [cols, rows] of a tiled display, or null (default) */
  tileGrid: [number, number] | null;
  /** smallest feature searched for, diameter in mm (default 3) */
  minFeatureMm: number;
  /** largest round feature searched for, diameter in mm (default 200) */
  maxFeatureMm: number;
  /** detection threshold: a feature's significance against the photo noise, in sigmas (default 5) */
  thresholdSigma: number;
  /** a feature must also stand out of the background model's own error by this many sigmas (default 3) */
  fitSigma: number;
  /** findings below this SEMU are not reported (default 0.5) */
  semuFloor: number;
  /** when the background fit had to leave out at least this share of the panel (%) around the features
   *  found, and something is reported, the analysis says that the figures of the largest features are
   *  less certain (default 35; 0 = never). The surface under them is then carried over from the rest of
   *  the panel. Accuracy study (scripts/mura-accuracy.ts, first set): every feature of SEMU >= 2 measured outside +-25 % contrast
   *  or +-30 % area lay on a photo with 37.7-55.7 % left out; none of the 37 photos with less had one */
  coverageCautionPct: number;
  semuConstants: SemuConstants;
  background: BackgroundOptions;
  /** round features at least this wide (mm, half-peak diameter) are clouds, smaller ones spots (default 45) */
  cloudMinMm: number;
  /** elongated features narrower than this (mm, half-peak width) are lines (default 4) */
  lineMaxWidthMm: number;
  /** a band must span at least this fraction of the panel along its axis (default 0.4; it was 0.6, under
   *  which the study's bands over 45-60 % of the panel (mura-accuracy.js --varied) were called clouds: 4
   *  of 5 kind errors there; the usual set's kinds are the same with either) */
  bandMinSpan: number;
  /** at least this many spots on a common lattice make a hot-spot array (default 6) */
  hotspotMinCount: number;
  /** largest working raster, pixels; larger maps are box-averaged down (default 4e6) */
  maxWorkPixels: number;
  /** side on the panel (mm) of one 8 x 8 pixel block of the JPEG the map was made from, or null
   *  (default; not a JPEG). JPEG rounds each block's mean on its own, and on smooth, quiet fields a
   *  block can come out a code value or two off its neighbours: a few % of contrast in a square one
   *  block wide. A finding must reach across two blocks along its longer dimension to be told from
   *  that. */
  jpegBlockMm: number | null;
  /** width (mm) of the strip along the panel's edges left out of the map before the analysis (the
   *  edge's transition from bezel to panel), default 0. Glow peaks at the edge or corner itself: an edge
   *  or corner glow's contrast and peak are carried across this strip along the exponential fall its
   *  half-peak depth or reach gives (at most GLOW_EXTRAPOLATION_MAX times; see findingOf in analyse.ts) */
  edgeBorderMm: number;
  /** contrast (%) of the smallest level step of the 8-bit photo as decoded at the panel's level (one code
   *  value; for a JPEG decoded in float, its DC quantiser over 8 of one: see CodeLevel.stepCodes), or null
   *  (default; linear or 16-bit input). Without noise enough to dither it, 8-bit coding turns a smooth
   *  field into plateaus one step apart, and the background model leaves their edges as contrast of up to
   *  that step. A finding must exceed codeStepFactor x this step when it is under 25 mm across (its longer
   *  dimension), half that up to 100 mm; larger ones span many plateaus, whose errors average out. */
  codeStepPct: number | null;
  /** multiple of codeStepPct a small finding must exceed (default 1; a rule of practice) */
  codeStepFactor: number;
  /** JPEG input: share of the local code step that findings 25 mm and larger must exceed, whatever their
   *  size (default 0.6). On smooth, quiet fields a JPEG encoder leaves flat blocks at their rounded mean,
   *  and whole regions of 100 mm and more come out up to half a code value off, edged by contours
   *  (measured on generated JPEGs of quality 92; settable, as encoders differ). */
  jpegPlateauShare: number;
  /** 8-bit sRGB input: where the photo's code values lie, so that the code step can be taken where each
   *  finding is rather than at the panel's centre (null: codeStepPct everywhere). The step grows where the
   *  camera saw the panel darker: towards the corners (lens falloff, the panel's own roll-off). */
  codeLevel: CodeLevel | null;
  /** where the panel lay in the photo, when the photo's lens falloff was left in it (no correction
   *  applied), or null (default). On lit fields the falloff is then estimated from the field and divided
   *  out before the rounds (withoutLensFalloff in analyse.ts). */
  lens: LensField | null;
}

/** Where the panel lay in the photo, for the lens terms of the background surface. */
export interface LensField {
  /** homography (row-major 3 x 3) from panel mm (x right, y down from the active area's top-left) to
   *  image coordinates centred on the image centre, in half-diagonals of the image */
  panelMmToImage: number[];
  /** tangent of the field angle at the image corner, from the photo's focal length (21.63 mm over the
   *  35 mm-equivalent focal length), or null when unknown */
  tan: number | null;
}

/** The camera's linear code level across the panel, for the local 8-bit code step. */
export interface CodeLevel {
  /** linear camera value (0..1 of the code range, falloff-corrected) of the map at the panel's centre */
  centreY: number;
  /** lens transmission at panel points on a cols x rows grid of nodes spanning u, v = 0..1 (row by row),
   *  or null when no falloff correction was applied */
  gain: { cols: number; rows: number; data: Float32Array } | null;
  /** the level step in code values (DecodeInfo.levelStepCodes: 1 for whole codes; the JPEG DC
   *  quantiser over 8 for a JPEG decoded in float; at least bareStepCodes) */
  stepCodes?: number;
  /** how far (code values, 0..1) the photo's 8-bit codes form a bare staircase of whole codes
   *  (DecodeInfo.codePlateauShare; 0 or absent: dithered by noise). A plateau edged by its neighbours
   *  reads as up to a code value of contrast against its surround, whatever its size, so a finding of
   *  any size must exceed this many code values (stepCodes is then at least this too). */
  bareStepCodes?: number;
  /** a measured camera response the photo was read through (null or absent: the sRGB curve) */
  response?: ResponseCurve | null;
}

export type MuraOptionsInput = Partial<Omit<MuraOptions, 'background' | 'semuConstants'>> & {
  pattern: Pattern;
  background?: Partial<BackgroundOptions>;
  semuConstants?: Partial<SemuConstants>;
};

export function resolveMuraOptions(input: MuraOptionsInput): MuraOptions {
  const black = input.pattern === 'black';
  const bg: BackgroundOptions = {
    order: black ? 2 : 4,
    cellMm: null,
    clipSigma: 3,
    rounds: 3,
    maskRadiusFactor: 2.5,
    maxMaskedFraction: 0.5,
    edgeWeight: 10,
    cornerZone: 0.3,
    maskPadMaxFraction: 0.1,
    bumpMinFraction: 0.3,
    bumpMinContrastPct: 2,
    rollOffMaxShare: 0.1,
    rollOffMaxErrorRatio: 1,
    blackCheckOrder: 4,
    jointMinClouds: 2,
    edgeRingInner: 3,
    edgeRingOuter: 4.8,
    edgeRingMinSemu: 1,
    edgeRingMaxLack: 0.25,
    steepRollOffMaxRatio: 0.5,
    steepRollOffMinOuterShare: 0.5,
    ...stripUndefined(input.background ?? {}),
  };
  const o: MuraOptions = {
    pattern: input.pattern,
    tileGrid: input.tileGrid ?? null,
    minFeatureMm: input.minFeatureMm ?? 3,
    maxFeatureMm: input.maxFeatureMm ?? 200,
    thresholdSigma: input.thresholdSigma ?? 5,
    fitSigma: input.fitSigma ?? 3,
    semuFloor: input.semuFloor ?? 0.5,
    coverageCautionPct: input.coverageCautionPct ?? 35,
    semuConstants: { ...DEFAULT_SEMU_CONSTANTS, ...stripUndefined(input.semuConstants ?? {}) },
    background: bg,
    cloudMinMm: input.cloudMinMm ?? 45,
    lineMaxWidthMm: input.lineMaxWidthMm ?? 4,
    bandMinSpan: input.bandMinSpan ?? 0.4,
    hotspotMinCount: input.hotspotMinCount ?? 6,
    maxWorkPixels: input.maxWorkPixels ?? 4e6,
    jpegBlockMm: input.jpegBlockMm ?? null,
    edgeBorderMm: input.edgeBorderMm ?? 0,
    codeStepPct: input.codeStepPct ?? null,
    codeStepFactor: input.codeStepFactor ?? 1,
    jpegPlateauShare: input.jpegPlateauShare ?? 0.6,
    codeLevel: input.codeLevel ?? null,
    lens: input.lens ?? null,
  };
  validate(o);
  return o;
}

function stripUndefined<T extends object>(o: T): Partial<T> {
  const out: Partial<T> = {};
  for (const [k, v] of Object.entries(o)) if (v !== undefined) (out as Record<string, unknown>)[k] = v;
  return out;
}

function bad(message: string): never {
  throw new EvenfieldError('usage', `mura option ${message}`);
}

function positive(name: string, v: number): void {
  if (!(Number.isFinite(v) && v > 0)) bad(`${name} must be a positive number, got ${v}`);
}

function validate(o: MuraOptions): void {
  positive('minFeatureMm', o.minFeatureMm);
  if (!(o.edgeBorderMm >= 0 && Number.isFinite(o.edgeBorderMm))) bad(`edgeBorderMm must be 0 or more, got ${o.edgeBorderMm}`);
  positive('maxFeatureMm', o.maxFeatureMm);
  if (o.maxFeatureMm < 2 * o.minFeatureMm) bad('maxFeatureMm must be at least twice minFeatureMm');
  positive('thresholdSigma', o.thresholdSigma);
  if (!(Number.isFinite(o.fitSigma) && o.fitSigma >= 0)) bad(`fitSigma must be >= 0, got ${o.fitSigma}`);
  if (!(Number.isFinite(o.semuFloor) && o.semuFloor >= 0)) bad(`semuFloor must be >= 0, got ${o.semuFloor}`);
  if (!(Number.isFinite(o.coverageCautionPct) && o.coverageCautionPct >= 0 && o.coverageCautionPct <= 100)) {
    bad(`coverageCautionPct must be between 0 and 100, got ${o.coverageCautionPct}`);
  }
  positive('cloudMinMm', o.cloudMinMm);
  positive('lineMaxWidthMm', o.lineMaxWidthMm);
  if (!(o.bandMinSpan > 0 && o.bandMinSpan <= 1)) bad(`bandMinSpan must be in (0, 1], got ${o.bandMinSpan}`);
  if (!(Number.isInteger(o.hotspotMinCount) && o.hotspotMinCount >= 3)) bad('hotspotMinCount must be an integer >= 3');
  if (!(o.maxWorkPixels >= 10_000)) bad('maxWorkPixels must be at least 10000');
  if (o.jpegBlockMm !== null) positive('jpegBlockMm', o.jpegBlockMm);
  if (o.lens !== null && !(o.lens.panelMmToImage.length === 9 && o.lens.panelMmToImage.every(Number.isFinite))) {
    bad('lens.panelMmToImage must be 9 finite numbers (a 3 x 3 homography)');
  }
  if (o.lens !== null && o.lens.tan !== null) positive('lens.tan', o.lens.tan);
  if (o.codeStepPct !== null) positive('codeStepPct', o.codeStepPct);
  if (!(Number.isFinite(o.codeStepFactor) && o.codeStepFactor >= 0)) bad(`codeStepFactor must be >= 0, got ${o.codeStepFactor}`);
  if (!(Number.isFinite(o.jpegPlateauShare) && o.jpegPlateauShare >= 0)) bad(`jpegPlateauShare must be >= 0, got ${o.jpegPlateauShare}`);
  if (o.codeLevel !== null) {
    positive('codeLevel.centreY', o.codeLevel.centreY);
    const g = o.codeLevel.gain;
    if (g && !(g.cols >= 2 && g.rows >= 2 && g.data.length === g.cols * g.rows)) bad('codeLevel.gain must be a grid of at least 2 x 2 nodes');
  }
  const b = o.background;
  if (!(Number.isInteger(b.order) && b.order >= 0 && b.order <= 6)) bad(`background.order must be an integer 0..6, got ${b.order}`);
  if (b.cellMm !== null) positive('background.cellMm', b.cellMm);
  positive('background.clipSigma', b.clipSigma);
  if (!(Number.isInteger(b.rounds) && b.rounds >= 1 && b.rounds <= 10)) bad('background.rounds must be an integer 1..10');
  positive('background.maskRadiusFactor', b.maskRadiusFactor);
  if (!(b.maxMaskedFraction > 0 && b.maxMaskedFraction < 1)) bad('background.maxMaskedFraction must be in (0, 1)');
  if (!(Number.isFinite(b.edgeWeight) && b.edgeWeight > 0)) bad(`background.edgeWeight must be > 0, got ${b.edgeWeight}`);
  if (!(b.cornerZone >= 0 && b.cornerZone <= 0.5)) bad(`background.cornerZone must be in [0, 0.5], got ${b.cornerZone}`);
  if (!(b.maskPadMaxFraction > 0 && b.maskPadMaxFraction <= 1)) bad('background.maskPadMaxFraction must be in (0, 1]');
  if (!(b.bumpMinFraction > 0)) bad('background.bumpMinFraction must be above 0');
  if (!(b.bumpMinContrastPct >= 0)) bad('background.bumpMinContrastPct must be 0 or more');
  if (!(b.rollOffMaxErrorRatio >= 0)) bad(`background.rollOffMaxErrorRatio must be 0 or more, got ${b.rollOffMaxErrorRatio}`);
  if (!(Number.isInteger(b.blackCheckOrder) && b.blackCheckOrder >= 0 && b.blackCheckOrder <= 6)) bad(`background.blackCheckOrder must be an integer 0..6, got ${b.blackCheckOrder}`);
  if (!(Number.isInteger(b.jointMinClouds) && b.jointMinClouds >= 0)) bad(`background.jointMinClouds must be a whole number 0 or more, got ${b.jointMinClouds}`);
  if (!(b.edgeRingInner >= 0)) bad(`background.edgeRingInner must be 0 (off) or more, got ${b.edgeRingInner}`);
  if (b.edgeRingInner > 0 && !(b.edgeRingOuter > b.edgeRingInner)) bad(`background.edgeRingOuter must be above edgeRingInner, got ${b.edgeRingOuter}`);
  if (!(b.edgeRingMinSemu >= 0)) bad(`background.edgeRingMinSemu must be 0 or more, got ${b.edgeRingMinSemu}`);
  if (!(b.edgeRingMaxLack > 0)) bad(`background.edgeRingMaxLack must be above 0, got ${b.edgeRingMaxLack}`);
  if (!(b.steepRollOffMinOuterShare >= 0 && b.steepRollOffMinOuterShare <= 1)) bad(`background.steepRollOffMinOuterShare must be 0..1, got ${b.steepRollOffMinOuterShare}`);
  if (!(b.steepRollOffMaxRatio >= 0 && b.steepRollOffMaxRatio <= 1)) bad(`background.steepRollOffMaxRatio must be 0..1, got ${b.steepRollOffMaxRatio}`);
  if (!(b.rollOffMaxShare >= 0 && b.rollOffMaxShare <= 1)) bad(`background.rollOffMaxShare must be 0..1, got ${b.rollOffMaxShare}`);
  if (o.tileGrid !== null) {
    const [c, r] = o.tileGrid;
    if (!(Number.isInteger(c) && Number.isInteger(r) && c >= 1 && r >= 1 && c * r >= 2 && c <= 64 && r <= 64)) {
      bad(`tileGrid must be [cols, rows] of integers 1..64 with at least 2 tiles, got [${o.tileGrid.join(', ')}]`);
    }
  }
  const k = o.semuConstants;
  for (const [name, v] of Object.entries(k)) if (!Number.isFinite(v)) bad(`semuConstants.${name} must be finite`);
}
