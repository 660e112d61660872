// Raster encoders for embedding in the PDF. Both are deterministic: the same pixels give the same bytes.

import sharp from 'sharp';
import type { RgbRaster } from './colourmaps.js';

function check(img: RgbRaster): void {
  if (!(img.width > 0 && img.height > 0) || img.rgb.length !== img.width * img.height * 3) {
    throw new Error(`raster of ${img.width}x${img.height} needs ${img.width * img.height * 3} bytes, has ${img.rgb.length}`);
  }
}

function distinctColoursAtMost(img: RgbRaster, limit: number): boolean {
  const seen = new Uint8Array(1 << 21); // one bit per 24-bit colour
  const { rgb } = img;
  let count = 0;
  for (let o = 0; o < rgb.length; o += 3) {
    const c = (rgb[o]! << 16) | (rgb[o + 1]! << 8) | rgb[o + 2]!;
    const bit = 1 << (c & 7);
    if ((seen[c >>> 3]! & bit) === 0) {
      seen[c >>> 3]! |= bit;
      if (++count > limit) return false;
    }
  }
  return true;
}

/**
 * Lossless PNG. A false-colour map usually has at most 256 colours, and is then written as an
 * indexed PNG, a good deal smaller. The palette goes through a quantiser, so the result is decoded
 * and compared: if any pixel changed, the map is written as a full-colour PNG instead.
 */
export async function encodePng(img: RgbRaster): Promise<Buffer> {
  check(img);
  const raw = Buffer.from(img.rgb.buffer, img.rgb.byteOffset, img.rgb.byteLength);
  const input = () => sharp(raw, { raw: { width: img.width, height: img.height, channels: 3 } });
  if (distinctColoursAtMost(img, 256)) {
    const indexed = await input().png({ palette: true, colours: 256, dither: 0, compressionLevel: 9, effort: 7 }).toBuffer();
    const back = await sharp(indexed).removeAlpha().toColourspace('srgb').raw().toBuffer();
    if (back.length === raw.length && back.equals(raw)) return indexed;
  }
  return input().png({ compressionLevel: 9 }).toBuffer();
}

/**
 * JPEG for photographs, resized (area average) so that its long side is at most maxLongSide pixels.
 * Photos are context, not measurement data: what was measured is in the maps and tables.
 */
export async function encodePhotoJpeg(img: RgbRaster, maxLongSide: number, quality = 82): Promise<{ jpeg: Buffer; width: number; height: number }> {
  check(img);
  const long = Math.max(img.width, img.height);
  const k = long > maxLongSide ? maxLongSide / long : 1;
  const width = Math.max(1, Math.round(img.width * k));
  const height = Math.max(1, Math.round(img.height * k));
  let pipeline = sharp(Buffer.from(img.rgb.buffer, img.rgb.byteOffset, img.rgb.byteLength), {
    raw: { width: img.width, height: img.height, channels: 3 },
  });
  if (k < 1) pipeline = pipeline.resize(width, height, { kernel: 'lanczos3', fit: 'fill' });
  const jpeg = await pipeline.jpeg({ quality, chromaSubsampling: '4:2:0', mozjpeg: false }).toBuffer();
  return { jpeg, width, height };
}
