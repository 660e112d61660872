// Photos in a lossy coding other than JPEG's (lossy WebP, AVIF, HEIF: phones save HEVC-coded HEIC by
// default) are refused in one line with what to do: their artefacts on a smooth field are measured as
// mura, unlike JPEG's not modelled (measured: scripts/lossy-codings.ts, README "Taking the photos").
// Lossless WebP is measured. The codings are told from their bytes: the WebP container's chunk names
// ('VP8 ' lossy, 'VP8L' lossless; Google's WebP Container Specification) and the HEIF ftyp box's brands
// (ISO/IEC 23008-12 'heic'/'heix'..., AV1 Image File Format 'avif'). The HEVC fixture is a real file
// made with libheif's encoder (fixtures/heic/README.md); the decoder message below is libvips 8.18's,
// as sharp 0.35 gives it for that file.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { decodePhoto, decodePhotoBuffer, describeDecodeFailure, lossyNonJpegCoding } from '../../lib/io/index.js';

const HEIC = join(__dirname, '..', '..', 'fixtures', 'heic', 'gray-hevc.heic');
const gray = () => sharp({ create: { width: 64, height: 48, channels: 3, background: { r: 120, g: 120, b: 120 } } });

async function refusal(p: Promise<unknown>): Promise<Error & { code?: string }> {
  const e = await p.then(
    () => null,
    (x: Error & { code?: string }) => x,
  );
  expect(e).not.toBeNull();
  return e!;
}

describe('lossy codings other than JPEG', () => {
  it('are told from their bytes; lossless WebP and the usual formats are not', async () => {
    expect(lossyNonJpegCoding(await gray().webp({ quality: 95 }).toBuffer())).toBe('lossy WebP');
    expect(lossyNonJpegCoding(await gray().webp({ lossless: true }).toBuffer())).toBeNull();
    expect(lossyNonJpegCoding(await gray().avif({ quality: 95 }).toBuffer())).toBe('AVIF');
    expect(lossyNonJpegCoding(readFileSync(HEIC))).toBe('HEVC-coded HEIF');
    for (const b of [await gray().jpeg().toBuffer(), await gray().png().toBuffer(), await gray().tiff().toBuffer()]) expect(lossyNonJpegCoding(b)).toBeNull();
  });

  it('are refused in one line with what to do; a phone HEIC says how to get JPEGs', async () => {
    const heic = await refusal(decodePhoto(HEIC));
    expect(heic.code).toBe('lossy-format');
    expect(heic.message).toMatch(/HEVC-coded HEIF photo: .*measured as mura.*Most Compatible.*a conversion keeps the artefacts/);
    expect(heic.message).not.toMatch(/damaged|truncated/);
    expect(heic.message.split('\n')).toHaveLength(1);
    const webp = await refusal(decodePhotoBuffer(await gray().webp({ quality: 90 }).toBuffer(), 'w.webp'));
    expect(webp.code).toBe('lossy-format');
    expect(webp.message).toMatch(/^w\.webp: lossy WebP photo: .*JPEGs at the camera's best quality, or PNG or TIFF/);
    const avif = await refusal(decodePhotoBuffer(await gray().avif({ quality: 90 }).toBuffer(), 'a.avif'));
    expect(avif.code).toBe('lossy-format');
    // lossless WebP is decoded
    const d = await decodePhotoBuffer(await gray().webp({ lossless: true }).toBuffer(), 'l.webp');
    expect(d.image.width).toBe(64);
  });

  it('a coding the decoder lacks reads as such, past the failed seeks libvips lists first', () => {
    const msg =
      'x.heic: bad seek to 1024\nx.heic: bad seek to 512\n' +
      'heif: Error while loading plugin: Support for this compression format has not been built in: HEVC (a suitable decoder plugin is libde265) (11.6003)';
    expect(describeDecodeFailure('heif', msg)).toMatch(/^HEIF photo coded with HEVC, which this build's image decoder cannot read: take JPEGs/);
    // a damaged file stays damaged
    expect(describeDecodeFailure('heif', 'x.heic: bad seek to 1024')).toMatch(/damaged/);
  });
});

