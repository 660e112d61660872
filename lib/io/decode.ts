// Decoding photos to linear light.
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

import sharp from 'sharp';
import type { Metadata, OutputInfo, Sharp } from 'sharp';
import type { DecodeInfo, ExposureRecord, ExposureStats, RgbImage } from '../types.js';
import { EvenfieldError } from '../errors.js';
import { decodeLut, luminancePlane } from '../photometry/index.js';
import { readExif } from './exif.js';
import { readInputFile, sha256OfBuffer } from './files.js';
import { describeDecodeFailure, describeStart, formatName, sniffFormat } from './sniff.js';
import { quantiles } from './stats.js';
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
  /** 'auto' (default): sRGB unless a 16-bit file is tagged linear; 'srgb' or 'linear' force it. */
  transfer?: 'auto' | 'srgb' | 'linear';
  /** Largest accepted width × height (default 100 megapixels), checked from the header first. */
  maxPixels?: number;
  /** Decode at 1/scale of full size (1, 2, 4 or 8; default 1). */
  scale?: 1 | 2 | 4 | 8;
  /** How to reduce when scale > 1 (default 'linear-box'). */
  method?: ScaleMethod;
  /** A pixel counts as clipped when any channel code ≥ clipLevel × white (default 0.98; common practice). */
  clipLevel?: number;
  /** A pixel counts as dark when its largest channel code < darkLevel × white (default 2/255; common practice). */
  darkLevel?: number;
}

export interface DecodedPhoto {
  /** linear light, relative to the encoding's white, sensor orientation */
  image: RgbImage;
  info: DecodeInfo;
  exposure: ExposureRecord;
  sha256: string;
  stats: ExposureStats;
  /** EXIF Orientation tag (1..8) as stored in the file; the pixels are NOT rotated by it */
  orientation: number | null;
  /** the reduction actually used ('full' at scale 1; 'linear-box' when 'jpeg-shrink' does not apply) */
  method: 'full' | ScaleMethod;
  /** embedded colour profile, if any */
  iccProfile: IccSummary | null;
  warnings: string[];
}

export const DEFAULT_MAX_PIXELS = 100_000_000;
const ACCEPTED_FORMATS = new Set(['jpeg', 'png', 'tiff', 'webp', 'gif', 'heif', 'jxl']);

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
  const sniffed = sniffFormat(buf);
  if (sniffed === null) throw new EvenfieldError('unreadable', `not an image file (starts with ${describeStart(buf)})`, name);
  if (sniffed.startsWith('other:')) {
    throw new EvenfieldError('unreadable', `not a supported image file (${sniffed.slice(6)})`, name);
  }
  let meta: Metadata;
  try {
    meta = await sharp(buf, { limitInputPixels: false }).metadata();
  } catch (e) {
    const msg = (e as Error).message;
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

function chooseTransfer(buf: Buffer, plan: Plan, requested: 'auto' | 'srgb' | 'linear', warnings: string[]): 'srgb' | 'linear' {
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
  if (!taggedLinear) return 'srgb';
  if (plan.bitDepth === 16) return 'linear';
  warnings.push(`8-bit file tagged linear (${why}); decoded as sRGB — declare the transfer to override`);
  return 'srgb';
}

function profileWarnings(plan: Plan, transfer: 'srgb' | 'linear', warnings: string[]): void {
  const icc = plan.icc;
  if (plan.isCmyk) {
    warnings.push(`CMYK file converted to sRGB through ${icc ? 'its embedded profile' : "the decoder's generic CMYK profile"}; colour is approximate`);
    return;
  }
  if (!icc) return;
  const name = icc.description ? `"${icc.description}"` : '(unnamed)';
  if (icc.srgbPrimaries === false) {
    warnings.push(`embedded colour profile ${name} has primaries other than sRGB's; code values are read as sRGB, so colour figures are approximate`);
  }
  if (icc.curve === 'other' && transfer === 'srgb') {
    warnings.push(`embedded colour profile ${name} has a tone curve other than sRGB's; code values are decoded with the sRGB curve`);
  }
}

/** Code value thresholds for clipped and dark pixels at a bit depth. */
function thresholds(bitDepth: 8 | 16, clipLevel: number, darkLevel: number): { clipCode: number; darkCode: number } {
  const white = bitDepth === 8 ? 255 : 65535;
  return { clipCode: Math.ceil(clipLevel * white - 1e-9), darkCode: Math.ceil(darkLevel * white - 1e-9) };
}

interface Reduced {
  data: Float32Array;
  width: number;
  height: number;
  clipped: number;
  dark: number;
  pixels: number;
}

/**
 * Code values (interleaved RGB) -> linear light through `lut`, averaged over s×s blocks in linear light,
 * counting clipped and dark pixels of the input in the same pass.
 */
export function reduceLinearBox(
  src: Uint8Array | Uint16Array,
  W: number,
  H: number,
  s: number,
  lut: Float32Array,
  clipCode: number,
  darkCode: number,
): Reduced {
  if (src.length !== W * H * 3) throw new Error(`reduceLinearBox: ${src.length} codes for ${W}×${H}×3`);
  let clipped = 0;
  let dark = 0;
  if (s === 1) {
    const out = new Float32Array(W * H * 3);
    for (let i = 0; i < src.length; i += 3) {
      const c0 = src[i]!;
      const c1 = src[i + 1]!;
      const c2 = src[i + 2]!;
      const mx = c0 > c1 ? (c0 > c2 ? c0 : c2) : c1 > c2 ? c1 : c2;
      if (mx >= clipCode) clipped++;
      if (mx < darkCode) dark++;
      out[i] = lut[c0]!;
      out[i + 1] = lut[c1]!;
      out[i + 2] = lut[c2]!;
    }
    return { data: out, width: W, height: H, clipped, dark, pixels: W * H };
  }
  const w = Math.ceil(W / s);
  const h = Math.ceil(H / s);
  const out = new Float32Array(w * h * 3);
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
      out[base + o] = acc[o]! * inv;
      out[base + o + 1] = acc[o + 1]! * inv;
      out[base + o + 2] = acc[o + 2]! * inv;
    }
  }
  return { data: out, width: w, height: h, clipped, dark, pixels: W * H };
}

function sharpInput(buf: Buffer, plan: Plan, maxPixels: number): Sharp {
  return sharp(buf, {
    failOn: 'truncated',
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
  const scale = opts.scale ?? 1;
  if (![1, 2, 4, 8].includes(scale)) throw new EvenfieldError('usage', `decode scale must be 1, 2, 4 or 8, got ${scale}`, name);
  const maxPixels = opts.maxPixels ?? DEFAULT_MAX_PIXELS;
  if (!(maxPixels > 0)) throw new EvenfieldError('usage', `maxPixels must be positive, got ${maxPixels}`, name);
  const clipLevel = opts.clipLevel ?? 0.98;
  const darkLevel = opts.darkLevel ?? 2 / 255;
  if (buf.length === 0) throw new EvenfieldError('unreadable', 'empty file (0 bytes)', name);

  const plan = await readHeader(buf, name, maxPixels);
  const sha256 = sha256OfBuffer(buf);
  const warnings: string[] = [];
  const transfer = chooseTransfer(buf, plan, opts.transfer ?? 'auto', warnings);
  profileWarnings(plan, transfer, warnings);

  const useShrink = scale > 1 && opts.method === 'jpeg-shrink' && plan.format === 'jpeg';
  const method: DecodedPhoto['method'] = scale === 1 ? 'full' : useShrink ? 'jpeg-shrink' : 'linear-box';

  let reduced: Reduced;
  if (useShrink) {
    // JPEG is always 8-bit.
    const w = Math.ceil(plan.width / scale);
    const h = Math.ceil(plan.height / scale);
    const p = sharpInput(buf, plan, maxPixels)
      .removeAlpha()
      .toColourspace('srgb')
      // Kernel of sharp's final 2× step: lanczos3. libvips' 8-bit 'linear' (and 'mitchell', 'mks2021')
      // reduce rounds ties one way, a measured +0.125 (−0.125) code bias on noisy fields; lanczos3
      // measured within ±0.002 codes.
      .resize(w, h, { fit: 'fill', kernel: 'lanczos3', fastShrinkOnLoad: true })
      .raw();
    const { data, info } = await runSharp(p, plan, name);
    const codes = new Uint8Array(data.buffer, data.byteOffset, data.length);
    const th = thresholds(8, clipLevel, darkLevel);
    reduced = reduceLinearBox(codes, info.width, info.height, 1, decodeLut(8, transfer), th.clipCode, th.darkCode);
  } else {
    const is16 = plan.bitDepth === 16;
    const p = sharpInput(buf, plan, maxPixels)
      .removeAlpha()
      .toColourspace(is16 ? 'rgb16' : 'srgb')
      .raw(is16 ? { depth: 'ushort' } : {});
    const { data, info } = await runSharp(p, plan, name);
    if (info.channels !== 3 || info.width !== plan.width || info.height !== plan.height) {
      throw new EvenfieldError('internal', `decoder returned ${info.width}×${info.height}×${info.channels}, expected ${plan.width}×${plan.height}×3`, name);
    }
    const codes = is16
      ? new Uint16Array(data.buffer, data.byteOffset, data.length / 2)
      : new Uint8Array(data.buffer, data.byteOffset, data.length);
    const th = thresholds(plan.bitDepth, clipLevel, darkLevel);
    reduced = reduceLinearBox(codes, info.width, info.height, scale, decodeLut(plan.bitDepth, transfer), th.clipCode, th.darkCode);
  }

  const image: RgbImage = { width: reduced.width, height: reduced.height, data: reduced.data };
  const [median, p999] = quantiles(luminancePlane(image).data, [0.5, 0.999]) as [number, number];
  const stats: ExposureStats = {
    clippedFraction: reduced.clipped / reduced.pixels,
    darkFraction: reduced.dark / reduced.pixels,
    median,
    p999,
  };

  const exif = await readExif(buf, plan.exifBlock);
  const info: DecodeInfo = {
    format: plan.format,
    width: plan.width,
    height: plan.height,
    bitDepth: plan.bitDepth,
    channels: plan.channels,
    transfer,
    scale,
  };
  return {
    image,
    info,
    exposure: exif.exposure,
    sha256,
    stats,
    orientation: exif.orientation ?? plan.orientationFromHeader,
    method,
    iccProfile: plan.icc,
    warnings,
  };
}
