import { describe, expect, it } from 'vitest';
import sharp from 'sharp';
import { describeDecodeFailure, describeStart, readIccSummary, readPngColourChunks, sniffFormat, srgbColorantsD50 } from '../../lib/io/index.js';
import { gamaChunk, iccpChunk, insertPngChunk, makeIccProfile } from './helpers.js';

async function profileOf(name: 'srgb' | 'p3'): Promise<Buffer> {
  const jpg = await sharp({ create: { width: 4, height: 4, channels: 3, background: '#808080' } })
    .withIccProfile(name, { attach: true })
    .jpeg()
    .toBuffer();
  const icc = (await sharp(jpg).metadata()).icc;
  if (!icc) throw new Error('no profile attached');
  return icc;
}

describe('ICC profile summary', () => {
  it('sRGB colorants adapted to D50 match the ICC sRGB profile (rXYZ/gXYZ/bXYZ, from memory) in xy', () => {
    // D50-adapted sRGB colorants as printed in the common sRGB ICC profiles (from memory):
    // r (0.4361, 0.2225, 0.0139), g (0.3851, 0.7169, 0.0971), b (0.1431, 0.0606, 0.7141)
    const printed = [
      [0.4361, 0.2225, 0.0139],
      [0.3851, 0.7169, 0.0971],
      [0.1431, 0.0606, 0.7141],
    ].map(([X, Y, Z]) => [X! / (X! + Y! + Z!), Y! / (X! + Y! + Z!)]);
    const ours = srgbColorantsD50();
    for (let k = 0; k < 3; k++) {
      // 4-decimal printed XYZ: xy agree to ~1e-4
      expect(Math.abs(ours[k]![0] - printed[k]![0]!)).toBeLessThan(3e-4);
      expect(Math.abs(ours[k]![1] - printed[k]![1]!)).toBeLessThan(3e-4);
    }
  });

  it("recognises the decoder's built-in sRGB profile as sRGB primaries and sRGB curve", async () => {
    const s = readIccSummary(await profileOf('srgb'));
    expect(s).toMatchObject({ colourSpace: 'RGB', curve: 'srgb', srgbPrimaries: true });
  });

  it('recognises Display P3 as other primaries with the sRGB curve (P3-D65 uses the sRGB transfer)', async () => {
    const s = readIccSummary(await profileOf('p3'));
    expect(s).toMatchObject({ colourSpace: 'RGB', curve: 'srgb', srgbPrimaries: false });
  });

  it('classifies para curves: gamma 1 linear, gamma 2.2 other; reads v2 desc text', () => {
    const srgbD50 = srgbColorantsD50().map(([x, y]) => [x / y, 1, (1 - x - y) / y] as [number, number, number]);
    const lin = readIccSummary(makeIccProfile({ description: 'Lin', gamma: 1, colorants: srgbD50 }));
    expect(lin).toMatchObject({ description: 'Lin', curve: 'linear', srgbPrimaries: true });
    const g22 = readIccSummary(makeIccProfile({ description: 'G22', gamma: 2.2, colorants: srgbD50 }));
    expect(g22?.curve).toBe('other');
    expect(readIccSummary(Buffer.alloc(200))).toBeNull();
  });
});

describe('PNG colour chunks', () => {
  it('reads gAMA, sRGB and iCCP presence', async () => {
    const png = await sharp({ create: { width: 2, height: 2, channels: 3, background: '#000' } }).png().toBuffer();
    expect(readPngColourChunks(png)).toEqual({ gamma: null, srgb: false, iccp: false });
    // gAMA 45455 = 1/2.2 (PNG spec §11.3.3.2 example value)
    expect(readPngColourChunks(insertPngChunk(png, 'gAMA', gamaChunk(0.45455))).gamma).toBeCloseTo(0.45455, 5);
    expect(readPngColourChunks(insertPngChunk(png, 'sRGB', Buffer.from([0]))).srgb).toBe(true);
    const icc = makeIccProfile({ description: 'x', gamma: 1, colorants: [[1, 0, 0], [0, 1, 0], [0, 0, 1]] });
    expect(readPngColourChunks(insertPngChunk(png, 'iCCP', iccpChunk('x', icc))).iccp).toBe(true);
  });
});

describe('sniffing and messages', () => {
  it('recognises signatures', () => {
    expect(sniffFormat(Buffer.from([0xff, 0xd8, 0xff, 0xe1]))).toBe('jpeg');
    expect(sniffFormat(Buffer.from('\x89PNG\r\n\x1a\n....', 'latin1'))).toBe('png');
    expect(sniffFormat(Buffer.from('II*\0', 'latin1'))).toBe('tiff');
    expect(sniffFormat(Buffer.from('MM\0*', 'latin1'))).toBe('tiff');
    expect(sniffFormat(Buffer.from('RIFF\0\0\0\0WEBPVP8 ', 'latin1'))).toBe('webp');
    expect(sniffFormat(Buffer.from('\0\0\0\x18ftypheic', 'latin1'))).toBe('heif');
    expect(sniffFormat(Buffer.from('BM....', 'latin1'))).toBe('other:BMP image');
    expect(sniffFormat(Buffer.from('<svg xmlns="...">', 'latin1'))).toBe('other:SVG/XML document');
    expect(sniffFormat(Buffer.from('hello'))).toBeNull();
  });

  it('describes the start of a file as text or hex', () => {
    expect(describeStart(Buffer.from('date,serial\n1,2'))).toBe('"date,serial …"');
    expect(describeStart(Buffer.from([0, 1, 2, 0xff]))).toBe('00 01 02 ff');
  });

  it('turns decoder messages into one plain line', () => {
    expect(describeDecodeFailure('jpeg', 'VipsJpeg: premature end of JPEG image')).toBe('truncated JPEG data');
    expect(describeDecodeFailure('png', 'vipspng: libpng read error')).toMatch(/^truncated or damaged PNG data/);
    expect(describeDecodeFailure('tiff', 'something odd\nsecond line')).toBe('cannot decode TIFF file (something odd)');
    // libvips with failOn may give only its own line, without the decoder's warning text.
    expect(describeDecodeFailure('jpeg', 'Warning treated as error due to failOn setting')).toBe(
      'truncated or damaged JPEG data (the decoder warned while reading it)',
    );
  });
});
