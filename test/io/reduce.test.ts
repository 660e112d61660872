// The decoder's fast paths against its plain ones: the 2×2 reduction of 8-bit codes, the luminance made
// in the same pass, the sampled exposure quantiles and the scale chosen from the header.
import { describe, expect, it } from 'vitest';
import { quantile as ssQuantile } from 'simple-statistics';
import sharp from 'sharp';
import { decodePhotoBuffer, exposureQuantiles, reduceLinearBox, scaleForLongSide, setDecoderThreads, STATS_SAMPLE_LIMIT } from '../../lib/io/index.js';
import { SRGB_LUT_8, luminancePlane } from '../../lib/photometry/index.js';
import { lcg, rawImage, testPicture8 } from './helpers.js';

/** The 8-bit table spread into a 16-bit one, so that Uint16 input takes the general block path. */
const LUT_WIDE = (() => {
  const t = new Float32Array(65536);
  t.set(SRGB_LUT_8);
  return t;
})();

function codesWithExtremes(w: number, h: number, seed: number): Uint8Array {
  const pic = new Uint8Array(testPicture8(w, h, seed, 80));
  const rnd = lcg(seed + 1);
  // sprinkle clipped (>= 250) and dark (all < 2) pixels
  for (let k = 0; k < (w * h) / 10; k++) {
    const i = Math.floor(rnd() * w * h) * 3;
    if (rnd() < 0.5) pic[i + Math.floor(rnd() * 3)] = 250 + Math.floor(rnd() * 6);
    else pic.fill(Math.floor(rnd() * 2), i, i + 3);
  }
  return pic;
}

describe('2×2 reduction of 8-bit codes', () => {
  it('is bit-identical to the general block path, edges and counts included (odd and even sizes)', () => {
    for (const [w, h] of [
      [64, 48],
      [37, 23],
      [1, 1],
      [2, 5],
      [7, 2],
      [33, 34],
    ] as const) {
      const codes = codesWithExtremes(w, h, w * 31 + h);
      const fast = reduceLinearBox(codes, w, h, 2, SRGB_LUT_8, 250, 2);
      const plain = reduceLinearBox(Uint16Array.from(codes), w, h, 2, LUT_WIDE, 250, 2);
      expect([fast.width, fast.height]).toEqual([Math.ceil(w / 2), Math.ceil(h / 2)]);
      expect([fast.width, fast.height, fast.clipped, fast.dark, fast.pixels]).toEqual([plain.width, plain.height, plain.clipped, plain.dark, plain.pixels]);
      expect(fast.clipped + fast.dark).toBeGreaterThan(0);
      expect(Buffer.from(fast.data.buffer).equals(Buffer.from(plain.data.buffer))).toBe(true);
      expect(Buffer.from(fast.luminance.buffer).equals(Buffer.from(plain.luminance.buffer))).toBe(true);
    }
  });

  it('in place (even sizes) writes over the input and gives the same bits; odd sizes keep the input', () => {
    for (const [w, h] of [
      [64, 48],
      [38, 22],
      [37, 22],
      [38, 23],
    ] as const) {
      const codes = codesWithExtremes(w, h, w + 7 * h);
      const ref = reduceLinearBox(codes.slice(), w, h, 2, SRGB_LUT_8, 250, 2);
      const input = codes.slice();
      const r = reduceLinearBox(input, w, h, 2, SRGB_LUT_8, 250, 2, true);
      const even = w % 2 === 0 && h % 2 === 0;
      expect(r.data.buffer === input.buffer).toBe(even);
      if (!even) expect(Buffer.from(input).equals(Buffer.from(codes))).toBe(true);
      expect([r.clipped, r.dark]).toEqual([ref.clipped, ref.dark]);
      expect(Buffer.from(r.data.buffer, r.data.byteOffset, r.data.byteLength).equals(Buffer.from(ref.data.buffer))).toBe(true);
      expect(Buffer.from(r.luminance.buffer).equals(Buffer.from(ref.luminance.buffer))).toBe(true);
    }
  });

  it('makes the clip mask of its output in the same pass, as nearWhiteMask would (every path, odd and even sizes)', () => {
    const level = SRGB_LUT_8[240]!;
    for (const [w, h] of [
      [64, 48],
      [37, 23],
      [2, 5],
    ] as const) {
      const codes = codesWithExtremes(w, h, 3 * w + h);
      for (const [s, src, lut] of [
        [2, codes, SRGB_LUT_8],
        [2, Uint16Array.from(codes), LUT_WIDE],
        [1, codes, SRGB_LUT_8],
        [4, codes, SRGB_LUT_8],
      ] as const) {
        const r = reduceLinearBox(src, w, h, s, lut, 250, 2, false, level);
        const n = r.width * r.height;
        const expected = new Uint8Array(n);
        for (let i = 0; i < n; i++) if (r.data[3 * i]! >= level || r.data[3 * i + 1]! >= level || r.data[3 * i + 2]! >= level) expected[i] = 1;
        expect(r.clipMask).not.toBeNull();
        expect(Buffer.from(r.clipMask!).equals(Buffer.from(expected))).toBe(true);
        expect(reduceLinearBox(src, w, h, s, lut, 250, 2).clipMask).toBeNull();
      }
    }
  });

  it('counts every full-size pixel once, by its largest code (clip at ≥ 250, dark below 2)', () => {
    const w = 9;
    const h = 7;
    const codes = codesWithExtremes(w, h, 3);
    let clipped = 0;
    let dark = 0;
    for (let i = 0; i < w * h; i++) {
      const m = Math.max(codes[3 * i]!, codes[3 * i + 1]!, codes[3 * i + 2]!);
      if (m >= 250) clipped++;
      if (m < 2) dark++;
    }
    const r = reduceLinearBox(codes, w, h, 2, SRGB_LUT_8, 250, 2);
    expect([r.clipped, r.dark]).toEqual([clipped, dark]);
  });
});

describe('luminance made while decoding', () => {
  it('equals luminancePlane of the decoded image exactly, at every scale', async () => {
    const w = 45;
    const h = 31;
    const png = await rawImage(testPicture8(w, h, 5), w, h, 3).png().toBuffer();
    for (const scale of [1, 2, 4, 8] as const) {
      const d = await decodePhotoBuffer(png, 'l.png', { scale });
      const ref = luminancePlane(d.image);
      expect([d.luminance.width, d.luminance.height]).toEqual([ref.width, ref.height]);
      expect(Buffer.from(d.luminance.data.buffer).equals(Buffer.from(ref.data.buffer))).toBe(true);
    }
  });
});

describe('exposure quantiles', () => {
  it('are exact up to the sample limit (definition 7, as simple-statistics computes it)', () => {
    const rnd = lcg(9);
    const v = Float32Array.from({ length: 5001 }, () => rnd() ** 3);
    const q = exposureQuantiles(v, 5001, 1);
    expect(q.median).toBe(ssQuantile(Array.from(v), 0.5));
    expect(q.p999).toBeCloseTo(ssQuantile(Array.from(v), 0.999), 12);
  });

  it('above the limit come from a regular lattice of the pixels and stay close to the exact values', () => {
    const w = 2400;
    const h = 1800; // 4.3 M values: every 5th pixel of every 5th row
    expect(w * h).toBeGreaterThan(STATS_SAMPLE_LIMIT);
    const rnd = lcg(4);
    const v = new Float32Array(w * h);
    for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) v[y * w + x] = 0.3 + 0.2 * Math.sin(x / 300) * Math.cos(y / 250) + 0.02 * (rnd() - 0.5);
    const exact = (p: number) => {
      const s = Float64Array.from(v).sort();
      const hh = (s.length - 1) * p;
      const lo = Math.floor(hh);
      return s[lo]! + (hh - lo) * (s[lo + 1]! - s[lo]!);
    };
    const q = exposureQuantiles(v, w, h);
    // sampling error of a quantile from ~170 k lattice values of a smooth field: well under 0.1 %
    expect(Math.abs(q.median / exact(0.5) - 1)).toBeLessThan(1e-3);
    expect(Math.abs(q.p999 / exact(0.999) - 1)).toBeLessThan(1e-3);
  });
});

describe('scale from the header', () => {
  it('is the largest power of two (up to 8) keeping the long side at or above the target', () => {
    expect(scaleForLongSide(4000, 3000, 1800)).toBe(2);
    expect(scaleForLongSide(6000, 4000, 1800)).toBe(2);
    expect(scaleForLongSide(3000, 8000, 1800)).toBe(4);
    expect(scaleForLongSide(1600, 1200, 1800)).toBe(1);
    expect(scaleForLongSide(3600, 100, 1800)).toBe(2);
    expect(scaleForLongSide(100000, 10, 1800)).toBe(8);
  });

  it('targetLongSide decodes at that scale and says so', async () => {
    const w = 40;
    const h = 30;
    const png = await rawImage(testPicture8(w, h, 2), w, h, 3).png().toBuffer();
    const d = await decodePhotoBuffer(png, 't.png', { targetLongSide: 10 });
    expect(d.info.scale).toBe(4);
    expect([d.image.width, d.image.height]).toEqual([10, 8]);
    const e = await decodePhotoBuffer(png, 't.png', { scale: 4 });
    expect(Buffer.from(d.image.data.buffer).equals(Buffer.from(e.image.data.buffer))).toBe(true);
  });
});

describe('decoder threads', () => {
  it('setDecoderThreads sets sharp.concurrency and returns the previous value, which restores it', () => {
    const before = sharp.concurrency();
    expect(setDecoderThreads(1)).toBe(before);
    expect(sharp.concurrency()).toBe(1);
    expect(setDecoderThreads(before)).toBe(1);
    expect(sharp.concurrency()).toBe(before);
  });
});
