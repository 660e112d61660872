// One photo, end to end: decode → linear light → falloff → panel → rectify → grid → mura.
// Plain data in, plain data out; the only file it reads is the photo itself.

import { decodePhotoBuffer, readInputFile } from '../io/index.js';
import type { DecodedPhoto } from '../io/index.js';
import { SRGB_TO_XYZ, exposureFactor, srgbEncode, transferCodeStepPct, transferDecode, type ResponseCurve, type Transfer } from '../photometry/index.js';
import { applyHomography, findPanel, multiply3, panelToCamera, rectifyRgb, estimatePose } from '../geometry/index.js';
import { applyCoarseTransmissionWithLuminance, channelTransmissionFromProfile, coarseCornerTransmission, coarseTransmission, coarseTransmissionAt, cos4Transmission, profileMismatch } from '../falloff/index.js';
import type { CoarseTransmission } from '../falloff/index.js';
import type { FalloffProfile } from '../falloff/index.js';
import { analyseMura } from '../mura/index.js';
import type { LensField, MuraOptions } from '../mura/index.js';
import { measureGrid, uniformityFigures } from '../measure/index.js';
import type { GridOptions } from '../measure/index.js';
import { EvenfieldError, isEvenfieldError } from '../errors.js';
import type {
  Corners,
  DecodeInfo,
  FalloffRecord,
  GeometryRecord,
  GridPoint,
  PanelMap,
  Pattern,
  PhotoResult,
  Plane,
  Point,
  RgbImage,
} from '../types.js';
import type { PhotoArtifacts as ReportArtifacts, ReportThumbnail } from '../report/types.js';
import { checkPanelQuality, insideQuad, nearWhiteMask, shrink, type QualityLimits, DEFAULT_QUALITY_LIMITS } from './quality.js';
import { plateauShare } from './plateaus.js';
import { removeImpulses } from './impulses.js';

/** default smallest mura feature, mm (the mura analysis's own default; see lib/mura/options.ts) */
const DEFAULT_MIN_FEATURE_MM = 3;

/** Width of the panel edge's transition in working-scale camera pixels, excluded from the mura analysis. */
const EDGE_TRANSITION_CAMERA_PX = 3;

/** Edges bowed more than this (camera px, sagitta about the fitted line) get a warning. A straight edge
 *  measures under 0.05 px on generated photos; 1 % barrel distortion gave 0.7-2.2 px and 2.5 % gave
 *  2.4-4.6 px on 2400 x 1600 photos of a panel filling two thirds of the frame (common practice to warn
 *  from a couple of pixels). */
const EDGE_BOW_WARN_PX = 2;

/** The part of the panel whose JPEG blocks tell whether its codes were dithered (the outline scaled
 *  about its centre: clear of the edge's transition and ringing). */
const PLATEAU_INNER_SHRINK = 0.8;
/** From this plateau share (DecodeInfo.codePlateauShare) a photo is said to carry almost no noise:
 *  the level step then exceeds the DC step of a JPEG of quality 92 and above by a third or more. */
const PLATEAU_WARN_SHARE = 0.5;

/**
 * Contrast (%) of the smallest level step of an 8-bit sRGB photo as decoded (one code value, or a
 * fraction of one for a JPEG decoded in float: DecodeInfo.levelStepCodes) at the level of the panel's
 * centre point, or null for other input.
 */
function codeStepAt(result: PhotoResult, points: GridPoint[], response: ResponseCurve | null): number | null {
  const d = result.decode;
  if (!d || d.bitDepth !== 8 || d.transfer === 'linear') return null;
  const centre = points.find((p) => p.u === 0.5 && p.v === 0.5) ?? points[0];
  const y = centre?.Y;
  return y !== undefined && y > 0 && y <= 1 ? transferCodeStepPct(response ?? 'srgb', y) * levelStepOf(d) : null;
}

/** The level step (code values) the mura analysis allows for: the decoder's, or more where the photo's
 *  codes lie in plateaus of whole codes (DecodeInfo.codePlateauShare). */
function levelStepOf(d: DecodeInfo): number {
  return Math.max(d.levelStepCodes ?? 1, d.codePlateauShare ?? 0);
}

/** The measured response in the options, or null (the sRGB curve or linear input). */
function responseOf(opts: MeasureOptions): ResponseCurve | null {
  return typeof opts.transfer === 'object' ? opts.transfer : null;
}

/** The clip level of the quality limits (a linear value of the sRGB curve) read through a measured
 *  response: the same code value's linear light. */
function clipLinearOf(opts: MeasureOptions): number {
  const r = responseOf(opts);
  return r ? transferDecode(r, srgbEncode(opts.quality.clipLinear)) : opts.quality.clipLinear;
}

/** The lens transmission (luminance-weighted for per-channel profiles) at a grid of panel points. */
function transmissionOnPanel(t: CoarseTransmission, corners: Corners, nodes: number): { cols: number; rows: number; data: Float32Array } {
  const H = panelToCamera(corners);
  const data = new Float32Array(nodes * nodes);
  for (let j = 0; j < nodes; j++) {
    for (let i = 0; i < nodes; i++) {
      const [x, y] = applyHomography(H, [i / (nodes - 1), j / (nodes - 1)]);
      data[j * nodes + i] = coarseTransmissionAt(t, Math.min(t.width - 1, Math.max(0, x)), Math.min(t.height - 1, Math.max(0, y)));
    }
  }
  return { cols: nodes, rows: nodes, data };
}

/**
 * Panel mm to image coordinates about the image centre in half-diagonals (the lens term of the mura
 * background): the outline's homography (unit square to image pixels) with the panel's size before it
 * and the centring after it.
 */
export function lensFieldOf(corners: Corners, imageWidth: number, imageHeight: number, widthMm: number, heightMm: number, focal35mm: number | null): LensField {
  const r = 2 / Math.hypot(imageWidth, imageHeight);
  const cx = (imageWidth - 1) / 2;
  const cy = (imageHeight - 1) / 2;
  const centring = [r, 0, -r * cx, 0, r, -r * cy, 0, 0, 1];
  const size = [1 / widthMm, 0, 0, 0, 1 / heightMm, 0, 0, 0, 1];
  // the 35 mm frame's half-diagonal, 21.63 mm, over the equivalent focal length
  const tan = focal35mm ? Math.hypot(36, 24) / 2 / focal35mm : null;
  return { panelMmToImage: multiply3(multiply3(centring, panelToCamera(corners)), size), tan };
}

function withoutBorder(valid: Uint8Array, w: number, h: number, border: number): Uint8Array {
  const out = valid.slice();
  for (let y = 0; y < h; y++) {
    const inner = y >= border && y < h - border;
    for (let x = 0; x < w; x++) if (!inner || x < border || x >= w - border) out[y * w + x] = 0;
  }
  return out;
}

/** Largest departure from right angles (degrees) of the back-projected outline for the pose to be used. */
const MAX_ORTHOGONALITY_ERROR_DEG = 3;

export type FalloffChoice =
  | { kind: 'none' }
  | { kind: 'profile'; profile: FalloffProfile; source: string }
  | { kind: 'cos4'; focal35mm: number | null };

export interface SharedGeometry {
  corners: Corners; // full-resolution pixels
  file: string;
  strength: number;
  imageWidth: number;
  imageHeight: number;
  /** the bow of that photo's edges (GeometryRecord.edgeBowPx) */
  edgeBowPx?: number | null;
}

export interface MeasureOptions {
  pattern: Pattern;
  patternLevel: number | null;
  /** active-area size in mm; null = unknown (areas and SEMU then nominal, said in warnings) */
  panelSizeMm: { width: number; height: number } | null;
  grid: GridOptions;
  /** manual corners in full-resolution image pixels */
  corners: Corners | null;
  /** corners found on a brighter photo of the same panel */
  shared: SharedGeometry | null;
  /** a photo of the switched-off panel from the same camera position (black fields): its light (room
   *  light reflected by the screen, the camera's offset) is taken from the photo, scaled by the two
   *  photos' exposures, before anything is measured. Optional (null: none) */
  offFrame?: string | null;
  falloff: FalloffChoice;
  /** 'auto' (sRGB unless a 16-bit file is tagged linear), 'srgb', 'linear', or a measured camera response */
  transfer: 'auto' | Transfer;
  /** decode so that the long side is at least this many pixels (power-of-two reduction) */
  workLongSide: number;
  /** JPEG decoding precision (DecodeOptions.jpegSamples) */
  jpegSamples: 'float' | '8bit';
  /** rectified map resolution, pixels per mm (upper bound; reduced where the camera resolves less) */
  mapPxPerMm: number;
  mura: boolean;
  muraOptions: Partial<MuraOptions>;
  maxPixels: number;
  quality: QualityLimits;
  /** keep thumbnails and maps for the report */
  artifacts: boolean;
}

export const DEFAULT_MEASURE_OPTIONS: Omit<MeasureOptions, 'pattern' | 'patternLevel' | 'grid'> = {
  panelSizeMm: null,
  corners: null,
  shared: null,
  falloff: { kind: 'none' },
  transfer: 'auto',
  workLongSide: 1800,
  jpegSamples: 'float',
  mapPxPerMm: 2,
  mura: true,
  muraOptions: {},
  maxPixels: 100e6,
  quality: DEFAULT_QUALITY_LIMITS,
  artifacts: true,
};

/** Images kept for the report (not written to results.json); the report's own type. */
export type PhotoArtifacts = ReportArtifacts;

export interface PhotoMeasurement {
  result: PhotoResult;
  artifacts: PhotoArtifacts | null;
  /** corner-finding strength, 0..1 (0 when corners were not found automatically) */
  cornerStrength: number;
}

function emptyResult(file: string, pattern: Pattern, patternLevel: number | null): PhotoResult {
  return {
    file,
    sha256: '',
    pattern,
    patternLevel,
    status: 'ok',
    error: null,
    errorCode: null,
    decode: null,
    exposure: null,
    exposureStats: null,
    corners: null,
    geometry: null,
    falloff: null,
    grid: null,
    uniformity: null,
    mura: null,
    blobs: [],
    warnings: [],
  };
}

export function chooseScale(width: number, height: number, workLongSide: number): number {
  const long = Math.max(width, height);
  let s = 1;
  while (s < 8 && long / (s * 2) >= workLongSide) s *= 2;
  return s;
}

const toWork = (p: Point, s: number): Point => [(p[0] + 0.5) / s - 0.5, (p[1] + 0.5) / s - 0.5];
const toFull = (p: Point, s: number): Point => [(p[0] + 0.5) * s - 0.5, (p[1] + 0.5) * s - 0.5];

/** Mean side lengths of the quadrilateral: a rough aspect when the panel size is unknown. */
function quadAspect(c: Corners): number {
  const d = (a: Point, b: Point) => Math.hypot(a[0] - b[0], a[1] - b[1]);
  const w = (d(c[0], c[1]) + d(c[3], c[2])) / 2;
  const h = (d(c[0], c[3]) + d(c[1], c[2])) / 2;
  return w / h;
}

/** A panel size whose aspect differs from the pose's by more than this share gets a warning. Generated
 *  photos with an exact focal length give the aspect to 0.1 %; a real camera's 35 mm-equivalent focal
 *  length in EXIF can be a few percent off (common practice; from memory), which 5 % leaves room for. */
const ASPECT_MISMATCH = 0.05;

/** Outline and size of opposite orientation, each at least QUARTER_TURN_ASPECT from square (a 16:9 or
 *  4:3 panel seen with a quarter turn reads 0.56 or 0.75 against 1.78 or 1.33; perspective changes an
 *  outline's aspect by far less than that ratio), or null. */
const QUARTER_TURN_ASPECT = 1.2;
export function quarterTurn(seenAspect: number, givenAspect: number): { seen: string; given: string } | null {
  const k = QUARTER_TURN_ASPECT;
  const name = (a: number) => (a > 1 ? 'landscape' : 'portrait');
  if ((seenAspect < 1 / k && givenAspect > k) || (seenAspect > k && givenAspect < 1 / k)) {
    return { seen: `${name(seenAspect)} (${seenAspect.toFixed(2)})`, given: `${name(givenAspect)} (${givenAspect.toFixed(2)})` };
  }
  return null;
}

function quadWidthPx(c: Corners): number {
  const d = (a: Point, b: Point) => Math.hypot(a[0] - b[0], a[1] - b[1]);
  return Math.max(d(c[0], c[1]), d(c[3], c[2]));
}

function focalPxOf(decoded: DecodedPhoto, scale: number, fallback35: number | null): number | null {
  const f35 = decoded.exposure.focalLength35mm ?? fallback35;
  if (!f35) return null;
  const diag = Math.hypot(decoded.info.width, decoded.info.height);
  return ((f35 / 43.267) * diag) / scale;
}

function rgbToXyzMap(
  rgb: RgbImage,
  valid: Uint8Array,
  widthMm: number,
  heightMm: number,
  pxPerMm: number,
  mmKnown: boolean,
  rgbToXyz: readonly number[],
): PanelMap {
  const n = rgb.width * rgb.height;
  const X = new Float32Array(n);
  const Y = new Float32Array(n);
  const Z = new Float32Array(n);
  const [m0, m1, m2, m3, m4, m5, m6, m7, m8] = rgbToXyz as [number, number, number, number, number, number, number, number, number];
  const d = rgb.data;
  for (let i = 0, k = 0; i < n; i++, k += 3) {
    const r = d[k];
    const g = d[k + 1];
    const b = d[k + 2];
    X[i] = m0 * r + m1 * g + m2 * b;
    Y[i] = m3 * r + m4 * g + m5 * b;
    Z[i] = m6 * r + m7 * g + m8 * b;
  }
  return { width: rgb.width, height: rgb.height, pxPerMm, widthMm, heightMm, mmKnown, X, Y, Z, valid };
}

/** Exposures shorter than this (s) leave room for flicker bands a photo cannot tell from band mura
 *  (the README's advice is 1/30 s or longer: eight or more periods of a 240 Hz pulse). */
export const FLICKER_SAFE_EXPOSURE_S = 1 / 30;

/** How many band and line findings run along the camera's rows (within 10°; pixels stay in sensor
 *  orientation) in a photo exposed shorter than FLICKER_SAFE_EXPOSURE_S; 0 when the exposure is unknown. */
function bandsAlongCameraRows(result: PhotoResult): number {
  const t = result.exposure?.exposureTimeS ?? null;
  const c = result.corners;
  if (t === null || !(t > 0) || t >= FLICKER_SAFE_EXPOSURE_S * 0.97 || !c) return 0;
  // the panel's horizontal in the image: its top edge
  const along = Math.atan2(c[1][1] - c[0][1], c[1][0] - c[0][0]);
  let n = 0;
  for (const b of result.blobs) {
    if (b.kind !== 'band' && b.kind !== 'line') continue;
    const dir = along + (b.detail.axis === 'vertical' ? Math.PI / 2 : 0);
    // angle of the band's direction from the image rows, 0..90°
    const off = Math.abs(Math.atan(Math.tan(dir))) * (180 / Math.PI);
    if (off <= 10) n++;
  }
  return n;
}

function thumbnailOf(img: RgbImage, scale: number, maxSide: number): ReportThumbnail {
  const f = Math.max(1, Math.ceil(Math.max(img.width, img.height) / maxSide));
  const w = Math.floor(img.width / f);
  const h = Math.floor(img.height / f);
  const out = new Uint8Array(w * h * 3);
  const src = img.data;
  const inv = 1 / (f * f);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      let r = 0;
      let g = 0;
      let b = 0;
      for (let j = 0; j < f; j++) {
        let k = ((y * f + j) * img.width + x * f) * 3;
        for (let i = 0; i < f; i++, k += 3) {
          r += src[k];
          g += src[k + 1];
          b += src[k + 2];
        }
      }
      const o = (y * w + x) * 3;
      out[o] = Math.round(255 * srgbEncode(Math.min(1, Math.max(0, r * inv))));
      out[o + 1] = Math.round(255 * srgbEncode(Math.min(1, Math.max(0, g * inv))));
      out[o + 2] = Math.round(255 * srgbEncode(Math.min(1, Math.max(0, b * inv))));
    }
  }
  return { width: w, height: h, rgb: out, scaleToFull: f * scale };
}

function relativeMapOf(map: PanelMap, centreY: number, maxWidth: number): Plane {
  const f = Math.max(1, Math.ceil(map.width / maxWidth));
  const w = Math.floor(map.width / f);
  const h = Math.floor(map.height / f);
  const out = new Float32Array(w * h);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      let s = 0;
      let n = 0;
      for (let j = 0; j < f; j++)
        for (let i = 0; i < f; i++) {
          const k = (y * f + j) * map.width + x * f + i;
          if (map.valid[k]) {
            s += map.Y[k];
            n++;
          }
        }
      out[y * w + x] = n > 0 ? s / n / centreY : NaN;
    }
  return { width: w, height: h, data: out };
}

/**
 * The falloff transmission of the last photo: the photos of a lot share the camera, the profile and the
 * size, so each worker evaluates the model once. Keyed by value (task data reaches a worker as a copy).
 * Kept on a coarse grid of nodes (lib/falloff/coarse.ts: within 3.6e-5 of the full planes for a 24 mm lens, which would hold
 * 36 MB per worker for 12-megapixel photos).
 */
let lastTransmission: { key: string; value: CoarseTransmission } | null = null;
function cachedTransmission(key: string, make: () => CoarseTransmission): CoarseTransmission {
  if (lastTransmission?.key !== key) lastTransmission = { key, value: make() };
  return lastTransmission.value;
}

/** Measure one photo. Never throws for a problem with the photo: it comes back as status 'error'. */
export async function measurePhoto(file: string, opts: MeasureOptions): Promise<PhotoMeasurement> {
  const result = emptyResult(file, opts.pattern, opts.patternLevel);
  // what the report can still show when the photo turns out unmeasurable
  const partial: { thumbnail: ReportThumbnail | null } = { thumbnail: null };
  try {
    return await measureInner(file, opts, result, partial);
  } catch (e) {
    result.status = 'error';
    if (isEvenfieldError(e)) {
      // stages below the pipeline (geometry, measure) raise errors without the file: name it here
      result.error = e.file ? e.message : `${file}: ${e.message}`;
      result.errorCode = e.code;
    } else {
      const msg = e instanceof Error ? e.message : String(e);
      result.error = `${file}: ${msg}`;
      result.errorCode = 'internal';
    }
    result.grid = null;
    result.uniformity = null;
    const artifacts: PhotoArtifacts | null = opts.artifacts && partial.thumbnail ? { thumbnail: partial.thumbnail, relMap: null, contrastMap: null } : null;
    return { result, artifacts, cornerStrength: 0 };
  }
}

async function measureInner(
  file: string,
  opts: MeasureOptions,
  result: PhotoResult,
  partial: { thumbnail: ReportThumbnail | null },
): Promise<PhotoMeasurement> {
  // Steps 1-7 work on camera-sized images. They run in their own function so that those images are
  // unreachable (and can be freed) during the mura analysis: a local variable of a running function
  // keeps its array alive until the function returns, even after its last use.
  const { map, points, known, widthMm, heightMm, cameraPxPerMapPx, cornerStrength, gainGrid, lens, curve } = await measureCamera(file, opts, result, partial);

  // 8. mura
  let contrastMap: Plane | null = null;
  if (opts.mura) {
    // The outermost map pixels average camera pixels that straddle the active-area edge (part bezel),
    // and the edge transition is a few camera pixels wide (optics, demosaicing): keep that border out
    // of the mura analysis, or it reads as dark lines along every edge. A JPEG also rings inside each
    // 8 x 8 block that holds the step from bezel to panel (a bright rim of a few %): for JPEG photos of
    // lit fields the border reaches one block further. Not on black fields: there the glow to be
    // measured peaks at the edge, and their limits are tens of % (lot study: a corner glow's peak
    // measured 89 % instead of 173 % with the wider border).
    const camPerMap = result.geometry?.cameraPxPerMapPx ?? null;
    const isJpeg = result.decode?.jpegCoded ?? false;
    const ringMapPx = isJpeg && camPerMap && opts.pattern !== 'black' ? 8 / camPerMap : 0;
    // An edge bowed by lens distortion (or a curved panel) leaves the straight outline by up to its
    // sagitta, inside or out: the border reaches that much further, or the bezel shows as a dark line.
    // (bows within the transition's own 3 px are left to it: a straight edge measures a few hundredths)
    const bowPx = result.geometry?.edgeBowPx ?? 0;
    const bowMapPx = camPerMap && bowPx > 1 ? bowPx / camPerMap : 0;
    const border = Math.ceil(EDGE_TRANSITION_CAMERA_PX / Math.max(cameraPxPerMapPx, 1e-3) + ringMapPx + bowMapPx) + 1;
    // JPEG codes each 8 x 8 block on its own: tell the analysis how large a block is on the panel
    const jpegBlockMm = isJpeg && camPerMap ? 8 / (camPerMap * map.pxPerMm) : null;
    // 8-bit sRGB input: the contrast of one level step (a code value, or the JPEG's DC step) at the
    // panel's level in the photo
    const codeStepPct = codeStepAt(result, points, curve);
    // ...and where the code values lie across the panel, for the step where each finding is
    const centreY = points.find((p) => p.u === 0.5 && p.v === 0.5)?.Y ?? points[0]?.Y;
    const codeLevel =
      codeStepPct !== null && centreY !== undefined && centreY > 0
        ? { centreY, gain: gainGrid, stepCodes: result.decode ? levelStepOf(result.decode) : 1, bareStepCodes: result.decode?.codePlateauShare ?? 0, response: curve }
        : null;
    const mura = analyseMura(
      { ...map, valid: withoutBorder(map.valid, map.width, map.height, border) },
      { jpegBlockMm, codeStepPct, codeLevel, edgeBorderMm: border / map.pxPerMm, lens, ...opts.muraOptions, pattern: opts.pattern },
    );
    if (codeStepPct !== null && codeStepPct > 1.5) {
      result.warnings.push(
        `the photo's 8-bit coding resolves the panel's level in steps of ${codeStepPct.toFixed(1)} % here: small mura fainter than that cannot be told from the coding; expose the field higher (code values 180-230 of 255) for finer mura figures`,
      );
    }
    const { contrast, background, cautions, ...rest } = mura;
    void background;
    result.warnings.push(...cautions);
    // The mura list says nothing of features smaller than the analysed map resolves; say so when the
    // criteria seek smaller ones. Compared at the 0.1 mm the message shows (a map of 1.997 px/mm still
    // serves 1 mm).
    const soughtMm = opts.muraOptions.minFeatureMm ?? DEFAULT_MIN_FEATURE_MM;
    if (Math.round(10 * rest.resolvedFromMm) > Math.round(10 * soughtMm)) {
      result.warnings.push(
        `the photo resolves mura features from ${rest.resolvedFromMm.toFixed(1)} mm across (two pixels of the analysed map, ${(2 / rest.resolvedFromMm).toFixed(2)} per mm), ` +
          `not from the ${soughtMm} mm sought: smaller spots and lines cannot be seen, and pass unseen. Come closer, zoom in or use more pixels, ` +
          `or seek features from ${Math.ceil(rest.resolvedFromMm)} mm (mura.minFeatureMm in the criteria)`,
      );
    }
    result.mura = rest;
    result.blobs = rest.blobs;
    // (not when the flicker check has already warned of bands along the rows)
    const rowBands = result.warnings.some((w) => w.startsWith("bands along the camera's rows")) ? 0 : bandsAlongCameraRows(result);
    if (rowBands > 0) {
      const t = result.exposure!.exposureTimeS!;
      result.warnings.push(
        `${rowBands} band or line finding${rowBands > 1 ? 's lie' : ' lies'} along the camera's rows in a photo exposed 1/${Math.round(1 / t)} s: ` +
          "a pulsed (PWM-dimmed) display caught by a rolling shutter draws such bands too, and with fewer than three across the panel they are not recognised as flicker; " +
          "take a second photo: flicker bands move from shot to shot, the panel's own stay (or retake at 1/30 s or longer)",
      );
    }
    contrastMap = contrast;
    if (!known) result.warnings.push('mura areas and SEMU use the nominal panel size: give --panel-size for figures in mm² and true SEMU');
  }

  const centreY = points.find((p) => p.u === 0.5 && p.v === 0.5)?.Y ?? points[0].Y;
  const artifacts: PhotoArtifacts | null = opts.artifacts
    ? {
        thumbnail: partial.thumbnail,
        relMap: relativeMapOf(map, centreY, 600),
        contrastMap: contrastMap ? downsamplePlane(contrastMap, 600) : null,
        panelSizeMm: { width: widthMm, height: heightMm, known },
      }
    : null;
  return { result, artifacts, cornerStrength };
}

interface CameraStage {
  map: PanelMap;
  points: GridPoint[];
  known: boolean;
  widthMm: number;
  heightMm: number;
  cameraPxPerMapPx: number;
  cornerStrength: number;
  /** lens transmission at panel points (grid of nodes over u, v = 0..1), null without a correction */
  gainGrid: { cols: number; rows: number; data: Float32Array } | null;
  /** where the panel lay in the photo, when the lens falloff was left in it (for the mura background) */
  lens: LensField | null;
  /** the table the code values were read through (a measured response, or the embedded profile's tone
   *  curve), or null for the sRGB curve and linear input */
  curve: ResponseCurve | null;
}

/**
 * Decode the display-off frame as the photo was decoded and take its light (scaled by the two photos'
 * exposures, t·S/N² from EXIF) from the photo's linear RGB and luminance, in place. Returns the frame's
 * scaled luminance for the share on the panel.
 */
async function subtractOffFrame(
  offFile: string,
  decoded: DecodedPhoto,
  opts: MeasureOptions,
  file: string,
): Promise<{ lum: Float32Array; ratio: number; sha256: string; warnings: string[] }> {
  const warnings: string[] = [];
  let off: DecodedPhoto;
  try {
    off = await decodePhotoBuffer(await readInputFile(offFile), offFile, {
      transfer: opts.transfer,
      maxPixels: opts.maxPixels,
      scale: decoded.info.scale as 1 | 2 | 4 | 8,
      jpegSamples: opts.jpegSamples,
    });
  } catch (e) {
    const why = e instanceof Error ? e.message : String(e);
    throw new EvenfieldError('unreadable', `display-off frame unusable: ${why}`, file);
  }
  if (off.info.width !== decoded.info.width || off.info.height !== decoded.info.height) {
    throw new EvenfieldError(
      'unreadable',
      `display-off frame ${offFile} is ${off.info.width}×${off.info.height}, the photo ${decoded.info.width}×${decoded.info.height}: take both from one camera position and setting`,
      file,
    );
  }
  const fb = exposureFactor(decoded.exposure);
  const fo = exposureFactor(off.exposure);
  let ratio = 1;
  if (fb !== null && fo !== null) ratio = fo / fb;
  else warnings.push('the display-off frame and the photo do not both give their exposure (EXIF): taken as equal');
  const d = decoded.image.data;
  const o = off.image.data;
  const L = decoded.luminance.data;
  const lum = new Float32Array(L.length);
  const [, , , yr, yg, yb] = SRGB_TO_XYZ as number[];
  for (let i = 0, k = 0; i < L.length; i++, k += 3) {
    const r = ratio * o[k]!;
    const g = ratio * o[k + 1]!;
    const b = ratio * o[k + 2]!;
    d[k] = d[k]! - r;
    d[k + 1] = d[k + 1]! - g;
    d[k + 2] = d[k + 2]! - b;
    lum[i] = yr! * r + yg! * g + yb! * b;
    L[i] = yr! * d[k]! + yg! * d[k + 1]! + yb! * d[k + 2]!;
  }
  return { lum, ratio, sha256: off.sha256, warnings };
}

/** Steps 1-7: decode, falloff, outline, pose, quality gates, rectification, grid; fills `result`. */
async function measureCamera(
  file: string,
  opts: MeasureOptions,
  result: PhotoResult,
  partial: { thumbnail: ReportThumbnail | null },
): Promise<CameraStage> {
  // 1. decode to linear light at working scale
  const buf = await readInputFile(file);
  // the decoder picks the scale from the header it reads anyway (the rule of chooseScale)
  const decoded = await decodePhotoBuffer(buf, file, {
    transfer: opts.transfer,
    maxPixels: opts.maxPixels,
    targetLongSide: opts.workLongSide,
    jpegSamples: opts.jpegSamples,
    clipMaskLinear: clipLinearOf(opts),
  });
  const scale = decoded.info.scale;
  // the table the codes were read through: --response's, or the file's own profile curve
  const curve = typeof decoded.transfer === 'object' ? decoded.transfer : null;
  result.sha256 = decoded.sha256;
  result.decode = decoded.info;
  result.exposure = decoded.exposure;
  result.exposureStats = decoded.stats;
  result.warnings.push(...decoded.warnings);
  // a response belongs to one camera (and picture style): say when the photo comes from another
  const response = responseOf(opts);
  const rc = response?.camera;
  const pe = decoded.exposure;
  if (rc && rc.model && pe.model && (rc.model !== pe.model || (rc.make && pe.make && rc.make !== pe.make))) {
    result.warnings.push(
      `the camera response was measured on ${[rc.make, rc.model].filter(Boolean).join(' ')}, this photo is from ${[pe.make, pe.model].filter(Boolean).join(' ')}: its tone curve may differ`,
    );
  }
  const orientation = decoded.orientation ?? 1;
  if (orientation === 2 || orientation === 4 || orientation === 5 || orientation === 7) {
    result.warnings.push(`EXIF orientation ${orientation} is a mirrored view: corners are ordered as the stored pixels show the panel`);
  }
  const img = decoded.image;
  // camera levels before any correction, for the exposure gates (made by the decoder in its pass)
  const rawLum = decoded.luminance;
  // the display-off frame's light (room light on the screen, the camera's offset) out of a black field
  const off = opts.offFrame ? await subtractOffFrame(opts.offFrame, decoded, opts, file) : null;
  if (off) result.warnings.push(...off.warnings);
  // the camera's hot pixels (and anything no larger than one working pixel) would be measured as spots
  const spikes = removeImpulses(img, rawLum);
  // (the decoder makes it in its pass; nearWhiteMask's rule)
  const clipMask = decoded.clipMask ?? nearWhiteMask(img, clipLinearOf(opts));
  // the photo as taken (before any correction) for the report, kept for unmeasurable photos too
  if (opts.artifacts) partial.thumbnail = thumbnailOf(img, scale, 900);

  // 2. lens falloff, in camera coordinates, before anything geometric
  const falloff: FalloffRecord = { applied: false, method: 'none', source: null, cornerFalloff: null, warnings: [] };
  let transmission: CoarseTransmission | null = null;
  if (opts.falloff.kind === 'profile') {
    const match = profileMismatch(opts.falloff.profile, decoded.exposure, decoded.info.width, decoded.info.height);
    if (match.severity === 'error') {
      throw new EvenfieldError('falloff', `falloff profile ${opts.falloff.source} does not fit this photo: ${match.errors.join('; ')}`, file);
    }
    falloff.warnings.push(...match.warnings);
    const profile = opts.falloff.profile;
    const fullSize = { width: decoded.info.width, height: decoded.info.height };
    transmission = cachedTransmission(`profile ${JSON.stringify(profile)} ${img.width}x${img.height}/${scale} of ${fullSize.width}x${fullSize.height}`, () =>
      coarseTransmission(img.width, img.height, (cols, rows, factor) => channelTransmissionFromProfile(profile, cols, rows, scale * factor, fullSize)),
    );
    falloff.method = 'profile';
    falloff.source = opts.falloff.source;
  } else if (opts.falloff.kind === 'cos4') {
    const f35 = decoded.exposure.focalLength35mm ?? opts.falloff.focal35mm;
    if (!f35) {
      throw new EvenfieldError('falloff', 'the cos⁴ falloff model needs the 35 mm-equivalent focal length (not in EXIF; give --focal-35mm)', file);
    }
    if (decoded.info.transfer !== 'linear') {
      falloff.warnings.push('cos⁴ model applied to sRGB-encoded input: cameras often correct part of the falloff in their JPEGs, so this may over-correct');
    }
    const model = { focal35mm: f35, fullWidth: decoded.info.width, fullHeight: decoded.info.height };
    transmission = cachedTransmission(`cos4 ${JSON.stringify(model)} ${img.width}x${img.height}/${scale}`, () =>
      coarseTransmission(img.width, img.height, (cols, rows, factor) => cos4Transmission(cols, rows, model, scale * factor)),
    );
    falloff.method = 'cos4-model';
    falloff.source = `cos⁴ law, ${f35} mm equivalent focal length`;
  }
  // luminance of the corrected image for the panel finder, made in the correcting pass
  let correctedLum: Plane | null = null;
  if (transmission) {
    correctedLum = applyCoarseTransmissionWithLuminance(img, transmission).luminance;
    falloff.applied = true;
    falloff.cornerFalloff = coarseCornerTransmission(transmission);
  }
  result.falloff = falloff;
  if (!falloff.applied) {
    result.warnings.push('no lens falloff correction was applied: corner luminance includes the lens falloff');
  }

  // 3. panel location
  const lum = correctedLum ?? rawLum;
  let cornersWork: Corners;
  let cornerStrength = 0;
  let geometrySource: GeometryRecord['cornersSource'];
  let edgeResidual: number | null = null;
  let edgeBow: number | null = null;
  if (opts.corners) {
    cornersWork = opts.corners.map((p) => toWork(p, scale)) as Corners;
    geometrySource = 'manual';
  } else {
    let found: ReturnType<typeof findPanel> | null = null;
    let findError: unknown = null;
    try {
      found = findPanel(lum, { pattern: opts.pattern });
    } catch (e) {
      findError = e;
    }
    const shared = opts.shared;
    const sharedFits = shared !== null && shared.imageWidth === decoded.info.width && shared.imageHeight === decoded.info.height;
    if (found && (!sharedFits || found.strength >= shared!.strength * 0.8)) {
      cornersWork = orientCorners(found.corners, orientation);
      cornerStrength = found.strength;
      geometrySource = 'auto';
      edgeResidual = found.edgeResidualPx * scale;
      edgeBow = found.edgeBowPx * scale;
    } else if (sharedFits) {
      cornersWork = shared!.corners.map((p) => toWork(p, scale)) as Corners;
      geometrySource = 'shared';
      edgeBow = shared!.edgeBowPx ?? null;
      result.warnings.push(
        `corners taken from ${shared!.file} (its outline is clearer than this photo's own); this assumes both were taken from the same camera position`,
      );
      if (found) {
        const moved = Math.max(...found.corners.map((p, i) => Math.hypot(p[0] - cornersWork[i][0], p[1] - cornersWork[i][1]))) * scale;
        if (moved > 0.01 * Math.hypot(decoded.info.width, decoded.info.height)) {
          result.warnings.push(`this photo's own outline differs from the shared one by ${moved.toFixed(0)} px: the camera may have moved`);
        }
      }
    } else {
      throw findError ?? new EvenfieldError('no-panel', 'no panel outline found', file);
    }
  }
  // A panel size given landscape for an outline seen portrait (or the other way round): the photo is
  // turned a quarter against the panel and no EXIF orientation says so (or the size was given the wrong
  // way round). Mapping the outline onto the size as it stands would stretch the panel about threefold;
  // the outline's long side is taken as the panel's long side instead.
  if (opts.panelSizeMm) {
    const turn = quarterTurn(quadAspect(cornersWork), opts.panelSizeMm.width / opts.panelSizeMm.height);
    if (turn && geometrySource === 'manual') {
      result.warnings.push(
        `the corners given outline a ${turn.seen} panel but the panel size is ${turn.given}: the corners are used as given (top-left first), so the map stretches the panel; give them starting from the panel's own top-left, or the size the other way round`,
      );
    } else if (turn) {
      cornersWork = [cornersWork[3], cornersWork[0], cornersWork[1], cornersWork[2]];
      result.warnings.push(
        `the outline is ${turn.seen} but the panel size is ${turn.given}: the photo is turned a quarter against the panel (no EXIF orientation says so), so the panel's top is taken to be the photo's left side; ` +
          'if it is the right side, positions on the panel are turned 180°. Rotate the photo upright, or give the size the other way round for a panel mounted that way',
      );
    }
  }
  const cornersFull = cornersWork.map((p) => toFull(p, scale)) as Corners;
  result.corners = cornersFull.map((p) => [round3(p[0]), round3(p[1])]) as Corners;

  // a JPEG's 8-bit codes: dithered by the photo's noise, or a bare staircase of whole codes
  if (decoded.jpegFlatBlocks) {
    const pl = plateauShare(decoded.jpegFlatBlocks, shrink(cornersFull, PLATEAU_INNER_SHRINK));
    result.decode.codePlateauShare = pl ? round3(pl.share) : null;
    if (pl && pl.share >= PLATEAU_WARN_SHARE) {
      result.warnings.push(
        `the photo carries almost no noise: ${(100 * pl.share).toFixed(0)} % of its flat 8 × 8 blocks on the panel lie on whole code values beyond chance, so its smooth gradients are a staircase of whole codes, and the mura analysis takes its level step as ${levelStepOf(result.decode).toFixed(2)} code value; a 16-bit TIFF or PNG, or a photo with the camera's noise reduction lower, resolves finer mura`,
      );
    }
  }

  // 4. pose and size (the quality gates need the viewing angle and the panel's size)
  const known = opts.panelSizeMm !== null;
  let widthMm: number;
  let heightMm: number;
  const fpx = focalPxOf(decoded, scale, null);
  let tiltDeg: number | null = null;
  let viewAngleMaxDeg: number | null = null;
  let poseAspect: number | null = null;
  if (fpx !== null) {
    try {
      const pose = estimatePose(cornersWork, fpx, (img.width - 1) / 2, (img.height - 1) / 2);
      // a rectangle seen through the right focal length has right angles; a large error means the
      // EXIF focal length (or a crop) does not describe this image, so the pose is not trusted
      if (pose.orthogonalityErrorDeg <= MAX_ORTHOGONALITY_ERROR_DEG) {
        tiltDeg = pose.tiltDeg;
        viewAngleMaxDeg = pose.viewAngleMaxDeg;
        poseAspect = pose.aspect;
      } else {
        result.warnings.push(
          `the outline is not a rectangle seen through the EXIF focal length (${pose.orthogonalityErrorDeg.toFixed(1)}° off square): viewing angle and aspect not estimated`,
        );
      }
    } catch {
      tiltDeg = null;
    }
  }
  if (opts.panelSizeMm) {
    widthMm = opts.panelSizeMm.width;
    heightMm = opts.panelSizeMm.height;
    // the outline seen through the EXIF focal length gives the panel's own aspect: a size given for
    // another panel (16:9 for a 16:10 one is 11 % off) would put every area and SEMU on the wrong scale
    const given = widthMm / heightMm;
    if (poseAspect !== null && Math.abs(poseAspect / given - 1) > ASPECT_MISMATCH) {
      result.warnings.push(
        `the outline seen through the EXIF focal length has an aspect of ${poseAspect.toFixed(3)}, the panel size given ${given.toFixed(3)} ` +
          `(${widthMm}x${heightMm} mm): check --panel-size, on which every area and SEMU rests`,
      );
    }
  } else {
    const aspect = poseAspect ?? quadAspect(cornersWork);
    widthMm = 1000;
    heightMm = 1000 / aspect;
    result.warnings.push(
      `panel size not given: sizes are in nominal units of a 1000-unit-wide panel (aspect ${aspect.toFixed(3)} estimated from the outline); give --panel-size for areas in mm and SEMU`,
    );
  }
  const camPxPerMm = quadWidthPx(cornersWork) / widthMm;
  const pxPerMm = Math.min(opts.mapPxPerMm, camPxPerMm);
  const mapW = Math.max(8, Math.round(widthMm * pxPerMm));
  const mapH = Math.max(8, Math.round(heightMm * pxPerMm));

  // how much of the black photo's level on the panel was the display-off frame's light
  if (off) {
    const W = img.width;
    let sumOff = 0;
    let sumAfter = 0;
    for (let y = 0; y < img.height; y += 2) {
      for (let x = 0; x < W; x += 2) {
        if (!insideQuad(cornersWork, x, y)) continue;
        sumOff += off.lum[y * W + x]!;
        sumAfter += rawLum.data[y * W + x]!;
      }
    }
    const sharePct = sumOff + sumAfter > 0 ? (100 * sumOff) / (sumOff + sumAfter) : 0;
    result.offFrame = { file: opts.offFrame!, sha256: off.sha256, exposureRatio: off.ratio, sharePct };
    if (sharePct > 50) {
      result.warnings.push(
        `the display-off frame's light made up ${sharePct.toFixed(0)} % of the black photo's level on the panel: darken the room or remove what the screen reflects, or the black figures rest mostly on the subtraction`,
      );
    }
  }
  // single-pixel spikes on the panel: counted and said (those in the surroundings do not matter)
  const spikesOnPanel = spikes.filter((i) => insideQuad(cornersWork, i % img.width, Math.floor(i / img.width))).length;
  if (result.exposureStats) result.exposureStats = { ...result.exposureStats, spikesRemoved: spikesOnPanel };
  if (spikesOnPanel > 0) {
    result.warnings.push(
      `${spikesOnPanel} single-pixel spike${spikesOnPanel > 1 ? 's' : ''} on the panel replaced by the neighbours' mean before measuring: the camera's hot or dead pixels, or panel dots smaller than one pixel of the photo as measured, which a photo cannot tell apart (look for pixel defects on the panel by eye)`,
    );
  }

  // 5. quality gates that need the outline, the pose and the map's resolution
  const quality = checkPanelQuality(
    file,
    {
      rawLum,
      clipMask,
      image: img,
      corners: cornersWork,
      scale,
      pattern: opts.pattern,
      panelSizeMm: { width: widthMm, height: heightMm },
      minFeatureMm: opts.muraOptions.minFeatureMm ?? DEFAULT_MIN_FEATURE_MM,
      mapFootprintPx: quadWidthPx(cornersWork) / mapW,
      viewAngleMaxDeg,
      response: curve,
      tileGrid: opts.muraOptions.tileGrid ?? null,
      exposureTimeS: decoded.exposure.exposureTimeS,
      codePlateauShare: result.decode.codePlateauShare ?? null,
    },
    opts.quality,
  );
  result.warnings.push(...quality.warnings);
  // a measured response is known between the codes its bracket reached; beyond them it is extended
  const span = responseOf(opts)?.measuredCodes;
  const median = 255 * quality.medianCode;
  if (span && (median < span[0] || median > span[1])) {
    result.warnings.push(
      `the panel's median code value (${median.toFixed(0)}) lies outside the codes the camera response was measured between (${span[0].toFixed(0)}–${span[1].toFixed(0)}): the response there is an extension; widen the bracket`,
    );
  }

  // 6. rectify
  const rect = rectifyRgb(img, cornersWork, mapW, mapH);
  const map = rgbToXyzMap(rect.rgb, rect.valid, widthMm, heightMm, mapW / widthMm, known, decoded.rgbToXyz);
  const geometry: GeometryRecord = {
    cornersSource: geometrySource,
    edgeResidualPx: edgeResidual,
    edgeBowPx: edgeBow === null ? null : round3(edgeBow),
    tiltDeg,
    viewAngleMaxDeg,
    mapWidth: mapW,
    mapHeight: mapH,
    pxPerMm: map.pxPerMm,
    cameraPxPerMapPx: rect.cameraPxPerMapPx * scale,
  };
  result.geometry = geometry;
  if (edgeBow !== null && edgeBow > EDGE_BOW_WARN_PX) {
    const bowMm = edgeBow / (geometry.cameraPxPerMapPx * map.pxPerMm);
    result.warnings.push(
      `the panel's edges bow up to ${edgeBow.toFixed(1)} px (${bowMm.toFixed(1)} mm) from straight lines: lens distortion or a curved panel. ` +
        'The outline is taken as straight, so places near the edges are off by up to that; the mura analysis leaves that strip out. ' +
        "Use the camera's distortion correction, or a longer focal length from farther away",
    );
  }

  // 7. grid
  let points;
  try {
    points = measureGrid(map, opts.grid);
  } catch (e) {
    throw new EvenfieldError('partly-outside', (e as Error).message, file);
  }
  result.grid = {
    layout: opts.grid.layout,
    placement: opts.grid.placement,
    insetPct: opts.grid.placement === 'inset' ? opts.grid.insetFraction * 100 : null,
    spotRadiusPct: opts.grid.spotRadiusPct,
    points,
  };
  result.uniformity = uniformityFigures(points);
  const gainGrid = transmission ? transmissionOnPanel(transmission, cornersWork, 17) : null;
  const f35 = decoded.exposure.focalLength35mm;
  const lens = transmission ? null : lensFieldOf(cornersWork, img.width, img.height, widthMm, heightMm, f35 && f35 > 0 ? f35 : null);
  return { map, points, known, widthMm, heightMm, cameraPxPerMapPx: rect.cameraPxPerMapPx, cornerStrength, gainGrid, lens, curve };
}

function downsamplePlane(p: Plane, maxWidth: number): Plane {
  const f = Math.max(1, Math.ceil(p.width / maxWidth));
  if (f === 1) return p;
  const w = Math.floor(p.width / f);
  const h = Math.floor(p.height / f);
  const out = new Float32Array(w * h);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      let s = 0;
      let n = 0;
      for (let j = 0; j < f; j++)
        for (let i = 0; i < f; i++) {
          const v = p.data[(y * f + j) * p.width + x * f + i];
          if (Number.isFinite(v)) {
            s += v;
            n++;
          }
        }
      out[y * w + x] = n > 0 ? s / n : NaN;
    }
  return { width: w, height: h, data: out };
}

/**
 * Pixels stay in sensor orientation (the falloff belongs to the sensor), but the panel's top-left is
 * the viewer's: re-order auto-found corners by the EXIF orientation (1 none, 3 rotate 180°, 6 rotate
 * 90° clockwise to display, 8 rotate 90° counter-clockwise to display).
 */
export function orientCorners(c: Corners, orientation: number): Corners {
  const shift = orientation === 6 ? 3 : orientation === 8 ? 1 : orientation === 3 ? 2 : 0;
  return [0, 1, 2, 3].map((i) => c[(i + shift) % 4]) as Corners;
}

function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}
