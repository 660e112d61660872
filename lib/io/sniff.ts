// Recognising a file from its first bytes, and one-line descriptions of decode failures.

/** Formats recognised from their signature. 'other:*' are recognised but not accepted as photos. */
export type SniffedFormat = 'jpeg' | 'png' | 'tiff' | 'webp' | 'gif' | 'heif' | 'jxl' | `other:${string}`;

function ascii(buf: Uint8Array, start: number, end: number): string {
  let s = '';
  for (let i = start; i < Math.min(end, buf.length); i++) s += String.fromCharCode(buf[i]!);
  return s;
}

/** Format from the file signature, or null when the bytes match no known image format. */
export function sniffFormat(buf: Uint8Array): SniffedFormat | null {
  const b = buf;
  if (b.length >= 3 && b[0] === 0xff && b[1] === 0xd8 && b[2] === 0xff) return 'jpeg';
  if (b.length >= 8 && ascii(b, 0, 8) === '\x89PNG\r\n\x1a\n') return 'png';
  if (b.length >= 4) {
    const h = ascii(b, 0, 4);
    if (h === 'II*\0' || h === 'MM\0*' || h === 'II+\0' || h === 'MM\0+') return 'tiff';
    if (h === 'RIFF' && ascii(b, 8, 12) === 'WEBP') return 'webp';
    if (h === 'GIF8') return 'gif';
    if (h === '%PDF') return 'other:PDF document';
    if (h === '8BPS') return 'other:Photoshop document';
  }
  if (b.length >= 12 && ascii(b, 4, 8) === 'ftyp') {
    const brand = ascii(b, 8, 12);
    if (/^(heic|heix|hevc|hevx|heim|heis|mif1|msf1|avif|avis)$/.test(brand)) return 'heif';
    return `other:ISO media file (${brand.trim()})`;
  }
  if (b.length >= 2 && b[0] === 0xff && b[1] === 0x0a) return 'jxl';
  if (b.length >= 12 && ascii(b, 4, 8) === 'JXL ') return 'jxl';
  if (b.length >= 2 && ascii(b, 0, 2) === 'BM') return 'other:BMP image';
  if (b.length >= 4 && ascii(b, 0, 4) === 'PK\x03\x04') return 'other:ZIP archive';
  if (b.length >= 5 && /^\s*<(\?xml|svg)/i.test(ascii(b, 0, 64))) return 'other:SVG/XML document';
  return null;
}

/** File name extensions of camera raw formats (any case). */
export const CAMERA_RAW_EXTENSIONS = new Set([
  '.dng', '.cr2', '.cr3', '.crw', '.nef', '.nrw', '.arw', '.srf', '.sr2', '.orf', '.rw2', '.raf', '.pef', '.srw',
  '.x3f', '.3fr', '.iiq', '.erf', '.kdc', '.mrw', '.rwl', '.raw',
]);

// TIFF tags that mark raw sensor data (TIFF 6.0; TIFF/EP; DNG 1.4)
const TAG_NEW_SUBFILE_TYPE = 254;
const TAG_PHOTOMETRIC = 262;
const TAG_SUB_IFDS = 330;
const TAG_DNG_VERSION = 50706;
const PHOTOMETRIC_CFA = 32803;
const PHOTOMETRIC_LINEAR_RAW = 34892;

/** Tag numbers and short values of a classic TIFF's first directory, or null when it cannot be read. */
function firstDirectory(b: Uint8Array): Map<number, number> | null {
  if (b.length < 8) return null;
  const le = b[0] === 0x49;
  const view = new DataView(b.buffer, b.byteOffset, b.byteLength);
  if (view.getUint16(2, le) !== 42) return null;
  const at = view.getUint32(4, le);
  if (at + 2 > b.length) return null;
  const n = view.getUint16(at, le);
  const tags = new Map<number, number>();
  for (let i = 0; i < n && at + 2 + i * 12 + 12 <= b.length; i++) {
    const p = at + 2 + i * 12;
    const type = view.getUint16(p + 2, le);
    // the first value when it is stored in the entry itself (SHORT or LONG), else 0
    const value = type === 3 ? view.getUint16(p + 8, le) : type === 4 ? view.getUint32(p + 8, le) : 0;
    tags.set(view.getUint16(p, le), value);
  }
  return tags;
}

/**
 * The kind of camera raw file, from its signature, its first TIFF directory or its name; null for
 * anything else. A raw file's first image is a small preview the camera rendered (or, for some, the raw
 * sensor mosaic itself), never linear light an image decoder can give.
 */
export function cameraRawKind(buf: Uint8Array, name = ''): string | null {
  const b = buf;
  const head = ascii(b, 0, 16);
  if (head.startsWith('FUJIFILMCCD-RAW')) return 'Fujifilm RAF';
  if (head.startsWith('FOVb')) return 'Sigma X3F';
  if (/^(IIRO|IIRS|MMOR)/.test(head)) return 'Olympus ORF';
  if (head.startsWith('IIU\0')) return 'Panasonic RW2';
  if (ascii(b, 4, 8) === 'ftyp' && ascii(b, 8, 12) === 'crx ') return 'Canon CR3';
  if (/^(II\*\0|MM\0\*)/.test(head)) {
    if (ascii(b, 8, 10) === 'CR') return 'Canon CR2';
    const tags = firstDirectory(b);
    if (tags?.has(TAG_DNG_VERSION)) return 'DNG';
    const photometric = tags?.get(TAG_PHOTOMETRIC);
    if (photometric === PHOTOMETRIC_CFA || photometric === PHOTOMETRIC_LINEAR_RAW) return 'raw sensor data in TIFF';
    // a reduced-resolution first image with sub-images: the layout of NEF, ARW, PEF and their kin
    if (tags && ((tags.get(TAG_NEW_SUBFILE_TYPE) ?? 0) & 1) === 1 && tags.has(TAG_SUB_IFDS)) return 'TIFF-based raw';
  }
  // by name only when the bytes are no other image format (a JPEG named .raw is still a JPEG)
  const sniffed = sniffFormat(b);
  if (sniffed !== null && sniffed !== 'tiff') return null;
  const dot = name.lastIndexOf('.');
  const ext = dot >= 0 ? name.slice(dot).toLowerCase() : '';
  if (CAMERA_RAW_EXTENSIONS.has(ext)) return ext.slice(1).toUpperCase();
  return null;
}

/** What to do with a camera raw file, for the one-line refusal. */
export const CAMERA_RAW_ADVICE =
  'evenfield does not develop raw files (an image decoder reads only the small preview the camera rendered): convert them to 16-bit TIFF with linear values (for example "dcraw -4 -T", or a raw converter\'s linear export) and inspect those with --linear';

/** A short printable view of the first bytes: quoted text when they are text, else hex. */
export function describeStart(buf: Uint8Array, n = 12): string {
  const head = buf.subarray(0, n);
  let printable = true;
  for (const c of head) if (c < 0x20 || c > 0x7e) if (c !== 0x09 && c !== 0x0a && c !== 0x0d) printable = false;
  if (printable) {
    const text = ascii(head, 0, head.length).replace(/[\r\n\t]+/g, ' ');
    return `"${text}${buf.length > n ? '…' : ''}"`;
  }
  return Array.from(head.subarray(0, 8), (c) => c.toString(16).padStart(2, '0')).join(' ');
}

/** Display name of a format for messages. */
export function formatName(f: string): string {
  const names: Record<string, string> = {
    jpeg: 'JPEG',
    png: 'PNG',
    tiff: 'TIFF',
    webp: 'WebP',
    gif: 'GIF',
    heif: 'HEIF',
    jxl: 'JPEG XL',
  };
  return names[f] ?? f.toUpperCase();
}

/** How to get photos a HEIF decoder without HEVC can read (phones save HEVC-coded HEIC by default). */
export const HEVC_ADVICE = "take JPEGs at the camera's best quality instead (on an iPhone: Settings > Camera > Formats > Most Compatible)";

/**
 * A lossy coding other than JPEG's, from the file's bytes: 'lossy WebP', 'HEVC-coded HEIF', 'AVIF' or
 * 'HEIF'; null for anything else (JPEG, PNG, TIFF, lossless WebP ...). Their artefacts on a smooth field
 * are measured as mura (README, "Taking the photos"), and unlike JPEG's they are not modelled.
 */
export function lossyNonJpegCoding(buf: Uint8Array): string | null {
  const f = sniffFormat(buf);
  if (f === 'webp') {
    // RIFF chunks after the 12-byte header: 'VP8 ' is the lossy coding, 'VP8L' the lossless one;
    // 'VP8X' (extended) carries either further on
    for (let o = 12; o + 8 <= buf.length; ) {
      const id = ascii(buf, o, o + 4);
      if (id === 'VP8 ') return 'lossy WebP';
      if (id === 'VP8L') return null;
      const size = (buf[o + 4]! | (buf[o + 5]! << 8) | (buf[o + 6]! << 16) | (buf[o + 7]! << 24)) >>> 0;
      o += 8 + size + (size & 1);
    }
    return null;
  }
  if (f === 'heif') {
    // the ftyp box: size, 'ftyp', major brand, minor version, compatible brands
    const size = ((buf[0]! << 24) | (buf[1]! << 16) | (buf[2]! << 8) | buf[3]!) >>> 0;
    const brands = [ascii(buf, 8, 12)];
    for (let o = 16; o + 4 <= Math.min(size, buf.length, 256); o += 4) brands.push(ascii(buf, o, o + 4));
    if (brands.some((b) => /^(heic|heix|hevc|hevx|heim|heis)$/.test(b))) return 'HEVC-coded HEIF';
    if (brands.some((b) => /^(avif|avis)$/.test(b))) return 'AVIF';
    return 'HEIF';
  }
  return null;
}

/** What to do with a photo in a lossy coding other than JPEG's, for the one-line refusal. */
export function lossyCodingAdvice(coding: string): string {
  const how = coding.includes('HEIF') ? HEVC_ADVICE : "take JPEGs at the camera's best quality, or PNG or TIFF";
  return `${coding} photo: its lossy coding leaves artefacts on a smooth field that are measured as mura (unlike JPEG's, they are not modelled), so it is not measured; ${how} (a conversion keeps the artefacts)`;
}

/** The codec a decoder failure says it lacks ("... has not been built in: HEVC ..."), or null. */
export function missingCodec(message: string): string | null {
  const line = message.split('\n').find((l) => /not been built in|no decoder|unsupported codec|decoder plugin/i.test(l));
  if (!line) return null;
  const m = /built in:\s*([A-Za-z0-9.+-]+)/.exec(line) ?? /codec:?\s*([A-Za-z0-9.+-]+)/i.exec(line);
  return m ? m[1] : 'unknown';
}

/** One-line cause of a decoder failure, in plain words. */
export function describeDecodeFailure(format: string, message: string): string {
  const name = formatName(format);
  // a file this build cannot decode is not a damaged one (libvips lists its failed seeks first)
  const codec = missingCodec(message);
  if (codec !== null) {
    const what = codec === 'unknown' ? `a ${name} coding` : codec;
    return `${name} photo coded with ${what}, which this build's image decoder cannot read: ${codec === 'HEVC' ? HEVC_ADVICE : 'save or convert the photos as JPEG, PNG or TIFF'}`;
  }
  const first = (message.split('\n')[0] ?? '').replace(/^Input (buffer|file) (has corrupt header|contains)\s*:?\s*/i, '').trim();
  if (/^Warning treated as error/i.test(first)) {
    return `truncated or damaged ${name} data (the decoder warned while reading it)`;
  }
  if (/premature end|truncat|unexpected end|short read|end of (file|stream|data)|out of data|not enough data/i.test(message)) {
    return `truncated ${name} data`;
  }
  // With failOn set, libvips sometimes reports only its own "Warning treated as error" line and not the
  // decoder's warning text (seen on one machine for a JPEG with overwritten entropy-coded data): that
  // too means the data is damaged.
  if (/libpng read error|read error|unable to parse|corrupt|invalid|bad|unsupported image format|treated as error/i.test(message)) {
    return `truncated or damaged ${name} data (${first})`;
  }
  return `cannot decode ${name} file (${first})`;
}
