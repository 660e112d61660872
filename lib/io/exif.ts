// EXIF exposure record through exifr. FNumber and ExposureTime are preferred over the APEX
// ApertureValue / ShutterSpeedValue (real files can disagree slightly; Exif 2.2).

import exifr from 'exifr';
import type { ExposureRecord } from '../types.js';
import { exposureTimeFromTv, fNumberFromAv } from '../photometry/index.js';

export interface ExifResult {
  exposure: ExposureRecord;
  /** EXIF Orientation tag 1..8 as stored, or null */
  orientation: number | null;
  /** TIFF Compression tag (259) of the first image directory, or null (6 and 7 are JPEG) */
  compression: number | null;
}

export const EMPTY_EXPOSURE: ExposureRecord = Object.freeze({
  make: null,
  model: null,
  lens: null,
  exposureTimeS: null,
  fNumber: null,
  iso: null,
  focalLengthMm: null,
  focalLength35mm: null,
  dateTime: null,
});

const EXIFR_OPTIONS = {
  tiff: true,
  exif: true,
  gps: false,
  interop: false,
  ifd1: false,
  makerNote: false,
  userComment: false,
  xmp: false,
  icc: false,
  iptc: false,
  jfif: false,
  ihdr: false,
  translateKeys: true,
  translateValues: false,
  reviveValues: false,
  sanitize: true,
  mergeOutput: true,
} as const;

function str(v: unknown): string | null {
  if (typeof v !== 'string') return null;
  const s = v.replace(/\0+$/, '').trim();
  return s.length ? s : null;
}

function num(v: unknown): number | null {
  const x = Array.isArray(v) ? v[0] : v;
  return typeof x === 'number' && Number.isFinite(x) && x > 0 ? x : null;
}

/** EXIF 'YYYY:MM:DD HH:MM:SS' (+ optional offset '+02:00') -> 'YYYY-MM-DDTHH:MM:SS[+02:00]'. */
export function exifDateToIso(v: unknown, offset?: unknown): string | null {
  const s = str(v);
  if (!s) return null;
  const m = /^(\d{4}):(\d{2}):(\d{2})[ T](\d{2}):(\d{2}):(\d{2})/.exec(s);
  if (!m || m[1] === '0000') return null;
  const off = str(offset);
  const tz = off && /^[+-]\d{2}:\d{2}$/.test(off) ? off : '';
  return `${m[1]}-${m[2]}-${m[3]}T${m[4]}:${m[5]}:${m[6]}${tz}`;
}

/** Build an exposure record from exifr's merged output. */
export function exposureFromTags(t: Record<string, unknown> | null | undefined): ExposureRecord {
  if (!t) return { ...EMPTY_EXPOSURE };
  const av = typeof t.ApertureValue === 'number' ? t.ApertureValue : null;
  const tv = typeof t.ShutterSpeedValue === 'number' ? t.ShutterSpeedValue : null;
  return {
    make: str(t.Make),
    model: str(t.Model),
    lens: str(t.LensModel),
    exposureTimeS: num(t.ExposureTime) ?? (tv !== null && Number.isFinite(tv) ? exposureTimeFromTv(tv) : null),
    fNumber: num(t.FNumber) ?? (av !== null && Number.isFinite(av) ? fNumberFromAv(av) : null),
    iso: num(t.ISO) ?? num(t.RecommendedExposureIndex) ?? num(t.StandardOutputSensitivity),
    focalLengthMm: num(t.FocalLength),
    focalLength35mm: num(t.FocalLengthIn35mmFormat),
    dateTime:
      exifDateToIso(t.DateTimeOriginal, t.OffsetTimeOriginal) ?? exifDateToIso(t.CreateDate, t.OffsetTimeDigitized),
  };
}

async function parse(input: Uint8Array): Promise<Record<string, unknown> | null> {
  try {
    const out = (await exifr.parse(Buffer.from(input.buffer, input.byteOffset, input.byteLength), EXIFR_OPTIONS)) as
      | Record<string, unknown>
      | undefined;
    return out ?? null;
  } catch {
    return null;
  }
}

/**
 * Read the exposure record of a file. exifr parses JPEG, TIFF, PNG and HEIF directly; for other
 * containers (WebP ...) pass the raw EXIF block the decoder found (`exifBlock`, with or without the
 * "Exif\0\0" prefix). Never throws: a file without readable EXIF gives all-null fields.
 */
export async function readExif(file: Uint8Array, exifBlock?: Uint8Array | null): Promise<ExifResult> {
  let tags = await parse(file);
  const useful = (x: Record<string, unknown> | null) =>
    x !== null && Object.keys(x).some((k) => !/^(ImageWidth|ImageHeight|BitDepth|ColorType|Compression|Filter|Interlace)$/.test(k));
  if (!useful(tags) && exifBlock && exifBlock.length > 8) {
    let block = exifBlock;
    if (block[0] === 0x45 && block[1] === 0x78 && block[2] === 0x69 && block[3] === 0x66 && block[4] === 0 && block[5] === 0) {
      block = block.subarray(6);
    }
    tags = await parse(block);
  }
  const o = tags ? tags.Orientation : undefined;
  const orientation = typeof o === 'number' && Number.isInteger(o) && o >= 1 && o <= 8 ? o : null;
  const c = tags ? tags.Compression : undefined;
  const compression = typeof c === 'number' && Number.isInteger(c) ? c : null;
  return { exposure: exposureFromTags(tags), orientation, compression };
}
