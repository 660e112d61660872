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

/** One-line cause of a decoder failure, in plain words. */
export function describeDecodeFailure(format: string, message: string): string {
  const name = formatName(format);
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
