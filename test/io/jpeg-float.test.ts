// The floating-point baseline JPEG decoder (lib/io/jpeg-float.ts).
//
// References:
// - libjpeg-turbo 2.1.5's djpeg with its floating-point inverse DCT and plain (replicating) chroma
//   upsampling, `djpeg -dct float -nosmooth`, an independent implementation of ITU-T T.81: its output,
//   rounded to whole codes, is stored beside each small fixture in fixtures/jpeg (see its README). djpeg
//   converts YCbCr to RGB with rounded fixed-point tables, so a sample may differ from ours by one code.
// - libvips (through sharp) for the files this decoder leaves to it.

import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { decodePhotoBuffer } from '../../lib/io/index.js';
import { JpegDataError, decodeJpegFloat, type FloatDecodeOptions } from '../../lib/io/jpeg-float.js';
import { srgbDecode } from '../../lib/photometry/index.js';
import { gauss, lcg, rawImage } from './helpers.js';

const DIR = join(__dirname, '..', '..', 'fixtures', 'jpeg');
const LINEAR: FloatDecodeOptions = { scale: 1, transfer: 'linear', clipCode: 250, darkCode: 2, clipLinear: null, weights: [0.2126, 0.7152, 0.0722] };

/** A binary PNM (P5 gray or P6 RGB, maxval 255) as RGB codes. */
function readPnm(file: string): { width: number; height: number; rgb: Uint8Array } {
  const b = readFileSync(file);
  const head = b.subarray(0, 64).toString('latin1');
  const m = /^(P[56])\s+(\d+)\s+(\d+)\s+255\s/.exec(head);
  if (!m) throw new Error(`${file}: not a binary PNM with maxval 255`);
  const [, kind, w, h] = m;
  const width = Number(w);
  const height = Number(h);
  const px = b.subarray(m[0].length);
  const rgb = new Uint8Array(width * height * 3);
  for (let i = 0; i < width * height; i++) {
    for (let c = 0; c < 3; c++) rgb[3 * i + c] = kind === 'P6' ? px[3 * i + c]! : px[i]!;
  }
  return { width, height, rgb };
}

describe('decoded samples against djpeg -dct float -nosmooth (libjpeg-turbo 2.1.5)', () => {
  // djpeg rounds each component's samples to whole codes BEFORE converting YCbCr to RGB, so for YCbCr
  // files an RGB sample may differ from the exact value by 0.5 (Y) + 1.772 × 0.5 (Cb, in B) + 0.5 (its
  // own rounding) = 1.9 codes: two codes after rounding. Without the colour transform: one code.
  const cases = [
    ['restart-420', '4:2:0, odd size, restart interval of 3 MCUs', 2],
    ['sampling-422', '4:2:2', 2],
    ['sampling-440', '4:4:0', 2],
    ['sampling-444', '4:4:4', 2],
    ['gray', 'one component, restart every MCU row', 1],
    ['rgb', 'RGB components, no colour transform', 1],
    ['progressive', 'progressive 4:2:0, spectral selection and successive approximation', 2],
    ['progressive-gray', 'progressive, one component', 1],
    ['progressive-444-restart', 'progressive 4:4:4, restart interval of 2 MCUs', 2],
  ] as const;
  for (const [name, what, tol] of cases) {
    it(`${name} (${what}): every sample within ${tol} code${tol > 1 ? 's' : ''}, nearly all equal`, () => {
      const ref = readPnm(join(DIR, `${name}.float.pnm`));
      const d = decodeJpegFloat(readFileSync(join(DIR, `${name}.jpg`)), LINEAR);
      expect(d).not.toBeNull();
      expect([d!.width, d!.height]).toEqual([ref.width, ref.height]);
      let max = 0;
      let equal = 0;
      let signed = 0;
      for (let i = 0; i < ref.rgb.length; i++) {
        const diff = Math.round(d!.data[i]! * 255) - ref.rgb[i]!;
        if (Math.abs(diff) > max) max = Math.abs(diff);
        if (diff === 0) equal++;
        signed += d!.data[i]! * 255 - ref.rgb[i]!;
      }
      expect(max).toBeLessThanOrEqual(tol);
      // no bias: the roundings average out
      expect(Math.abs(signed / ref.rgb.length)).toBeLessThan(0.05);
      // measured: all equal for gray and RGB files, about 60 % for YCbCr files (the double rounding)
      expect(equal / ref.rgb.length).toBeGreaterThan(tol === 1 ? 0.99 : 0.5);
    });
  }

  it('the one-component file gives R = G = B', () => {
    const d = decodeJpegFloat(readFileSync(join(DIR, 'gray.jpg')), LINEAR)!;
    for (let i = 0; i < d.data.length; i += 3) {
      expect(d.data[i + 1]).toBe(d.data[i]);
      expect(d.data[i + 2]).toBe(d.data[i]);
    }
  });

  it('at scale 2 each output pixel is the linear-light mean of its 2×2 block (edge blocks: the pixels they have)', () => {
    const buf = readFileSync(join(DIR, 'restart-420.jpg'));
    const full = decodeJpegFloat(buf, { ...LINEAR, transfer: 'srgb' })!;
    const half = decodeJpegFloat(buf, { ...LINEAR, transfer: 'srgb', scale: 2 })!;
    const W = full.width;
    const H = full.height;
    expect([half.width, half.height]).toEqual([Math.ceil(W / 2), Math.ceil(H / 2)]);
    for (let oy = 0; oy < half.height; oy++) {
      for (let ox = 0; ox < half.width; ox++) {
        for (let c = 0; c < 3; c++) {
          let sum = 0;
          let n = 0;
          for (let y = 2 * oy; y < Math.min(H, 2 * oy + 2); y++) {
            for (let x = 2 * ox; x < Math.min(W, 2 * ox + 2); x++, n++) sum += full.data[(y * W + x) * 3 + c]!;
          }
          expect(half.data[(oy * half.width + ox) * 3 + c]).toBeCloseTo(sum / n, 6);
        }
      }
    }
    expect(half.pixels).toBe(W * H);
  });
});

describe('what the real-valued samples are for', () => {
  it('on a smooth, lightly noisy field the region means follow the encoder input; whole-code decoding is off by a fraction of a code', async () => {
    // A flat field seen by a camera: a gentle gradient (two codes across) with 0.5 codes of noise, JPEG
    // quality 90, 4:2:0. The encoder zeroes most AC terms and whole-code decoding then rounds whole
    // blocks the same way. Reference: the linear-light mean of the codes the encoder was given, over
    // 32×32 regions.
    const W = 384;
    const H = 256;
    const rnd = gauss(lcg(5));
    const src = Buffer.alloc(W * H * 3);
    for (let y = 0; y < H; y++) {
      for (let x = 0; x < W; x++) {
        const c = Math.max(0, Math.min(255, Math.round(150 + (2 * x) / W + (1.4 * y) / H + 0.5 * rnd())));
        src.fill(c, (y * W + x) * 3, (y * W + x) * 3 + 3);
      }
    }
    const jpg = await rawImage(src, W, H, 3).jpeg({ quality: 90, chromaSubsampling: '4:2:0' }).toBuffer();
    const fl = await decodePhotoBuffer(jpg, 'flat.jpg');
    const whole = await decodePhotoBuffer(jpg, 'flat.jpg', { jpegSamples: '8bit' });
    expect(fl.info.jpegSamples).toBe('float');
    expect(whole.info.jpegSamples).toBe('8bit');
    const errs = { float: [] as number[], whole: [] as number[] };
    for (let by = 0; by < H; by += 32) {
      for (let bx = 0; bx < W; bx += 32) {
        let t = 0;
        let a = 0;
        let b = 0;
        for (let y = by; y < by + 32; y++) {
          for (let x = bx; x < bx + 32; x++) {
            t += srgbDecode(src[(y * W + x) * 3]! / 255);
            a += fl.luminance.data[y * W + x]!;
            b += whole.luminance.data[y * W + x]!;
          }
        }
        errs.float.push(a / t - 1);
        errs.whole.push(b / t - 1);
      }
    }
    const rms = (e: number[]) => Math.sqrt(e.reduce((s, v) => s + v * v, 0) / e.length);
    const max = (e: number[]) => Math.max(...e.map(Math.abs));
    // one code at level 150 is 1.6 % of linear light (sRGB slope): whole codes leave regions off by a
    // good part of it; the coefficients hold the level to a small fraction of a code
    expect(rms(errs.float)).toBeLessThan(0.5 * rms(errs.whole));
    expect(max(errs.float)).toBeLessThan(0.5 * max(errs.whole));
  });
});

describe('scope and damage', () => {
  it('arithmetic-coded files are left to libvips (whole codes), and say so; progressive ones are decoded in float', async () => {
    const buf = readFileSync(join(DIR, 'arithmetic.jpg'));
    expect(decodeJpegFloat(buf, LINEAR)).toBeNull();
    const a = await decodePhotoBuffer(buf, 'arithmetic.jpg');
    expect(a.info.jpegSamples).toBe('8bit');
    const d = await decodePhotoBuffer(readFileSync(join(DIR, 'progressive.jpg')), 'progressive.jpg');
    expect(d.info.jpegSamples).toBe('float');
  });

  it('the same picture coded baseline and progressive (same tables) decodes to the same values', async () => {
    const W = 256;
    const H = 192;
    const rnd = gauss(lcg(9));
    const src = Buffer.alloc(W * H * 3);
    for (let i = 0; i < src.length; i++) src[i] = Math.max(0, Math.min(255, Math.round(120 + (60 * (i % (W * 3))) / (W * 3) + 4 * rnd())));
    const base = await rawImage(src, W, H, 3).jpeg({ quality: 92 }).toBuffer();
    const prog = await rawImage(src, W, H, 3).jpeg({ quality: 92, progressive: true }).toBuffer();
    const a = decodeJpegFloat(base, LINEAR)!;
    const b = decodeJpegFloat(prog, LINEAR)!;
    // progressive coding splits the same quantised coefficients over several scans (T.81, G.1): exact
    expect(Array.from(b.data)).toEqual(Array.from(a.data));
  });

  it('a progressive file cut between scans or inside one is refused', () => {
    const buf = readFileSync(join(DIR, 'progressive.jpg'));
    // the start of the last scan: the last SOS marker
    let sos = -1;
    for (let i = 0; i < buf.length - 1; i++) if (buf[i] === 0xff && buf[i + 1] === 0xda) sos = i;
    expect(sos).toBeGreaterThan(0);
    expect(() => decodeJpegFloat(buf.subarray(0, sos), LINEAR)).toThrow(JpegDataError);
    expect(() => decodeJpegFloat(buf.subarray(0, Math.floor(buf.length * 0.6)), LINEAR)).toThrow(JpegDataError);
  });

  it('data cut short, a missing end-of-image marker and a missing restart marker are refused', () => {
    const buf = readFileSync(join(DIR, 'restart-420.jpg'));
    expect(() => decodeJpegFloat(buf.subarray(0, Math.floor(buf.length * 0.7)), LINEAR)).toThrow(JpegDataError);
    expect(() => decodeJpegFloat(buf.subarray(0, buf.length - 2), LINEAR)).toThrow(JpegDataError);
    // remove the first RSTn marker (two bytes)
    let k = -1;
    for (let i = 0; i < buf.length - 1; i++) {
      if (buf[i] === 0xff && buf[i + 1] === 0xd0) {
        k = i;
        break;
      }
    }
    expect(k).toBeGreaterThan(0);
    const noRst = Buffer.concat([buf.subarray(0, k), buf.subarray(k + 2)]);
    expect(() => decodeJpegFloat(noRst, LINEAR)).toThrow(JpegDataError);
  });

  it('a damaged file still gets libvips’ message through decodePhotoBuffer', async () => {
    const buf = readFileSync(join(DIR, 'restart-420.jpg'));
    await expect(decodePhotoBuffer(buf.subarray(0, Math.floor(buf.length * 0.7)), 'cut.jpg')).rejects.toThrow(/truncated JPEG data/);
  });

  it('agrees with libvips where both apply (4:4:4; libjpeg rounds components before the colour transform, as above)', async () => {
    const buf = readFileSync(join(DIR, 'sampling-444.jpg'));
    const d = decodeJpegFloat(buf, LINEAR)!;
    const v = await sharp(buf).raw().toBuffer();
    let max = 0;
    for (let i = 0; i < v.length; i++) max = Math.max(max, Math.abs(d.data[i]! * 255 - v[i]!));
    expect(max).toBeLessThan(2.5);
  });
});
