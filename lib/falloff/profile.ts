// Camera falloff profiles: the stored model, its evaluation at any decode size, applying it to a photo,
// checking it against a photo's EXIF, and JSON (de)serialisation with validation.
//
// The model (transmission T, 1 at the optical centre, < 1 where the lens loses light):
//
//   T(u, v) = R(r) * exp(s(u, v) - s(cu, cv))
//   R(r)    = 1 + k1 r^2 + k2 r^4 + ... + kn r^2n        (r = 1 at the farthest image corner)
//   s(u, v) = sum c_ij P_i(u) P_j(v)                      (2-D Legendre surface, 2 <= i + j <= order)
//
// with u, v the normalised coordinates of basis.ts and (cu, cv) the optical centre. R has the shape of
// the DNG radial vignette polynomial, but here it is the transmission (the DNG opcode stores the gain,
// its reciprocal). Per-channel models, when present, multiply T by exp(s_c(u, v) - s_c(cu, cv)).

import { z } from 'zod';
import { EvenfieldError } from '../errors.js';
import type { ExposureRecord, Plane, RgbImage } from '../types.js';
import { SRGB_TO_XYZ } from '../photometry/index.js';
import {
  type FrameGeometry,
  type SurfaceTerm,
  farthestCornerDistance,
  legendreInto,
  normU,
  normV,
  radialPolynomial,
  surfaceAt,
} from './basis.js';

export const PROFILE_FORMAT = 'evenfield-falloff-profile';
export const PROFILE_VERSION = 1;

export type ProfileKind = 'flat-frames' | 'shifted-photos';

export interface ProfileCamera {
  make: string | null;
  model: string | null;
  lens: string | null;
  focalLengthMm: number | null;
  focal35mm: number | null;
  fNumber: number | null;
  /** full-size image the profile was made for */
  imageWidth: number;
  imageHeight: number;
}

export interface ChannelSurfaces {
  r: SurfaceTerm[];
  g: SurfaceTerm[];
  b: SurfaceTerm[];
}

export interface FalloffModel {
  /** optical centre in normalised coordinates, (0, 0) = image centre, +-1 = image edges */
  centre: [number, number];
  /** k1..kn of R(r) = 1 + k1 r^2 + ... + kn r^2n */
  radial: number[];
  /** highest total order i + j of the Legendre surface (0 = no surface) */
  surfaceOrder: number;
  /** [i, j, c]: log-transmission term c P_i(u) P_j(v) */
  surface: SurfaceTerm[];
  /** per-channel log-ratio surfaces relative to the luminance model, or null when the channels agree */
  channels: ChannelSurfaces | null;
}

export interface FitConditioning {
  /** 0..1: smallest fraction of a falloff direction's information that survives the unknown panel */
  separability: number;
  /** condition number of the column-scaled falloff system once the panel is eliminated */
  conditionNumber: number;
  /** smallest singular value of that system (columns scaled to unit norm with the panel known) */
  smallestSingularValue: number;
  /** 1-sigma statistical uncertainty of T at the farthest image corner, % (residuals taken as noise) */
  cornerUncertaintyPct: number;
}

export interface ProfileFit {
  frames: number;
  /** fit samples (downsampled blocks) used / rejected as outliers */
  samples: number;
  rejectedSamples: number;
  /** rms and largest |data / model - 1| over the used samples, % */
  residualRmsPct: number;
  residualMaxPct: number;
  /** tilt of the source removed from the data (not part of the profile): brightness change from the
   *  left to the right edge and from the top to the bottom edge of the frame, %; null if none fitted */
  removedTiltPct: { x: number; y: number } | null;
  /** largest |difference| between the fitted radial curve and its stored polynomial form, % */
  radialConversionErrorPct: number;
  /** T at the darkest of the four image corners */
  cornerTransmission: number;
  /** standard error of the fitted optical centre (normalised units), null when the centre was fixed */
  centreUncertainty: [number, number] | null;
  conditioning: FitConditioning | null;
  notes: string[];
}

export interface FalloffProfile {
  format: typeof PROFILE_FORMAT;
  version: typeof PROFILE_VERSION;
  kind: ProfileKind;
  createdAt: string | null;
  camera: ProfileCamera;
  model: FalloffModel;
  fit: ProfileFit;
}

/** A transmission for a whole image: one plane for all channels, or one per channel. */
export type Transmission = Plane | { r: Plane; g: Plane; b: Plane };

export function isChannelTransmission(t: Transmission): t is { r: Plane; g: Plane; b: Plane } {
  return (t as { r?: Plane }).r !== undefined;
}

// ---------------------------------------------------------------------------------------------
// Evaluation

/** Log-transmission offset s(centre) of a surface, so T(centre) = 1. */
function surfaceOffset(terms: readonly SurfaceTerm[], centre: readonly [number, number]): number {
  return terms.length ? surfaceAt(terms, centre[0], centre[1]) : 0;
}

function maxIndex(terms: readonly SurfaceTerm[]): number {
  let m = 0;
  for (const [i, j] of terms) m = Math.max(m, i, j);
  return m;
}

/**
 * Evaluates the model on a decoded image grid. extraSurface (a channel's log-ratio surface) is added
 * to the luminance surface when given.
 */
export function evaluateModel(
  model: FalloffModel,
  geom: FrameGeometry,
  width: number,
  height: number,
  scale: number,
  extraSurface: readonly SurfaceTerm[] | null = null,
): Plane {
  const terms: SurfaceTerm[] = [...model.surface, ...(extraSurface ?? [])];
  const order = maxIndex(terms);
  const nb = order + 1;
  const centre = model.centre;
  const rMax = farthestCornerDistance(centre, geom);
  const hw = geom.fullWidth / 2;
  const hh = geom.fullHeight / 2;
  const s0 = surfaceOffset(terms, centre);

  const dx2 = new Float64Array(width);
  const pu = new Float64Array(width * nb);
  const tmp = new Float64Array(nb);
  for (let x = 0; x < width; x++) {
    const u = normU(x, scale, geom.fullWidth);
    const d = ((u - centre[0]) * hw) / rMax;
    dx2[x] = d * d;
    legendreInto(u, order, tmp);
    for (let i = 0; i < nb; i++) pu[x * nb + i] = tmp[i];
  }
  // coefficient matrix c[i][j]
  const cm = new Float64Array(nb * nb);
  for (const [i, j, c] of terms) cm[i * nb + j] += c;
  const rowCoef = new Float64Array(nb);
  const k = model.radial;
  const out = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    const v = normV(y, scale, geom.fullHeight);
    const dy = ((v - centre[1]) * hh) / rMax;
    const dy2 = dy * dy;
    legendreInto(v, order, tmp);
    for (let i = 0; i < nb; i++) {
      let a = 0;
      for (let j = 0; j < nb; j++) a += cm[i * nb + j] * tmp[j];
      rowCoef[i] = a;
    }
    const row = y * width;
    for (let x = 0; x < width; x++) {
      const t = dx2[x] + dy2;
      const r = radialPolynomial(k, t);
      let s = 0;
      const base = x * nb;
      for (let i = 0; i < nb; i++) s += rowCoef[i] * pu[base + i];
      out[row + x] = r * Math.exp(s - s0);
    }
  }
  return { width, height, data: out };
}

/**
 * The full-size geometry a decoded width x height image at decode scale `scale` belongs to. Uses the
 * profile's own image size when the decoded size is consistent with it; otherwise width*scale x
 * height*scale, which must have the profile's aspect ratio (within 1 %) or this throws.
 */
export function geometryFor(
  profile: FalloffProfile,
  width: number,
  height: number,
  scale = 1,
  fullSize?: { width: number; height: number },
): FrameGeometry {
  const W = profile.camera.imageWidth;
  const H = profile.camera.imageHeight;
  let fw: number;
  let fh: number;
  if (fullSize) {
    fw = fullSize.width;
    fh = fullSize.height;
  } else if (Math.abs(width * scale - W) < scale && Math.abs(height * scale - H) < scale) {
    fw = W;
    fh = H;
  } else {
    fw = width * scale;
    fh = height * scale;
  }
  const a = fw / fh;
  const b = W / H;
  if (Math.abs(a / b - 1) > 0.01) {
    const hint = Math.abs(a * b - 1) < 0.01 ? ' (rotated 90°?)' : ' (cropped?)';
    throw new EvenfieldError(
      'falloff',
      `falloff profile was made for ${W}×${H} images but this photo is ${fw}×${fh}${hint}; ` +
        'the profile cannot be applied to a different aspect ratio',
    );
  }
  return { fullWidth: fw, fullHeight: fh };
}

/**
 * Luminance transmission of a profile on a decoded width x height image at decode scale `scale`
 * (1, 2, 4, 8). T = 1 at the optical centre.
 */
export function transmissionFromProfile(
  profile: FalloffProfile,
  width: number,
  height: number,
  scale = 1,
  fullSize?: { width: number; height: number },
): Plane {
  return evaluateModel(profile.model, geometryFor(profile, width, height, scale, fullSize), width, height, scale);
}

/**
 * Per-channel transmission when the profile has channel models, else the luminance plane.
 */
export function channelTransmissionFromProfile(
  profile: FalloffProfile,
  width: number,
  height: number,
  scale = 1,
  fullSize?: { width: number; height: number },
): Transmission {
  const g = geometryFor(profile, width, height, scale, fullSize);
  const ch = profile.model.channels;
  if (!ch) return evaluateModel(profile.model, g, width, height, scale);
  return {
    r: evaluateModel(profile.model, g, width, height, scale, ch.r),
    g: evaluateModel(profile.model, g, width, height, scale, ch.g),
    b: evaluateModel(profile.model, g, width, height, scale, ch.b),
  };
}

export interface ApplyOptions {
  /** transmissions below this are treated as this value so noise is not blown up (default 0.02) */
  floor?: number;
}

/**
 * Divides a linear image by a transmission, in place. Returns the number of pixel values whose
 * transmission was below the floor.
 */
export function applyTransmission(img: RgbImage, T: Transmission, opts: ApplyOptions = {}): number {
  const floor = opts.floor ?? 0.02;
  const planes = isChannelTransmission(T) ? [T.r, T.g, T.b] : [T, T, T];
  for (const p of planes) {
    if (p.width !== img.width || p.height !== img.height) {
      throw new EvenfieldError(
        'falloff',
        `transmission is ${p.width}×${p.height} but the image is ${img.width}×${img.height}`,
      );
    }
  }
  const n = img.width * img.height;
  const d = img.data;
  let clamped = 0;
  for (let c = 0; c < 3; c++) {
    const t = planes[c].data;
    for (let i = 0; i < n; i++) {
      let g = t[i];
      if (!(g >= floor)) {
        g = floor;
        clamped++;
      }
      d[i * 3 + c] /= g;
    }
  }
  return clamped;
}

/**
 * Divides pixels i0..i1-1 of an interleaved RGB image by the transmissions t0, t1, t2 (read from index 0
 * for pixel i0), in place, and writes their luminance into lum; a transmission below the floor counts as
 * the floor. Returns how many values were clamped. Shared by the full-plane and the coarse-grid corrections.
 */
export function divideWithLuminance(d: Float32Array, lum: Float32Array, i0: number, i1: number, t0: Float32Array, t1: Float32Array, t2: Float32Array, floor: number): number {
  const [, , , yr, yg, yb] = SRGB_TO_XYZ as [number, number, number, number, number, number];
  let clamped = 0;
  for (let i = i0, j = 0, k = 3 * i0; i < i1; i++, j++, k += 3) {
    let g0 = t0[j];
    let g1 = t1[j];
    let g2 = t2[j];
    if (!(g0 >= floor)) {
      g0 = floor;
      clamped++;
    }
    if (!(g1 >= floor)) {
      g1 = floor;
      clamped++;
    }
    if (!(g2 >= floor)) {
      g2 = floor;
      clamped++;
    }
    // the values as stored (float32), as luminancePlane would read them back
    const r = Math.fround(d[k] / g0);
    const g = Math.fround(d[k + 1] / g1);
    const b = Math.fround(d[k + 2] / g2);
    d[k] = r;
    d[k + 1] = g;
    d[k + 2] = b;
    lum[i] = yr * r + yg * g + yb * b;
  }
  return clamped;
}

/**
 * applyTransmission and then the luminance plane of the corrected image (luminancePlane's weights and
 * values), in one pass over the pixels. Returns the clamped count and the luminance.
 */
export function applyTransmissionWithLuminance(img: RgbImage, T: Transmission, opts: ApplyOptions = {}): { clamped: number; luminance: Plane } {
  const floor = opts.floor ?? 0.02;
  const planes = isChannelTransmission(T) ? [T.r, T.g, T.b] : [T, T, T];
  for (const p of planes) {
    if (p.width !== img.width || p.height !== img.height) {
      throw new EvenfieldError('falloff', `transmission is ${p.width}×${p.height} but the image is ${img.width}×${img.height}`);
    }
  }
  const lum = new Float32Array(img.width * img.height);
  const clamped = divideWithLuminance(img.data, lum, 0, lum.length, planes[0].data, planes[1].data, planes[2].data, floor);
  return { clamped, luminance: { width: img.width, height: img.height, data: lum } };
}

/** Divides a single plane (e.g. linear luminance) by a transmission plane, in place. */
export function applyTransmissionToPlane(img: Plane, T: Plane, opts: ApplyOptions = {}): number {
  const floor = opts.floor ?? 0.02;
  if (T.width !== img.width || T.height !== img.height) {
    throw new EvenfieldError('falloff', `transmission is ${T.width}×${T.height} but the image is ${img.width}×${img.height}`);
  }
  let clamped = 0;
  for (let i = 0; i < img.data.length; i++) {
    let g = T.data[i];
    if (!(g >= floor)) {
      g = floor;
      clamped++;
    }
    img.data[i] /= g;
  }
  return clamped;
}

/** Smallest transmission over the four corner pixels of a plane (how much light the corners lost). */
export function cornerTransmission(T: Plane): number {
  const { width: w, height: h, data } = T;
  return Math.min(data[0], data[w - 1], data[(h - 1) * w], data[h * w - 1]);
}

/** T of a model at the four image corners (outer pixel edges), smallest value. */
export function modelCornerTransmission(model: FalloffModel, geom: FrameGeometry): number {
  const rMax = farthestCornerDistance(model.centre, geom);
  const s0 = surfaceOffset(model.surface, model.centre);
  let best = Infinity;
  for (const u of [-1, 1]) {
    for (const v of [-1, 1]) {
      const dx = ((u - model.centre[0]) * geom.fullWidth) / 2 / rMax;
      const dy = ((v - model.centre[1]) * geom.fullHeight) / 2 / rMax;
      const s = model.surface.length ? surfaceAt(model.surface, u, v) : 0;
      best = Math.min(best, radialPolynomial(model.radial, dx * dx + dy * dy) * Math.exp(s - s0));
    }
  }
  return best;
}

// ---------------------------------------------------------------------------------------------
// Matching a profile to a photo

export interface MismatchOptions {
  /** relative focal-length difference treated as a different lens setting (default 0.05 = 5 %) */
  focalTolerance?: number;
  /** aperture difference in stops that draws a warning (default 1/3 stop) */
  apertureToleranceStops?: number;
}

export interface ProfileMatch {
  /** 'error': do not apply the profile; 'warning': apply but say so; 'ok': nothing to say */
  severity: 'ok' | 'warning' | 'error';
  errors: string[];
  warnings: string[];
}

function sameText(a: string | null, b: string | null): boolean {
  return (a ?? '').trim().toLowerCase() === (b ?? '').trim().toLowerCase();
}

function fmt(n: number): string {
  return Number.isInteger(n) ? String(n) : n.toFixed(2).replace(/0+$/, '').replace(/\.$/, '');
}

/**
 * Checks whether a profile fits a photo. A focal length that differs by more than the tolerance and
 * an image of another aspect ratio are errors (the profile describes another lens setting or crop);
 * another camera, lens, aperture or resolution draws a warning. Missing EXIF draws a warning that the
 * match could not be confirmed.
 */
export function profileMismatch(
  profile: FalloffProfile,
  exposure: ExposureRecord | null,
  fullWidth: number,
  fullHeight: number,
  opts: MismatchOptions = {},
): ProfileMatch {
  const focalTol = opts.focalTolerance ?? 0.05;
  const apTol = opts.apertureToleranceStops ?? 1 / 3;
  const pc = profile.camera;
  const errors: string[] = [];
  const warnings: string[] = [];
  const e: ExposureRecord = exposure ?? {
    make: null,
    model: null,
    lens: null,
    exposureTimeS: null,
    fNumber: null,
    iso: null,
    focalLengthMm: null,
    focalLength35mm: null,
    dateTime: null,
  };

  // camera body
  const profCam = [pc.make, pc.model].filter(Boolean).join(' ');
  const photoCam = [e.make, e.model].filter(Boolean).join(' ');
  if (profCam && photoCam && !(sameText(pc.make, e.make) && sameText(pc.model, e.model))) {
    warnings.push(`falloff profile was made with ${profCam}, photo was taken with ${photoCam}`);
  } else if (profCam && !photoCam) {
    warnings.push(`photo has no camera make/model in EXIF; cannot confirm it matches the profile's ${profCam}`);
  }
  if (pc.lens && e.lens && !sameText(pc.lens, e.lens)) {
    warnings.push(`falloff profile was made with lens "${pc.lens}", photo used "${e.lens}"`);
  }

  // focal length: real focal length when both have it, else the 35 mm equivalent
  let compared = false;
  const pairs: [number | null, number | null, string][] = [
    [pc.focalLengthMm, e.focalLengthMm, ''],
    [pc.focal35mm, e.focalLength35mm, ' (35 mm equivalent)'],
  ];
  for (const [a, b, label] of pairs) {
    if (compared || a === null || b === null || !(a > 0) || !(b > 0)) continue;
    compared = true;
    const rel = Math.abs(b - a) / a;
    if (rel > focalTol) {
      errors.push(
        `falloff profile is for a focal length of ${fmt(a)} mm${label} but the photo was taken at ${fmt(b)} mm; ` +
          'falloff changes with focal length: use a profile made at this focal length',
      );
    }
  }
  if (!compared) {
    warnings.push('focal length missing from the photo or the profile; cannot confirm the profile matches the lens setting');
  }

  // aperture
  if (pc.fNumber !== null && e.fNumber !== null && pc.fNumber > 0 && e.fNumber > 0) {
    const stops = Math.abs(2 * Math.log2(e.fNumber / pc.fNumber));
    if (stops > apTol + 1e-9) {
      warnings.push(
        `falloff profile was made at f/${fmt(pc.fNumber)}, photo at f/${fmt(e.fNumber)} ` +
          `(${stops.toFixed(1)} stops apart); vignetting changes with aperture`,
      );
    }
  }

  // image size
  const W = pc.imageWidth;
  const H = pc.imageHeight;
  if (fullWidth !== W || fullHeight !== H) {
    const same = Math.abs(fullWidth / fullHeight / (W / H) - 1) <= 0.01;
    if (same) {
      warnings.push(`falloff profile was made for ${W}×${H} images, photo is ${fullWidth}×${fullHeight}; profile rescaled`);
    } else {
      const rotated = Math.abs((fullWidth / fullHeight) * (W / H) - 1) <= 0.01;
      errors.push(
        `falloff profile was made for ${W}×${H} images but the photo is ${fullWidth}×${fullHeight}` +
          (rotated ? ' (rotated 90°)' : ' (another aspect ratio or crop)') +
          '; the profile cannot be applied',
      );
    }
  }
  const severity = errors.length ? 'error' : warnings.length ? 'warning' : 'ok';
  return { severity, errors, warnings };
}

// ---------------------------------------------------------------------------------------------
// JSON

const nullableText = z.string().nullable();
const positiveOrNull = z.number().positive().nullable();
const term = z.tuple([z.number().int().min(0).max(12), z.number().int().min(0).max(12), z.number()]);

const profileSchema = z.object({
  format: z.literal(PROFILE_FORMAT),
  version: z.literal(PROFILE_VERSION),
  kind: z.enum(['flat-frames', 'shifted-photos']),
  createdAt: z.string().nullable(),
  camera: z.object({
    make: nullableText,
    model: nullableText,
    lens: nullableText,
    focalLengthMm: positiveOrNull,
    focal35mm: positiveOrNull,
    fNumber: positiveOrNull,
    imageWidth: z.number().int().positive(),
    imageHeight: z.number().int().positive(),
  }),
  model: z.object({
    centre: z.tuple([z.number().min(-1).max(1), z.number().min(-1).max(1)]),
    radial: z.array(z.number()).min(1).max(8),
    surfaceOrder: z.number().int().min(0).max(12),
    surface: z.array(term),
    channels: z.object({ r: z.array(term), g: z.array(term), b: z.array(term) }).nullable(),
  }),
  fit: z.object({
    frames: z.number().int().min(1),
    samples: z.number().int().min(0),
    rejectedSamples: z.number().int().min(0),
    residualRmsPct: z.number().min(0),
    residualMaxPct: z.number().min(0),
    removedTiltPct: z.object({ x: z.number(), y: z.number() }).nullable(),
    radialConversionErrorPct: z.number().min(0),
    cornerTransmission: z.number(),
    centreUncertainty: z.tuple([z.number(), z.number()]).nullable(),
    conditioning: z
      .object({
        separability: z.number(),
        conditionNumber: z.number(),
        smallestSingularValue: z.number(),
        cornerUncertaintyPct: z.number(),
      })
      .nullable(),
    notes: z.array(z.string()),
  }),
});

/** Serialises a profile to pretty JSON text. */
export function profileToJson(profile: FalloffProfile): string {
  checkProfile(profile as unknown, 'profile');
  return JSON.stringify(profile, null, 2) + '\n';
}

function describeIssues(err: z.ZodError): string {
  return err.issues
    .slice(0, 6)
    .map((i) => `${i.path.length ? i.path.join('.') : '(top level)'}: ${i.message}`)
    .join('; ');
}

function checkProfile(obj: unknown, source: string): FalloffProfile {
  if (typeof obj === 'object' && obj !== null && (obj as { format?: unknown }).format !== PROFILE_FORMAT) {
    throw new EvenfieldError('falloff', `${source} is not an evenfield falloff profile (format must be "${PROFILE_FORMAT}")`);
  }
  const parsed = profileSchema.safeParse(obj);
  if (!parsed.success) {
    throw new EvenfieldError('falloff', `${source} is not a valid falloff profile: ${describeIssues(parsed.error)}`);
  }
  const p = parsed.data as FalloffProfile;
  const m = p.model;
  for (const list of [m.surface, ...(m.channels ? [m.channels.r, m.channels.g, m.channels.b] : [])]) {
    for (const [i, j] of list) {
      if (i + j > m.surfaceOrder || i + j < 1) {
        throw new EvenfieldError(
          'falloff',
          `${source} is not a valid falloff profile: surface term P${i}(u)P${j}(v) is outside orders 1..${m.surfaceOrder}`,
        );
      }
    }
  }
  // The stored model must describe a physical transmission over the whole image.
  const geom = { fullWidth: p.camera.imageWidth, fullHeight: p.camera.imageHeight };
  const probe = evaluateModel(m, geom, 33, 25, Math.max(geom.fullWidth / 33, geom.fullHeight / 25));
  let lo = Infinity;
  let hi = -Infinity;
  for (const v of probe.data) {
    if (!Number.isFinite(v)) {
      lo = -Infinity;
      break;
    }
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  if (!(lo > 0.01) || !(hi < 3)) {
    throw new EvenfieldError(
      'falloff',
      `${source} is not a valid falloff profile: its transmission ranges ${lo.toFixed(3)}..${hi.toFixed(3)} over the image (expected within 0.01..3)`,
    );
  }
  return p;
}

/**
 * Parses and validates a profile from JSON text or an already-parsed object. `source` names it in
 * messages (e.g. the file name). Throws EvenfieldError('falloff') with the offending fields.
 */
export function profileFromJson(json: string | unknown, source = 'falloff profile'): FalloffProfile {
  let obj: unknown = json;
  if (typeof json === 'string') {
    try {
      obj = JSON.parse(json);
    } catch (e) {
      throw new EvenfieldError('falloff', `${source} is not valid JSON: ${(e as Error).message}`);
    }
  }
  return checkProfile(obj, source);
}
