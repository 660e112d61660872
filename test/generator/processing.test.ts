// The generator's camera processing (colour filter mosaic, noise reduction, sharpening) against
// independent computations.
import { Matrix, inverse } from 'ml-matrix';
import { describe, expect, it } from 'vitest';
import { DEFAULT_COLOUR_MATRIX, inverse3, mosaicColour, mosaicNoiseDemosaic, sharpenEncoded } from '../../fixtures/generator/processing.js';
import { Rng } from '../../fixtures/generator/rng.js';

const W = 64;
const H = 48;

function field(f: (x: number, y: number, c: number) => number): Float32Array {
  const d = new Float32Array(W * H * 3);
  for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) for (let c = 0; c < 3; c++) d[(y * W + x) * 3 + c] = f(x, y, c);
  return d;
}

describe('colour filter mosaic', () => {
  it('inverts the colour matrix as ml-matrix does', () => {
    const ours = inverse3(DEFAULT_COLOUR_MATRIX);
    const ref = inverse(new Matrix([DEFAULT_COLOUR_MATRIX.slice(0, 3), DEFAULT_COLOUR_MATRIX.slice(3, 6), DEFAULT_COLOUR_MATRIX.slice(6, 9)]));
    for (let i = 0; i < 9; i++) expect(ours[i]).toBeCloseTo(ref.get(Math.floor(i / 3), i % 3), 12);
  });

  it('lays out red, green and blue photosites as RGGB', () => {
    // the Bayer pattern in its RGGB phase: red at even row and column, blue at odd both (common practice)
    expect([mosaicColour(0, 0), mosaicColour(1, 0), mosaicColour(0, 1), mosaicColour(1, 1), mosaicColour(2, 2), mosaicColour(3, 3)]).toEqual([0, 1, 1, 2, 0, 2]);
  });

  it('gives back a noise-free field that is linear in x and y, exactly away from the border', () => {
    // bilinear interpolation reproduces any linear function (computed); the colour matrix and its
    // inverse cancel for values inside [0, 1]
    const f = (x: number, y: number, c: number) => 0.2 + 0.003 * x + 0.002 * y + 0.05 * c;
    const d = field(f);
    mosaicNoiseDemosaic(d, W, H, {}, null, 0, new Rng(1));
    for (let y = 1; y < H - 1; y++)
      for (let x = 1; x < W - 1; x++) for (let c = 0; c < 3; c++) expect(d[(y * W + x) * 3 + c]).toBeCloseTo(f(x, y, c), 5);
  });

  it("has shot noise of each photosite's own electrons: a red site's value varies by sqrt(wb / (v N))", () => {
    // Poisson statistics of the collected electrons (common practice): a red photosite collects
    // v / wb of full well N, so its white-balanced value v has relative sd sqrt(wb / (v N)); with an
    // identity colour matrix a red site's red is its own photosite
    const v = 0.25;
    const wb: [number, number, number] = [2, 1, 1.5];
    const N = 20000;
    const big = 400;
    const d = new Float32Array(big * big * 3).fill(v);
    mosaicNoiseDemosaic(d, big, big, { whiteBalance: wb, colourMatrix: [1, 0, 0, 0, 1, 0, 0, 0, 1] }, N, 0, new Rng(7));
    for (const [c, ox, oy] of [
      [0, 0, 0],
      [2, 1, 1],
    ] as const) {
      let s = 0;
      let s2 = 0;
      let n = 0;
      for (let y = oy; y < big; y += 2)
        for (let x = ox; x < big; x += 2) {
          const u = d[(y * big + x) * 3 + c];
          s += u;
          s2 += u * u;
          n++;
        }
      const mean = s / n;
      const sd = Math.sqrt(s2 / n - mean * mean);
      expect(mean).toBeCloseTo(v, 3);
      // n = 40000 sites: the sd's own sampling error is about 1 / sqrt(2 n) = 0.35 %
      expect(sd / mean / Math.sqrt(wb[c] / (v * N))).toBeCloseTo(1, 1);
    }
  });
});

describe('sharpening and noise reduction of the encoded image', () => {
  it('leave a flat field as it is and move an edge by the unsharp mask formula', () => {
    const flat = field(() => 0.3);
    sharpenEncoded(flat, W, H, 1, 1);
    for (const v of flat) expect(v).toBeCloseTo(0.3, 6);
    // a step in x: on its high side the encoded value overshoots by amount (v - blur v), the blur being
    // the sum of the normalised Gaussian weights (sigma 1 px, cut at 4 sigma) over the step (computed)
    const lo = 0.1;
    const hi = 0.5;
    const step = field((x) => (x < W / 2 ? lo : hi));
    sharpenEncoded(step, W, H, 1, 1);
    const enc = (l: number) => (l <= 0.0031308 ? 12.92 * l : 1.055 * Math.pow(l, 1 / 2.4) - 0.055);
    const dec = (v: number) => (v <= 0.04045 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4));
    const rad = 4;
    const wts = Array.from({ length: 2 * rad + 1 }, (_, i) => Math.exp(-0.5 * (i - rad) ** 2));
    const wsum = wts.reduce((a, b) => a + b, 0);
    const x = W / 2; // first pixel of the high side
    let blur = 0;
    for (let j = -rad; j <= rad; j++) blur += (wts[j + rad] / wsum) * enc(x + j < W / 2 ? lo : hi);
    const want = dec(enc(hi) + (enc(hi) - blur));
    expect(step[(10 * W + x) * 3]).toBeCloseTo(want, 5);
    expect(step[(10 * W + x) * 3]).toBeGreaterThan(hi);
  });
});
