// Decoding photos to linear light.
//
// - Huffman-coded JPEGs (baseline and progressive) are decoded by jpeg-float.ts without rounding samples
//   to whole code values (DecodeOptions.jpegSamples); everything else, and any JPEG that decoder leaves
//   or finds damaged, by sharp (libvips) as described below.
//
// - The file is read once; the same bytes are hashed (sha256) and decoded.
// - Pixel count is checked from the header before any pixel is decoded (decompression-bomb limit),
//   and sharp's own limitInputPixels is set to the same value.
// - Pixels stay in SENSOR orientation: the EXIF Orientation tag is reported but not applied, because
//   lens falloff belongs to the sensor and is corrected in sensor coordinates.
// - Gray, gray+alpha and palette images become RGB; alpha is dropped (not composited); CMYK JPEGs are
//   converted to sRGB by sharp through their embedded profile (or sharp's generic CMYK profile).
// - Embedded RGB/gray ICC profiles are NOT applied: code values are read as sRGB (or linear, see
//   `transfer`). A warning is raised when the profile's primaries or tone curve are not sRGB's.
// - Transfer 'auto': sRGB, except 16-bit files tagged linear (a PNG gAMA of 1.0 without an sRGB or
//   iCCP chunk, or an embedded ICC profile whose tone curves are all the identity). 8-bit files are
//   always read as sRGB under 'auto' (a linear tag on an 8-bit file only raises a warning).
// - Reduced scale: output pixel (i, j) at scale s covers full-size pixels [s·i, s·i + s) × [s·j, s·j + s),
//   so full-size x maps to (x + 0.5)/s − 0.5 (see toScaled / toFullSize). Edge blocks that do not
//   fill s×s average the pixels they have.
// - Exposure statistics: clipped and dark fractions count every full-size pixel; the median and the
//   99.9th percentile of linear Y are exact up to 2^18 decoded pixels and taken on a regular lattice of
//   them beyond (exposureQuantiles).
// - Speed: the file's bytes are hashed and its EXIF read while sharp decodes in the thread pool; codes
//   become linear light, block means, luminance and the clip/dark counts (and, when asked, the clip mask
//   of the reduced image) in one pass without allocation per pixel (reduceLinearBox); the 8-bit 2×2
//   path looks up the sum of each pair of codes in one table.

import sharp from 'sharp';
import type { Metadata, OutputInfo, Sharp } from 'sharp';
import type { DecodeInfo, ExposureRecord, ExposureStats, Plane, RgbImage } from '../types.js';
import { EvenfieldError } from '../errors.js';
import { SRGB_TO_XYZ, decodeLut, responseId, transferName, type Transfer } from '../photometry/index.js';
import { readExif } from './exif.js';
import { readInputFile, sha256OfBuffer } from './files.js';
import { CAMERA_RAW_ADVICE, cameraRawKind, describeDecodeFailure, describeStart, formatName, lossyCodingAdvice, lossyNonJpegCoding, missingCodec, sniffFormat } from './sniff.js';
import { quantiles } from './stats.js';
import { JpegDataError, decodeJpegFloat, lumaDcQuant, type FlatBlocks } from './jpeg-float.js';
import { readIccSummary, readPngColourChunks, type IccSummary } from './tags.js';

/**
 * How to reach 1/scale size.
 * - 'linear-box': decode full size, convert each code value to linear light through a lookup table and
 *   average scale×scale blocks in linear light in the same pass. Correct for light.
 * - 'jpeg-shrink': for JPEG files, let sharp shrink while decoding (libjpeg DCT scaling) and finish with
 *   its own resampler (sharp keeps the last 2× for its resampler when the target is an exact multiple,
 *   so DCT scaling does scale/2 of the work); the averaging is done on ENCODED values and the lookup
 *   table is applied afterwards. Faster, but biased low on noisy or textured areas (Jensen's
 *   inequality: the mean of the decoded values exceeds the decode of the mean). Other formats fall back
 *   to 'linear-box'. Clipped and dark fractions then come from the shrunk code values, so isolated
 *   clipped pixels are undercounted.
 */
export type ScaleMethod = 'linear-box' | 'jpeg-shrink';

export interface DecodeOptions {
  /** 'auto' (default): sRGB unless a 16-bit file is tagged linear; 'srgb' or 'linear' force it; a
   *  measured camera response (ResponseCurve) replaces the sRGB curve for every file. */
  transfer?: 'auto' | Transfer;
  /** Largest accepted width × height (default 100 megapixels), checked from the header first. */
  maxPixels?: number;
  /** Decode at 1/scale of full size (1, 2, 4 or 8; default 1). */
  scale?: 1 | 2 | 4 | 8;
  /**
   * Instead of `scale`: decode at the largest power-of-two reduction (up to 8) that keeps the long side
   * at least this many pixels, decided from the file's header (see scaleForLongSide).
   */
  targetLongSide?: number;
  /** How to reduce when scale > 1 (default 'linear-box'). */
  method?: ScaleMethod;
  /** A pixel counts as clipped when any channel code ≥ clipLevel × white (default 0.98; common practice). */
  clipLevel?: number;
  /** A pixel counts as dark when its largest channel code < darkLevel × white (default 2/255; common practice). */
  darkLevel?: number;
  /**
   * Also return `clipMask`: 1 where any channel of the decoded (reduced) linear image is at or above this
   * linear level, made in the decoding pass (the pipeline's clipping gate). Default: none.
   */
  clipMaskLinear?: number;
  /**
   * JPEG sample precision (default 'float'): 'float' decodes Huffman-coded JPEGs with evenfield's own decoder
   * (jpeg-float.ts), which keeps the fraction of a code value an 8-bit decoder rounds away; '8bit' (and
   * any file outside that decoder's scope) decodes with libvips to whole code values.
   */
  jpegSamples?: 'float' | '8bit';
}

export interface DecodedPhoto {
  /** linear light, relative to the encoding's white, sensor orientation */
  image: RgbImage;
  /** linear Y of `image` as decoded (luminancePlane of it), made in the same pass; not updated if
   *  `image` is changed in place afterwards */
  luminance: Plane;
  info: DecodeInfo;
  exposure: ExposureRecord;
  sha256: string;
  stats: ExposureStats;
  /** with DecodeOptions.clipMaskLinear: 1 where any channel of `image` (as decoded) is at or above it */
  clipMask: Uint8Array | null;
  /** EXIF Orientation tag (1..8) as stored in the file; the pixels are NOT rotated by it */
  orientation: number | null;
  /** the reduction actually used ('full' at scale 1; 'linear-box' when 'jpeg-shrink' does not apply) */
  method: 'full' | ScaleMethod;
  /** embedded colour profile, if any */
  iccProfile: IccSummary | null;
  /** linear RGB of `image` to CIE XYZ (D65), row-major 3 × 3: the embedded RGB profile's primaries when
   *  they are not sRGB's (e.g. Display P3), else SRGB_TO_XYZ */
  rgbToXyz: readonly number[];
  /** how the code values were turned into linear light (the transfer asked for, or the one chosen) */
  transfer: Transfer;
  /** a JPEG decoded in float (jpeg-float.ts): its luma blocks without AC terms and their mean codes, and
   *  the luma DC quantiser; null for other input */
  jpegFlatBlocks: (FlatBlocks & { dcQuant: number }) | null;
  warnings: string[];
}

export const DEFAULT_MAX_PIXELS = 100_000_000;
const ACCEPTED_FORMATS = new Set(['jpeg', 'png', 'tiff', 'webp', 'gif', 'heif', 'jxl']);

/**
 * Sets the threads libvips may use for one image operation (sharp.concurrency: process-wide; sharp's
 * default is the number of cores, or 1 with glibc's allocator) and returns the previous value. A pool
 * that already decodes one photo per core sets 1, so the decoder's threads do not compete with it.
 */
export function setDecoderThreads(n: number): number {
  const previous = sharp.concurrency();
  sharp.concurrency(n);
  return previous;
}

/** The largest power-of-two reduction (1 … 8) whose long side stays at least `longSide` pixels. */
export function scaleForLongSide(width: number, height: number, longSide: number): 1 | 2 | 4 | 8 {
  const long = Math.max(width, height);
  let s = 1;
  while (s < 8 && long / (s * 2) >= longSide) s *= 2;
  return s as 1 | 2 | 4 | 8;
}

/** Full-size camera x (or y) to the same point at decode scale s. */
export function toScaled(x: number, s: number): number {
  return (x + 0.5) / s - 0.5;
}
/** Point at decode scale s to full-size camera coordinates. */
export function toFullSize(x: number, s: number): number {
  return (x + 0.5) * s - 0.5;
}

/** Read and decode a photo file. Errors: 'not-found', 'unreadable', 'too-large' (EvenfieldError). */
export async function decodePhoto(file: string, opts: DecodeOptions = {}): Promise<DecodedPhoto> {
  const buf = await readInputFile(file);
  return decodePhotoBuffer(buf, file, opts);
}

interface Plan {
  format: string;
  width: number;
  height: number;
  bitDepth: 8 | 16;
  channels: number;
  isCmyk: boolean;
  icc: IccSummary | null;
  exifBlock: Buffer | null;
  orientationFromHeader: number | null;
}

async function readHeader(buf: Buffer, name: string, maxPixels: number): Promise<Plan> {
  const raw = cameraRawKind(buf, name);
  if (raw !== null) throw new EvenfieldError('unreadable', `camera raw file (${raw}): ${CAMERA_RAW_ADVICE}`, name);
  const sniffed = sniffFormat(buf);
  if (sniffed === null) throw new EvenfieldError('unreadable', `not an image file (starts with ${describeStart(buf)})`, name);
  if (sniffed.startsWith('other:')) {
    throw new EvenfieldError('unreadable', `not a supported image file (${sniffed.slice(6)})`, name);
  }
  const lossy = lossyNonJpegCoding(buf);
  if (lossy !== null) throw new EvenfieldError('lossy-format', lossyCodingAdvice(lossy), name);
  let meta: Metadata;
  try {
    meta = await sharp(buf, { limitInputPixels: false }).metadata();
  } catch (e) {
    const msg = (e as Error).message;
    if (missingCodec(msg) !== null) throw new EvenfieldError('unreadable', describeDecodeFailure(sniffed, msg), name);
    if (/unsupported|not built|no decoder|compression format|not (been )?enabled/i.test(msg)) {
      const first = (msg.split('\n')[0] ?? '').trim();
      throw new EvenfieldError('unreadable', `${formatName(sniffed)} variant not supported by the decoder (${first})`, name);
    }
    throw new EvenfieldError('unreadable', `damaged ${formatName(sniffed)} header: ${describeDecodeFailure(sniffed, msg)}`, name);
  }
  const format = String(meta.format);
  if (!ACCEPTED_FORMATS.has(format)) {
    throw new EvenfieldError('unreadable', `not a supported image file (${formatName(format)})`, name);
  }
  const width = meta.width ?? 0;
  const height = meta.height ?? 0;
  if (!(width > 0 && height > 0)) throw new EvenfieldError('unreadable', `${formatName(format)} header gives no image size`, name);
  if (width * height > maxPixels) {
    throw new EvenfieldError(
      'too-large',
      `image is ${width}×${height} = ${((width * height) / 1e6).toFixed(1)} megapixels, above the limit of ${(maxPixels / 1e6).toFixed(1)} megapixels`,
      name,
    );
  }
  let bitDepth: 8 | 16;
  if (meta.depth === 'uchar') bitDepth = 8;
  else if (meta.depth === 'ushort') bitDepth = 16;
  else throw new EvenfieldError('unreadable', `unsupported sample format "${meta.depth}" in ${formatName(format)} file (8- or 16-bit integers only)`, name);
  return {
    format,
    width,
    height,
    bitDepth,
    channels: meta.channels ?? 0,
    isCmyk: meta.space === 'cmyk',
    icc: meta.icc ? readIccSummary(meta.icc) : null,
    exifBlock: meta.exif ?? null,
    orientationFromHeader: meta.orientation ?? null,
  };
}

function chooseTransfer(buf: Buffer, plan: Plan, requested: 'auto' | Transfer, warnings: string[]): Transfer {
  // a measured response is of a camera's 8-bit code values (its JPEG engine); a 16-bit file came from
  // other software (a raw converter), whose curve the file itself declares
  if (typeof requested === 'object' && plan.bitDepth === 16) {
    warnings.push("16-bit file: the camera response (measured on 8-bit photos) is not applied; the file's own transfer is used");
    requested = 'auto';
  }
  if (requested !== 'auto') return requested;
  let taggedLinear = false;
  let why = '';
  if (plan.icc && plan.icc.curve === 'linear') {
    taggedLinear = true;
    why = 'its colour profile has linear tone curves';
  } else if (plan.format === 'png' && !plan.icc) {
    const chunks = readPngColourChunks(buf);
    if (chunks.gamma !== null && Math.abs(chunks.gamma - 1) < 0.01 && !chunks.srgb && !chunks.iccp) {
      taggedLinear = true;
      why = 'its gAMA chunk says gamma 1.0';
    }
  }
  if (!taggedLinear) {
    // a file whose profile declares another tone curve (Adobe RGB's gamma 563/256, ProPhoto's 1.8 ...):
    // decoded through that curve, as colour-managed software shows it (16-bit files through its values
    // at every 16-bit code)
    const icc = plan.icc;
    const table = icc?.curve === 'other' ? icc.curveTable : null;
    if (!table || (plan.bitDepth === 16 && !icc!.curveTable16)) return 'srgb';
    return { id: responseId(table), linear: table, source: 'profile', ...(plan.bitDepth === 16 ? { lut16: icc!.curveTable16! } : {}) };
  }
  if (plan.bitDepth === 16) return 'linear';
  warnings.push(`8-bit file tagged linear (${why}); decoded as sRGB — declare the transfer to override`);
  return 'srgb';
}

function profileWarnings(plan: Plan, transfer: Transfer, warnings: string[]): void {
  const icc = plan.icc;
  if (plan.isCmyk) {
    warnings.push(`CMYK file converted to sRGB through ${icc ? 'its embedded profile' : "the decoder's generic CMYK profile"}; colour is approximate`);
    return;
  }
  if (!icc) return;
  const name = icc.description ? `"${icc.description}"` : '(unnamed)';
  if (icc.srgbPrimaries === false && !plan.isCmyk) {
    warnings.push(
      icc.rgbToXyzD65
        ? `embedded colour profile ${name} has primaries other than sRGB's: colour and luminance are computed with its primaries`
        : `embedded colour profile ${name} has primaries other than sRGB's and none could be read from it; code values are read as sRGB, so colour figures are approximate`,
    );
  }
  if (icc.curve === 'other' && transfer === 'srgb') {
    warnings.push(`embedded colour profile ${name} has a tone curve other than sRGB's; code values are decoded with the sRGB curve`);
  } else if (typeof transfer === 'object' && transfer.source === 'profile') {
    warnings.push(`embedded colour profile ${name} has a tone curve other than sRGB's: code values are decoded with its curve`);
  }
}

/** Code value thresholds for clipped and dark pixels at a bit depth. */
function thresholds(bitDepth: 8 | 16, clipLevel: number, darkLevel: number): { clipCode: number; darkCode: number } {
  const white = bitDepth === 8 ? 255 : 65535;
  return { clipCode: Math.ceil(clipLevel * white - 1e-9), darkCode: Math.ceil(darkLevel * white - 1e-9) };
}

export interface Reduced {
  /** linear RGB, interleaved, width × height × 3 */
  data: Float32Array;
  /** linear Y of `data` (the same values as luminancePlane of it), width × height */
  luminance: Float32Array;
  width: number;
  height: number;
  clipped: number;
  dark: number;
  pixels: number;
  /** with a clip level: 1 where any channel of the OUTPUT pixel is at or above it (else null) */
  clipMask: Uint8Array | null;
}

/** 1 where any channel of interleaved linear RGB is at or above `level` (nearWhiteMask's rule). */
function clipMaskOf(d: Float32Array, n: number, level: number): Uint8Array {
  const out = new Uint8Array(n);
  for (let i = 0, k = 0; i < n; i++, k += 3) {
    if (d[k]! >= level || d[k + 1]! >= level || d[k + 2]! >= level) out[i] = 1;
  }
  return out;
}

// Luminance weights: the second row of SRGB_TO_XYZ, as luminancePlane uses them.
const YR = SRGB_TO_XYZ[3]!;
const YG = SRGB_TO_XYZ[4]!;
const YB = SRGB_TO_XYZ[5]!;

/**
 * Code values (interleaved RGB) -> linear light through `lut`, averaged over s×s blocks in linear light,
 * counting clipped and dark pixels of the input in the same pass, and the luminance of each output pixel.
 * The scale-2 reduction of 8-bit codes (the pipeline's usual case) has its own loop over whole 2×2 blocks;
 * every path sums a block row by row and gives bit-identical results. With `inPlace` that reduction may
 * write its output over `src` (even width and height: the floats of an output row take exactly the bytes
 * of its two input rows), so the decoder's buffer is not followed by a second one of the same size.
 */
export function reduceLinearBox(
  src: Uint8Array | Uint16Array,
  W: number,
  H: number,
  s: number,
  lut: Float32Array,
  clipCode: number,
  darkCode: number,
  inPlace = false,
  clipLinear: number | null = null,
): Reduced {
  if (src.length !== W * H * 3) throw new Error(`reduceLinearBox: ${src.length} codes for ${W}×${H}×3`);
  if (s === 2 && src instanceof Uint8Array) return reduce2x8(src, W, H, lut, clipCode, darkCode, inPlace, clipLinear);
  const r = s === 1 ? linearise(src, W, H, lut, clipCode, darkCode) : reduceBlocks(src, W, H, s, lut, clipCode, darkCode);
  if (clipLinear !== null) r.clipMask = clipMaskOf(r.data, r.width * r.height, clipLinear);
  return r;
}

function linearise(src: Uint8Array | Uint16Array, W: number, H: number, lut: Float32Array, clipCode: number, darkCode: number): Reduced {
  let clipped = 0;
  let dark = 0;
  const n = W * H;
  const out = new Float32Array(n * 3);
  const lum = new Float32Array(n);
  for (let i = 0, k = 0; k < n; i += 3, k++) {
    const c0 = src[i]!;
    const c1 = src[i + 1]!;
    const c2 = src[i + 2]!;
    const mx = c0 > c1 ? (c0 > c2 ? c0 : c2) : c1 > c2 ? c1 : c2;
    if (mx >= clipCode) clipped++;
    if (mx < darkCode) dark++;
    const r = lut[c0]!;
    const g = lut[c1]!;
    const b = lut[c2]!;
    out[i] = r;
    out[i + 1] = g;
    out[i + 2] = b;
    lum[k] = YR * r + YG * g + YB * b;
  }
  return { data: out, luminance: lum, width: W, height: H, clipped, dark, pixels: n, clipMask: null };
}

/** Any block size; blocks at the right and bottom edges that do not fill s×s average the pixels they have. */
function reduceBlocks(
  src: Uint8Array | Uint16Array,
  W: number,
  H: number,
  s: number,
  lut: Float32Array,
  clipCode: number,
  darkCode: number,
): Reduced {
  let clipped = 0;
  let dark = 0;
  const w = Math.ceil(W / s);
  const h = Math.ceil(H / s);
  const out = new Float32Array(w * h * 3);
  const lum = new Float32Array(w * h);
  const acc = new Float64Array(w * 3);
  for (let oy = 0; oy < h; oy++) {
    acc.fill(0);
    const y0 = oy * s;
    const y1 = Math.min(H, y0 + s);
    for (let y = y0; y < y1; y++) {
      let i = y * W * 3;
      let x = 0;
      for (let o = 0; o < w * 3; o += 3) {
        const xe = x + s < W ? x + s : W;
        let a0 = 0;
        let a1 = 0;
        let a2 = 0;
        for (; x < xe; x++, i += 3) {
          const c0 = src[i]!;
          const c1 = src[i + 1]!;
          const c2 = src[i + 2]!;
          const mx = c0 > c1 ? (c0 > c2 ? c0 : c2) : c1 > c2 ? c1 : c2;
          if (mx >= clipCode) clipped++;
          if (mx < darkCode) dark++;
          a0 += lut[c0]!;
          a1 += lut[c1]!;
          a2 += lut[c2]!;
        }
        acc[o] = acc[o]! + a0;
        acc[o + 1] = acc[o + 1]! + a1;
        acc[o + 2] = acc[o + 2]! + a2;
      }
    }
    const rows = y1 - y0;
    const base = oy * w * 3;
    for (let ox = 0; ox < w; ox++) {
      const cols = Math.min(W, ox * s + s) - ox * s;
      const inv = 1 / (rows * cols);
      const o = ox * 3;
      const r = Math.fround(acc[o]! * inv);
      const g = Math.fround(acc[o + 1]! * inv);
      const b = Math.fround(acc[o + 2]! * inv);
      out[base + o] = r;
      out[base + o + 1] = g;
      out[base + o + 2] = b;
      lum[oy * w + ox] = YR * r + YG * g + YB * b;
    }
  }
  return { data: out, luminance: lum, width: w, height: h, clipped, dark, pixels: W * H, clipMask: null };
}

/**
 * Scale 2, 8-bit: one pass over two input rows at a time, whole 2×2 blocks in the inner loop without
 * inner loops or allocation; a last odd column or row is finished like reduceBlocks (the pixels the
 * block has). Sums (top pair) + (bottom pair) in double precision, as reduceBlocks does. (The loop has
 * no closure over its counters: captured variables would live in a heap context, not in registers.)
 */
function reduce2x8(
  src: Uint8Array,
  W: number,
  H: number,
  lut: Float32Array,
  clipCode: number,
  darkCode: number,
  inPlace: boolean,
  clipLinear: number | null,
): Reduced {
  const w = (W + 1) >> 1;
  const h = (H + 1) >> 1;
  const overwrite = inPlace && W % 2 === 0 && H % 2 === 0 && src.byteOffset % 4 === 0;
  const out = overwrite ? new Float32Array(src.buffer, src.byteOffset, w * h * 3) : new Float32Array(w * h * 3);
  const lum = new Float32Array(w * h);
  const counts = new Float64Array(2); // clipped, dark
  const clipMask = clipLinear !== null ? new Uint8Array(w * h) : null;
  wholeBlocks2x8(src, W, H, lut, clipCode, darkCode, out, lum, counts, overwrite, clipMask, clipLinear ?? Infinity);
  // partial blocks: the last column when W is odd, the last row when H is odd
  const wf = W >> 1;
  const hf = H >> 1;
  const edge = (ox: number, oy: number): void => {
    partialBlock2(src, W, H, lut, clipCode, darkCode, out, lum, counts, ox, oy, w);
    const k = (oy * w + ox) * 3;
    if (clipMask && (out[k]! >= clipLinear! || out[k + 1]! >= clipLinear! || out[k + 2]! >= clipLinear!)) clipMask[oy * w + ox] = 1;
  };
  if (wf < w) for (let oy = 0; oy < hf; oy++) edge(wf, oy);
  if (hf < h) for (let ox = 0; ox < w; ox++) edge(ox, hf);
  return { data: out, luminance: lum, width: w, height: h, clipped: counts[0]!, dark: counts[1]!, pixels: W * H, clipMask };
}

/** Sums of two table entries, pairs[(a << 8) | b] = lut[a] + lut[b], the same double-precision sum the
 *  block loop would form, made once per table: a 2×2 block's row pair is one look-up, not two. */
const pairTables = new WeakMap<Float32Array, Float64Array>();
function pairTable(lut: Float32Array): Float64Array {
  let t = pairTables.get(lut);
  if (!t) {
    t = new Float64Array(65536);
    for (let a = 0; a < 256; a++) for (let b = 0; b < 256; b++) t[(a << 8) | b] = lut[a]! + lut[b]!;
    pairTables.set(lut, t);
  }
  return t;
}

function wholeBlocks2x8(
  src: Uint8Array,
  W: number,
  H: number,
  lut: Float32Array,
  clipCode: number,
  darkCode: number,
  out: Float32Array,
  lum: Float32Array,
  counts: Float64Array,
  overwrite: boolean,
  clipMask: Uint8Array | null,
  clipLinear: number,
): void {
  let clipped = 0;
  let dark = 0;
  const pairs = pairTable(lut);
  const w = (W + 1) >> 1;
  const row = W * 3;
  const wf = W >> 1; // whole blocks across
  const hf = H >> 1; // whole blocks down
  // writing over the input: each pair of input rows is copied aside before its output row replaces it
  const rows = overwrite ? new Uint8Array(2 * row) : null;
  for (let oy = 0; oy < hf; oy++) {
    let i = 2 * oy * row;
    let s = src;
    if (rows) {
      rows.set(src.subarray(i, i + 2 * row));
      s = rows;
      i = 0;
    }
    let j = i + row;
    let o = oy * w * 3;
    let q = oy * w;
    for (let ox = 0; ox < wf; ox++, i += 6, j += 6, o += 3, q++) {
      const a0 = s[i]!;
      const a1 = s[i + 1]!;
      const a2 = s[i + 2]!;
      const b0 = s[i + 3]!;
      const b1 = s[i + 4]!;
      const b2 = s[i + 5]!;
      const c0 = s[j]!;
      const c1 = s[j + 1]!;
      const c2 = s[j + 2]!;
      const d0 = s[j + 3]!;
      const d1 = s[j + 4]!;
      const d2 = s[j + 5]!;
      // (lut[a] + lut[b]) + (lut[c] + lut[d]), as partialBlock2 and reduceBlocks sum a block
      const r = Math.fround((pairs[(a0 << 8) | b0]! + pairs[(c0 << 8) | d0]!) * 0.25);
      const g = Math.fround((pairs[(a1 << 8) | b1]! + pairs[(c1 << 8) | d1]!) * 0.25);
      const b = Math.fround((pairs[(a2 << 8) | b2]! + pairs[(c2 << 8) | d2]!) * 0.25);
      out[o] = r;
      out[o + 1] = g;
      out[o + 2] = b;
      lum[q] = YR * r + YG * g + YB * b;
      if (clipMask !== null && (r >= clipLinear || g >= clipLinear || b >= clipLinear)) clipMask[q] = 1;
      let m = a0 > a1 ? a0 : a1;
      if (a2 > m) m = a2;
      if (m >= clipCode) clipped++;
      if (m < darkCode) dark++;
      m = b0 > b1 ? b0 : b1;
      if (b2 > m) m = b2;
      if (m >= clipCode) clipped++;
      if (m < darkCode) dark++;
      m = c0 > c1 ? c0 : c1;
      if (c2 > m) m = c2;
      if (m >= clipCode) clipped++;
      if (m < darkCode) dark++;
      m = d0 > d1 ? d0 : d1;
      if (d2 > m) m = d2;
      if (m >= clipCode) clipped++;
      if (m < darkCode) dark++;
    }
  }
  counts[0] = counts[0]! + clipped;
  counts[1] = counts[1]! + dark;
}

function partialBlock2(
  src: Uint8Array,
  W: number,
  H: number,
  lut: Float32Array,
  clipCode: number,
  darkCode: number,
  out: Float32Array,
  lum: Float32Array,
  counts: Float64Array,
  ox: number,
  oy: number,
  w: number,
): void {
  const x0 = 2 * ox;
  const x1 = Math.min(W, x0 + 2);
  const y0 = 2 * oy;
  const y1 = Math.min(H, y0 + 2);
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  for (let y = y0; y < y1; y++) {
    let a0 = 0;
    let a1 = 0;
    let a2 = 0;
    for (let x = x0, i = (y * W + x0) * 3; x < x1; x++, i += 3) {
      const c0 = src[i]!;
      const c1 = src[i + 1]!;
      const c2 = src[i + 2]!;
      const mx = c0 > c1 ? (c0 > c2 ? c0 : c2) : c1 > c2 ? c1 : c2;
      if (mx >= clipCode) counts[0]!++;
      if (mx < darkCode) counts[1]!++;
      a0 += lut[c0]!;
      a1 += lut[c1]!;
      a2 += lut[c2]!;
    }
    s0 += a0;
    s1 += a1;
    s2 += a2;
  }
  const inv = 1 / ((y1 - y0) * (x1 - x0));
  const r = Math.fround(s0 * inv);
  const g = Math.fround(s1 * inv);
  const b = Math.fround(s2 * inv);
  const o = (oy * w + ox) * 3;
  out[o] = r;
  out[o + 1] = g;
  out[o + 2] = b;
  lum[oy * w + ox] = YR * r + YG * g + YB * b;
}

/** Largest number of luminance values the exposure quantiles are taken over; larger images are sampled. */
export const STATS_SAMPLE_LIMIT = 1 << 18;

/**
 * Median and 99.9th percentile of a luminance plane: exact up to STATS_SAMPLE_LIMIT values, else over
 * the pixels of a regular lattice (every k-th pixel of every k-th row, k the smallest step that brings
 * the count under the limit), which leaves a quarter of the limit or more (190 000 values at 12 MP, 240 000
 * at 24 MP): plenty for these two figures.
 */
export function exposureQuantiles(lum: Float32Array, width: number, height: number): { median: number; p999: number } {
  let sample = lum;
  if (lum.length > STATS_SAMPLE_LIMIT) {
    const k = Math.ceil(Math.sqrt(lum.length / STATS_SAMPLE_LIMIT));
    const sw = Math.ceil(width / k);
    const sh = Math.ceil(height / k);
    sample = new Float32Array(sw * sh);
    let m = 0;
    for (let y = 0; y < height; y += k) {
      const r = y * width;
      for (let x = 0; x < width; x += k) sample[m++] = lum[r + x]!;
    }
  }
  const [median, p999] = quantiles(sample, [0.5, 0.999]) as [number, number];
  return { median, p999 };
}

function sharpInput(buf: Buffer, plan: Plan, maxPixels: number): Sharp {
  return sharp(buf, {
    // JPEG: libjpeg reports damaged entropy-coded data ("Corrupt JPEG data: bad Huffman code") only as a
    // warning and fills the blocks with whatever it decoded, so a damaged file would be measured as if
    // whole; refuse on warnings. Other formats: refuse truncated data (libpng warns on harmless chunk
    // problems such as a known-incorrect sRGB profile, which must not refuse a photo).
    failOn: plan.format === 'jpeg' ? 'warning' : 'truncated',
    limitInputPixels: Math.max(1, Math.floor(maxPixels)),
    // Apply embedded profiles only to CMYK (which must be converted); RGB/gray code values are read as is.
    ignoreIcc: !plan.isCmyk,
    sequentialRead: true,
  });
}

async function runSharp(pipeline: Sharp, plan: Plan, name: string): Promise<{ data: Buffer; info: OutputInfo }> {
  try {
    return await pipeline.toBuffer({ resolveWithObject: true });
  } catch (e) {
    const msg = (e as Error).message;
    if (/pixel limit/i.test(msg)) throw new EvenfieldError('too-large', `image exceeds the pixel limit (${msg})`, name);
    throw new EvenfieldError('unreadable', describeDecodeFailure(plan.format, msg), name);
  }
}

/** Decode photo bytes already in memory; `name` is used in messages. */
export async function decodePhotoBuffer(buf: Buffer, name: string, opts: DecodeOptions = {}): Promise<DecodedPhoto> {
  if (opts.scale !== undefined && ![1, 2, 4, 8].includes(opts.scale)) {
    throw new EvenfieldError('usage', `decode scale must be 1, 2, 4 or 8, got ${opts.scale}`, name);
  }
  const maxPixels = opts.maxPixels ?? DEFAULT_MAX_PIXELS;
  if (!(maxPixels > 0)) throw new EvenfieldError('usage', `maxPixels must be positive, got ${maxPixels}`, name);
  const clipLevel = opts.clipLevel ?? 0.98;
  const darkLevel = opts.darkLevel ?? 2 / 255;
  if (buf.length === 0) throw new EvenfieldError('unreadable', 'empty file (0 bytes)', name);

  const plan = await readHeader(buf, name, maxPixels);
  const scale = opts.targetLongSide !== undefined ? scaleForLongSide(plan.width, plan.height, opts.targetLongSide) : (opts.scale ?? 1);
  const warnings: string[] = [];
  const transfer = chooseTransfer(buf, plan, opts.transfer ?? 'auto', warnings);
  profileWarnings(plan, transfer, warnings);

  const useShrink = scale > 1 && opts.method === 'jpeg-shrink' && plan.format === 'jpeg';
  const method: DecodedPhoto['method'] = scale === 1 ? 'full' : useShrink ? 'jpeg-shrink' : 'linear-box';

  // Huffman-coded JPEG at full precision (see jpeg-float.ts). Damaged data and files outside its scope go to
  // libvips below, which decodes them to whole codes or reports the damage in its own words.
  if (plan.format === 'jpeg' && !useShrink && !plan.isCmyk && (opts.jpegSamples ?? 'float') === 'float') {
    const th = thresholds(8, clipLevel, darkLevel);
    let fl: (Reduced & { lumaDcQuant: number; lumaBlocks: FlatBlocks }) | null = null;
    try {
      fl = decodeJpegFloat(buf, { scale, transfer, clipCode: th.clipCode, darkCode: th.darkCode, clipLinear: opts.clipMaskLinear ?? null, weights: [YR, YG, YB] });
    } catch (e) {
      if (!(e instanceof JpegDataError)) throw e;
    }
    if (fl && (fl.width !== Math.ceil(plan.width / scale) || fl.height !== Math.ceil(plan.height / scale))) fl = null;
    if (fl) {
      const sha256 = sha256OfBuffer(buf);
      const exif = await readExif(buf, plan.exifBlock);
      const photo = finish(fl, plan, transfer, scale, 'float', fl.lumaDcQuant / 8, sha256, exif, method, warnings);
      photo.jpegFlatBlocks = { ...fl.lumaBlocks, dcQuant: fl.lumaDcQuant };
      return photo;
    }
  }

  // Start the decoder (it runs in libuv's thread pool), then hash the bytes and read the EXIF block on
  // this thread meanwhile. The early catch only keeps a failure from counting as unhandled before it
  // is awaited below; the await still throws it.
  const is16 = !useShrink && plan.bitDepth === 16;
  let pipeline: Sharp;
  if (useShrink) {
    // JPEG is always 8-bit.
    pipeline = sharpInput(buf, plan, maxPixels)
      .removeAlpha()
      .toColourspace('srgb')
      // Kernel of sharp's final 2× step: lanczos3. libvips' 8-bit 'linear' (and 'mitchell', 'mks2021')
      // reduce rounds ties one way, a measured +0.125 (−0.125) code bias on noisy fields; lanczos3
      // measured within ±0.002 codes.
      .resize(Math.ceil(plan.width / scale), Math.ceil(plan.height / scale), { fit: 'fill', kernel: 'lanczos3', fastShrinkOnLoad: true })
      .raw();
  } else {
    pipeline = sharpInput(buf, plan, maxPixels)
      .removeAlpha()
      .toColourspace(is16 ? 'rgb16' : 'srgb')
      .raw(is16 ? { depth: 'ushort' } : {});
  }
  const decoding = runSharp(pipeline, plan, name);
  decoding.catch(() => undefined);
  const sha256 = sha256OfBuffer(buf);
  const exif = await readExif(buf, plan.exifBlock);
  const { data, info: out } = await decoding;

  let reduced: Reduced;
  if (useShrink) {
    const codes = new Uint8Array(data.buffer, data.byteOffset, data.length);
    const th = thresholds(8, clipLevel, darkLevel);
    reduced = reduceLinearBox(codes, out.width, out.height, 1, decodeLut(8, transfer), th.clipCode, th.darkCode, false, opts.clipMaskLinear ?? null);
  } else {
    if (out.channels !== 3 || out.width !== plan.width || out.height !== plan.height) {
      throw new EvenfieldError('internal', `decoder returned ${out.width}×${out.height}×${out.channels}, expected ${plan.width}×${plan.height}×3`, name);
    }
    const codes = is16
      ? new Uint16Array(data.buffer, data.byteOffset, data.length / 2)
      : new Uint8Array(data.buffer, data.byteOffset, data.length);
    const th = thresholds(plan.bitDepth, clipLevel, darkLevel);
    // the decoder's buffer is ours: the 2×2 reduction may write over it
    reduced = reduceLinearBox(codes, out.width, out.height, scale, decodeLut(plan.bitDepth, transfer), th.clipCode, th.darkCode, true, opts.clipMaskLinear ?? null);
  }

  const dcq = plan.format === 'jpeg' ? lumaDcQuant(buf) : null;
  const levelStep = plan.bitDepth === 16 ? null : Math.max(1, (dcq ?? 0) / 8);
  return finish(reduced, plan, transfer, scale, plan.format === 'jpeg' ? '8bit' : null, levelStep, sha256, exif, method, warnings);
}

function finish(
  reduced: Reduced,
  plan: Plan,
  transfer: Transfer,
  scale: number,
  jpegSamples: 'float' | '8bit' | null,
  levelStepCodes: number | null,
  sha256: string,
  exif: Awaited<ReturnType<typeof readExif>>,
  method: DecodedPhoto['method'],
  warnings: string[],
): DecodedPhoto {
  const image: RgbImage = { width: reduced.width, height: reduced.height, data: reduced.data };
  const luminance: Plane = { width: reduced.width, height: reduced.height, data: reduced.luminance };
  const { median, p999 } = exposureQuantiles(reduced.luminance, reduced.width, reduced.height);
  const stats: ExposureStats = {
    clippedFraction: reduced.clipped / reduced.pixels,
    darkFraction: reduced.dark / reduced.pixels,
    median,
    p999,
  };

  const info: DecodeInfo = {
    format: plan.format,
    width: plan.width,
    height: plan.height,
    bitDepth: plan.bitDepth,
    channels: plan.channels,
    transfer: transferName(transfer),
    ...(typeof transfer === 'object' ? { responseId: transfer.id } : {}),
    scale,
    jpegSamples,
    levelStepCodes,
    jpegCoded: plan.format === 'jpeg' || (plan.format === 'tiff' && (exif.compression === 6 || exif.compression === 7)),
  };
  return {
    image,
    luminance,
    info,
    exposure: exif.exposure,
    sha256,
    stats,
    clipMask: reduced.clipMask,
    orientation: exif.orientation ?? plan.orientationFromHeader,
    method,
    iccProfile: plan.icc,
    rgbToXyz: primariesOf(plan),
    transfer,
    jpegFlatBlocks: null,
    warnings,
  };
}

/** The RGB to XYZ matrix the file's values are in (see DecodedPhoto.rgbToXyz). CMYK files are converted
 *  to sRGB by the decoder; profiles without colorant tags are taken as sRGB. */
function primariesOf(plan: Plan): readonly number[] {
  const icc = plan.icc;
  if (plan.isCmyk || !icc || icc.srgbPrimaries !== false || !icc.rgbToXyzD65) return SRGB_TO_XYZ;
  return icc.rgbToXyzD65;
}
