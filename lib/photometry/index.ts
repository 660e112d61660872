// Photometry: sRGB transfer function, RGB -> CIE XYZ -> u'v', luminance planes, and the
// reflected-light exposure equation with its APEX forms.
//
// Conventions (see DEVELOPERS notes): linear RGB uses the sRGB / ITU-R BT.709 primaries and the
// D65 white; XYZ is relative (Y = 1 for the encoding's white). Chromaticity is CIE 1976 u'v'.

import type { ExposureRecord, Plane, RgbImage } from '../types.js';
import { transferTable, type Transfer } from './response.js';

export {
  bracketPoints,
  framePatches,
  responseId,
  solveResponse,
  transferCodeStepPct,
  transferDecode,
  transferEncode,
  transferName,
  transferTable,
  type BracketFrame,
  type BracketSampling,
  type ResponseCurve,
  type ResponseSolution,
  type ResponseSolveOptions,
  type Transfer,
} from './response.js';

// ---------------------------------------------------------------------------------------------
// sRGB transfer function (IEC 61966-2-1)
// ---------------------------------------------------------------------------------------------

/** sRGB decode threshold on the encoded value (IEC 61966-2-1). */
export const SRGB_DECODE_THRESHOLD = 0.04045;
/** sRGB encode threshold on the linear value (IEC 61966-2-1). */
export const SRGB_ENCODE_THRESHOLD = 0.0031308;

/**
 * Encoded sRGB value (0..1) to linear light (0..1), IEC 61966-2-1 piecewise function.
 * Values outside 0..1 follow the same formula (negative values stay on the linear segment).
 */
export function srgbDecode(v: number): number {
  return v <= SRGB_DECODE_THRESHOLD ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4);
}

/** Linear light (0..1) to encoded sRGB (0..1), IEC 61966-2-1 piecewise function. */
export function srgbEncode(l: number): number {
  return l <= SRGB_ENCODE_THRESHOLD ? 12.92 * l : 1.055 * Math.pow(l, 1 / 2.4) - 0.055;
}

/**
 * Contrast (%) of one code value of an 8-bit sRGB image at linear level y (0..1]: the relative change of
 * linear light per code value, 100 x d ln Y / dV = 100 x 2.4 / (V + 0.055 x 255) on the power segment of
 * IEC 61966-2-1 (V = code value of y), 100 / V on the linear segment.
 */
export function srgbCodeStepPct(y: number): number {
  if (!(y > 0 && y <= 1)) throw new RangeError(`linear level must be in (0, 1], got ${y}`);
  const v = 255 * srgbEncode(y);
  return y <= SRGB_ENCODE_THRESHOLD ? 100 / v : (100 * 2.4) / (v + 0.055 * 255);
}

function buildLut(size: number, decode: (v: number) => number): Float32Array {
  const lut = new Float32Array(size);
  const max = size - 1;
  for (let i = 0; i < size; i++) lut[i] = decode(i / max);
  return lut;
}

/** Linear light of every 8-bit sRGB code value 0..255. */
export const SRGB_LUT_8: Float32Array = buildLut(256, srgbDecode);
/** Linear light of every 16-bit sRGB code value 0..65535. */
export const SRGB_LUT_16: Float32Array = buildLut(65536, srgbDecode);
/** Code value / white for 8-bit files whose code values are already linear. */
export const LINEAR_LUT_8: Float32Array = buildLut(256, (v) => v);
/** Code value / white for 16-bit files whose code values are already linear. */
export const LINEAR_LUT_16: Float32Array = buildLut(65536, (v) => v);

const responseLuts = new Map<string, Float32Array>();

/** The lookup table that turns code values of the given depth and transfer into linear light. */
export function decodeLut(bitDepth: 8 | 16, transfer: Transfer): Float32Array {
  if (transfer === 'srgb' || transfer === 'linear') {
    if (bitDepth === 8) return transfer === 'srgb' ? SRGB_LUT_8 : LINEAR_LUT_8;
    return transfer === 'srgb' ? SRGB_LUT_16 : LINEAR_LUT_16;
  }
  if (bitDepth === 16 && transfer.lut16) return transfer.lut16;
  const key = `${bitDepth}:${transfer.id}`;
  let lut = responseLuts.get(key);
  if (!lut) {
    lut = transferTable(transfer, bitDepth === 8 ? 256 : 65536);
    responseLuts.set(key, lut);
  }
  return lut;
}

// ---------------------------------------------------------------------------------------------
// Primaries, white and the RGB -> XYZ matrix
// ---------------------------------------------------------------------------------------------

export type Xy = readonly [number, number];

/** ITU-R BT.709 / sRGB primaries and D65 white, CIE 1931 xy (IEC 61966-2-1; ITU-R BT.709). */
export const BT709_PRIMARIES: { readonly r: Xy; readonly g: Xy; readonly b: Xy } = {
  r: [0.64, 0.33],
  g: [0.3, 0.6],
  b: [0.15, 0.06],
};
export const D65_XY: Xy = [0.3127, 0.329];

/** Row-major 3x3 matrix as 9 numbers. */
export type Matrix3 = readonly number[];

export function invert3(m: Matrix3): number[] {
  const [a, b, c, d, e, f, g, h, i] = m as [number, number, number, number, number, number, number, number, number];
  const A = e * i - f * h;
  const B = -(d * i - f * g);
  const C = d * h - e * g;
  const det = a * A + b * B + c * C;
  if (det === 0 || !Number.isFinite(det)) throw new Error('singular 3x3 matrix');
  return [
    A / det,
    -(b * i - c * h) / det,
    (b * f - c * e) / det,
    B / det,
    (a * i - c * g) / det,
    -(a * f - c * d) / det,
    C / det,
    -(a * h - b * g) / det,
    (a * e - b * d) / det,
  ];
}

/** XYZ (Y = 1) of a chromaticity xy. */
export function xyToXyz(x: number, y: number, Y = 1): [number, number, number] {
  return [(x * Y) / y, Y, ((1 - x - y) * Y) / y];
}

/**
 * Linear RGB -> XYZ matrix from the primaries' and the white's chromaticities: the columns are the
 * primaries' XYZ scaled so that RGB (1, 1, 1) maps to the white with Y = 1 (the textbook derivation
 * used by IEC 61966-2-1 and SMPTE RP 177).
 */
export function rgbToXyzMatrix(r: Xy, g: Xy, b: Xy, white: Xy): number[] {
  const pr = xyToXyz(r[0], r[1]);
  const pg = xyToXyz(g[0], g[1]);
  const pb = xyToXyz(b[0], b[1]);
  const P = [pr[0], pg[0], pb[0], pr[1], pg[1], pb[1], pr[2], pg[2], pb[2]];
  const w = xyToXyz(white[0], white[1]);
  const Pi = invert3(P);
  const s0 = Pi[0]! * w[0] + Pi[1]! * w[1] + Pi[2]! * w[2];
  const s1 = Pi[3]! * w[0] + Pi[4]! * w[1] + Pi[5]! * w[2];
  const s2 = Pi[6]! * w[0] + Pi[7]! * w[1] + Pi[8]! * w[2];
  return [P[0]! * s0, P[1]! * s1, P[2]! * s2, P[3]! * s0, P[4]! * s1, P[5]! * s2, P[6]! * s0, P[7]! * s1, P[8]! * s2];
}

/** Linear sRGB -> CIE XYZ (D65), computed at double precision from the BT.709 primaries and D65. */
export const SRGB_TO_XYZ: Matrix3 = Object.freeze(
  rgbToXyzMatrix(BT709_PRIMARIES.r, BT709_PRIMARIES.g, BT709_PRIMARIES.b, D65_XY),
);
/** CIE XYZ (D65) -> linear sRGB, the inverse of SRGB_TO_XYZ. */
export const XYZ_TO_SRGB: Matrix3 = Object.freeze(invert3(SRGB_TO_XYZ));
/** XYZ of the D65 white with Y = 1. */
export const D65_XYZ: readonly [number, number, number] = Object.freeze(xyToXyz(D65_XY[0], D65_XY[1]));

// Luminance weights (second row of SRGB_TO_XYZ), kept as plain numbers for the hot loops.
const YR = SRGB_TO_XYZ[3]!;
const YG = SRGB_TO_XYZ[4]!;
const YB = SRGB_TO_XYZ[5]!;

export function rgbToXyz(r: number, g: number, b: number): [number, number, number] {
  const m = SRGB_TO_XYZ;
  return [
    m[0]! * r + m[1]! * g + m[2]! * b,
    m[3]! * r + m[4]! * g + m[5]! * b,
    m[6]! * r + m[7]! * g + m[8]! * b,
  ];
}

export function xyzToRgb(X: number, Y: number, Z: number): [number, number, number] {
  const m = XYZ_TO_SRGB;
  return [
    m[0]! * X + m[1]! * Y + m[2]! * Z,
    m[3]! * X + m[4]! * Y + m[5]! * Z,
    m[6]! * X + m[7]! * Y + m[8]! * Z,
  ];
}

/** Relative luminance Y of linear sRGB values (Y = 1 for RGB 1, 1, 1). Linearise first. */
export function luminanceOf(r: number, g: number, b: number): number {
  return YR * r + YG * g + YB * b;
}

/** Plane of relative luminance Y from a linear RGB image. */
export function luminancePlane(img: RgbImage): Plane {
  const n = img.width * img.height;
  if (img.data.length !== n * 3) throw new Error(`luminancePlane: data length ${img.data.length} != 3*${n}`);
  const src = img.data;
  const out = new Float32Array(n);
  for (let i = 0, j = 0; i < n; i++, j += 3) out[i] = YR * src[j]! + YG * src[j + 1]! + YB * src[j + 2]!;
  return { width: img.width, height: img.height, data: out };
}

// ---------------------------------------------------------------------------------------------
// Chromaticity
// ---------------------------------------------------------------------------------------------

/** CIE 1976 u'v' of XYZ (CIE e-ILV 17-23-073). Black (X + 15Y + 3Z = 0) gives [NaN, NaN]. */
export function xyzToUv(X: number, Y: number, Z: number): [number, number] {
  const d = X + 15 * Y + 3 * Z;
  if (d === 0) return [NaN, NaN];
  return [(4 * X) / d, (9 * Y) / d];
}

/** CIE 1976 u'v' from CIE 1931 xy. */
export function xyToUv(x: number, y: number): [number, number] {
  const d = -2 * x + 12 * y + 3;
  return [(4 * x) / d, (9 * y) / d];
}

/** CIE 1931 xy of XYZ; black gives [NaN, NaN]. */
export function xyzToXy(X: number, Y: number, Z: number): [number, number] {
  const s = X + Y + Z;
  if (s === 0) return [NaN, NaN];
  return [X / s, Y / s];
}

/** Colour difference Δu'v' = sqrt(Δu'^2 + Δv'^2). */
export function deltaUv(u1: number, v1: number, u2: number, v2: number): number {
  return Math.hypot(u1 - u2, v1 - v2);
}

/** u'v' of linear sRGB values. */
export function rgbToUv(r: number, g: number, b: number): [number, number] {
  const [X, Y, Z] = rgbToXyz(r, g, b);
  return xyzToUv(X, Y, Z);
}

/**
 * CIE 1976 L*u*v* of XYZ relative to a white (default D65 with Yn = 1). X, Y, Z on the same scale
 * as the white (Y = 1 for the white). CIE 15 formulas with the exact constants 216/24389 and 24389/27.
 */
export function xyzToLuv(
  X: number,
  Y: number,
  Z: number,
  white: readonly [number, number, number] = D65_XYZ,
): [number, number, number] {
  const [Xn, Yn, Zn] = white;
  const yr = Y / Yn;
  const eps = 216 / 24389;
  const kappa = 24389 / 27;
  const L = yr > eps ? 116 * Math.cbrt(yr) - 16 : kappa * yr;
  const [un, vn] = xyzToUv(Xn, Yn, Zn);
  const d = X + 15 * Y + 3 * Z;
  if (d === 0) return [L, 0, 0];
  const u = (4 * X) / d;
  const v = (9 * Y) / d;
  return [L, 13 * L * (u - un), 13 * L * (v - vn)];
}

/** L*u*v* (D65) of encoded sRGB values 0..1. */
export function srgbToLuv(r: number, g: number, b: number): [number, number, number] {
  const [X, Y, Z] = rgbToXyz(srgbDecode(r), srgbDecode(g), srgbDecode(b));
  return xyzToLuv(X, Y, Z);
}

// ---------------------------------------------------------------------------------------------
// Exposure: reflected-light exposure equation and APEX
// ---------------------------------------------------------------------------------------------

/** Reflected-light meter calibration constant K: a common value (ISO 2720 allows 10.6..13.4). */
export const K_DEFAULT = 12.5;
/** Range of K allowed by ISO 2720 for reflected-light meters. */
export const K_ISO2720_RANGE: readonly [number, number] = [10.6, 13.4];

export interface ExposureSettings {
  /** f-number N */
  fNumber: number;
  /** exposure time t, seconds */
  exposureTimeS: number;
  /** ISO arithmetic speed S */
  iso: number;
}

function checkExposure(e: ExposureSettings): void {
  for (const [k, v] of [
    ['fNumber', e.fNumber],
    ['exposureTimeS', e.exposureTimeS],
    ['iso', e.iso],
  ] as const) {
    if (!(Number.isFinite(v) && v > 0)) throw new RangeError(`${k} must be a positive number, got ${v}`);
  }
}

/**
 * Luminance (cd/m²) that a reflected-light meter with constant K would render as a mid-tone for
 * these settings: L = K·N²/(t·S) (ISO 2720 exposure equation). K defaults to 12.5.
 */
export function meteredLuminance(e: ExposureSettings, K: number = K_DEFAULT): number {
  checkExposure(e);
  if (!(Number.isFinite(K) && K > 0)) throw new RangeError(`K must be positive, got ${K}`);
  return (K * e.fNumber * e.fNumber) / (e.exposureTimeS * e.iso);
}

/**
 * N²/(t·S): proportional to the scene luminance that gives the same code value. Multiply linear
 * pixel values by this to compare frames shot at different times or ISO (keep the aperture fixed:
 * vignetting depends on it). Null when any of the three is missing from the record.
 */
export function exposureFactor(e: Pick<ExposureRecord, 'fNumber' | 'exposureTimeS' | 'iso'>): number | null {
  const { fNumber, exposureTimeS, iso } = e;
  if (fNumber == null || exposureTimeS == null || iso == null) return null;
  if (!(fNumber > 0 && exposureTimeS > 0 && iso > 0)) return null;
  return (fNumber * fNumber) / (exposureTimeS * iso);
}

/** APEX aperture value Av = 2·log2(N). */
export function apexAv(fNumber: number): number {
  return 2 * Math.log2(fNumber);
}
/** APEX time value Tv = −log2(t). */
export function apexTv(exposureTimeS: number): number {
  return -Math.log2(exposureTimeS);
}
/** APEX exposure value Ev = Av + Tv. */
export function apexEv(fNumber: number, exposureTimeS: number): number {
  return apexAv(fNumber) + apexTv(exposureTimeS);
}
/** APEX speed value Sv = log2(S/3.125) (Sv = 5 at ISO 100). */
export function apexSv(iso: number): number {
  return Math.log2(iso / 3.125);
}
/** APEX brightness value Bv = Ev − Sv. */
export function apexBv(e: ExposureSettings): number {
  checkExposure(e);
  return apexEv(e.fNumber, e.exposureTimeS) - apexSv(e.iso);
}
/** f-number from the APEX aperture value (EXIF ApertureValue): N = 2^(Av/2). */
export function fNumberFromAv(av: number): number {
  return Math.pow(2, av / 2);
}
/** Exposure time from the APEX time value (EXIF ShutterSpeedValue): t = 2^−Tv. */
export function exposureTimeFromTv(tv: number): number {
  return Math.pow(2, -tv);
}
/** Mid-tone luminance (cd/m²) for an APEX brightness value: L = K·2^Bv/3.125. */
export function luminanceFromBv(bv: number, K: number = K_DEFAULT): number {
  return (K * Math.pow(2, bv)) / 3.125;
}

export interface AbsoluteLuminanceOptions {
  /** meter constant K (default 12.5) */
  K?: number;
  /**
   * Linear value at which the camera places a metered mid-tone. Default 0.18 (sRGB code 118):
   * a from-memory reading of ISO 12232 standard output sensitivity — calibrate per camera.
   */
  midTone?: number;
  /** A per-camera calibration C (cd·s/m²) measured against a luminance meter; overrides K/midTone. */
  calibration?: number;
}

/**
 * Rough absolute luminance (cd/m²) of a linear pixel value: L ≈ C·V·N²/(t·S) with C = K/midTone
 * unless a measured calibration is given. Uncalibrated results are estimates only.
 */
export function estimatedLuminance(vLinear: number, e: ExposureSettings, opts: AbsoluteLuminanceOptions = {}): number {
  checkExposure(e);
  const C = opts.calibration ?? (opts.K ?? K_DEFAULT) / (opts.midTone ?? 0.18);
  return (C * vLinear * e.fNumber * e.fNumber) / (e.exposureTimeS * e.iso);
}
