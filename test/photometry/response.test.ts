// The camera response: Debevec & Malik's least squares (SIGGRAPH 1997, "Recovering high dynamic range
// radiance maps from photographs") recovers a known tone curve from bracketed samples; tables, inverse
// and code steps of a measured response.
//
// References: the sRGB curve as colorjs.io converts "srgb" to "srgb-linear" (IEC 61966-2-1); a pure
// power law of exponent 2.2 (a common display gamma: common practice).
import Color from 'colorjs.io';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  bracketPoints,
  decodeLut,
  framePatches,
  responseId,
  solveResponse,
  srgbCodeStepPct,
  transferCodeStepPct,
  transferDecode,
  transferEncode,
  type ResponseCurve,
} from '../../lib/photometry/index.js';
import { BRACKET_LIMITS, exactShutterTimes, parseExposureTime } from '../../lib/cli/response-commands.js';
import { decodePhotoBuffer } from '../../lib/io/decode.js';
import sharp from 'sharp';

/** colorjs.io's sRGB decode of one channel value v (0..1) */
function colorjsLinear(v: number): number {
  return new Color('srgb', [v, v, v]).to('srgb-linear').coords[0]!;
}

/** Park-Miller generator, so that the samples are the same on every run */
function rng(seed: number) {
  let s = seed;
  const next = () => (s = (s * 16807) % 2147483647) / 2147483647;
  return { next, gauss: () => Math.sqrt(-2 * Math.log(next() + 1e-12)) * Math.cos(2 * Math.PI * next()) };
}

/** 600 points of random radiance seen at seven exposures one stop apart through `encode`, with noise */
function bracket(encode: (l: number) => number, noiseCodes: number, seed = 7) {
  const r = rng(seed);
  const lnX = [-3, -2, -1, 0, 1, 2, 3].map((k) => k * Math.LN2);
  const points: Float64Array[] = [];
  for (let i = 0; i < 600; i++) {
    const E = Math.exp(Math.log(0.002) + r.next() * Math.log(500));
    points.push(Float64Array.from(lnX, (lx) => Math.min(255, Math.max(0, 255 * encode(Math.min(1, E * Math.exp(lx))) + noiseCodes * r.gauss()))));
  }
  return { points, lnX };
}

function inverse(encode: (l: number) => number, z: number): number {
  let lo = 0;
  let hi = 1;
  for (let it = 0; it < 60; it++) {
    const m = (lo + hi) / 2;
    if (255 * encode(m) < z) lo = m;
    else hi = m;
  }
  return (lo + hi) / 2;
}

const srgbEncodeRef = (l: number) => new Color('srgb-linear', [l, l, l]).to('srgb').coords[0]!;

describe('solveResponse (Debevec & Malik)', () => {
  // Tolerances: 600 single samples with 0.3 code noise each leave the solution about 1 % of noise of its
  // own (the command fits means of 8 × 8 patches, quieter: scripts/response-accuracy.ts measures grid
  // ratios within 0.4 %); the sRGB toe (codes 10-20, where the slope in ln z turns from 1 to 2.4) is the
  // hardest part for the smoothness term.
  it('recovers the sRGB curve within 1.5 % of linear light over codes 10-250 from noisy samples', () => {
    const { points, lnX } = bracket(srgbEncodeRef, 0.3);
    const sol = solveResponse(points, lnX);
    expect(sol.monotonic).toBe(true);
    // a consistent bracket passes the command's gate
    expect(sol.fitRmsPct).toBeLessThan(BRACKET_LIMITS.maxFitRmsPct);
    expect(sol.curve.linear[255]).toBe(1);
    for (let z = 10; z <= 250; z += 4) expect(Math.abs(sol.curve.linear[z]! / colorjsLinear(z / 255) - 1)).toBeLessThan(0.015);
  });

  it('recovers a pure power law (gamma 2.2) within 1 % over codes 10-250', () => {
    const enc = (l: number) => Math.pow(l, 1 / 2.2);
    const { points, lnX } = bracket(enc, 0.3, 11);
    const sol = solveResponse(points, lnX);
    for (let z = 10; z <= 250; z += 4) expect(Math.abs(sol.curve.linear[z]! / Math.pow(z / 255, 2.2) - 1)).toBeLessThan(0.01);
  });

  it('recovers the shape of an S-shaped camera curve far from sRGB: ratios to code 128 within 2 % over codes 20-240', () => {
    // sRGB then v - 0.35 sin(2 pi v) / (2 pi): 35 % steeper than sRGB at mid-scale (invented test curve)
    const enc = (l: number) => {
      const v = srgbEncodeRef(l);
      return v - (0.35 * Math.sin(2 * Math.PI * v)) / (2 * Math.PI);
    };
    const { points, lnX } = bracket(enc, 0.3, 13);
    const sol = solveResponse(points, lnX);
    // luminance ratios are what the measurement uses; the table's scale (code 255 -> 1) rests on its
    // extension past the last measured codes
    let farFromSrgb = 0;
    const mid = sol.curve.linear[128]! / inverse(enc, 128);
    // (above code 240 the table follows the power law fitted below it, by design: see TOP_FIT_END)
    for (let z = 20; z <= 240; z += 2) {
      const truth = inverse(enc, z);
      expect(Math.abs(sol.curve.linear[z]! / truth / mid - 1)).toBeLessThan(0.02);
      farFromSrgb = Math.max(farFromSrgb, Math.abs(truth / colorjsLinear(z / 255) - 1));
    }
    // the scale rests on the power-law extension past code 240, which a shoulder near white bends
    expect(Math.abs(mid - 1)).toBeLessThan(0.08);
    // the control: reading this camera's codes as sRGB would be far off
    expect(farFromSrgb).toBeGreaterThan(0.3);
  });

  it('flags exposures that do not belong to the photos: the fit residual grows', () => {
    const { points, lnX } = bracket(srgbEncodeRef, 0.3);
    const wrong = lnX.map((x, j) => (j === 3 ? x + Math.log(1.6) : x));
    expect(solveResponse(points, wrong).fitRmsPct).toBeGreaterThan(2 * solveResponse(points, lnX).fitRmsPct);
    expect(solveResponse(points, wrong).fitRmsPct).toBeGreaterThan(BRACKET_LIMITS.maxFitRmsPct);
  });
});

describe('a measured response as a transfer', () => {
  const linear = Array.from({ length: 256 }, (_, z) => Math.pow(z / 255, 2.2));
  const curve: ResponseCurve = { id: responseId(linear), linear };

  it('decodes, encodes back, and gives the table at whole codes', () => {
    const lut = decodeLut(8, curve);
    for (let z = 0; z < 256; z += 17) expect(lut[z]).toBeCloseTo(linear[z]!, 6);
    fc.assert(
      fc.property(fc.double({ min: 0, max: 1, noNaN: true }), (v) => {
        expect(transferEncode(curve, transferDecode(curve, v))).toBeCloseTo(v, 9);
      }),
    );
    // a 16-bit table interpolates between the codes
    expect(decodeLut(16, curve)[32768]).toBeCloseTo(transferDecode(curve, 32768 / 65535), 6);
  });

  it('code steps: the sRGB case is srgbCodeStepPct; a power law gives 100 × 2.2 / code', () => {
    for (const y of [0.01, 0.2, 0.578]) expect(transferCodeStepPct('srgb', y)).toBe(srgbCodeStepPct(y));
    // d ln L / dz = 2.2 / z for L = (z/255)^2.2 [computed]; the table's step between whole codes
    const z = 200;
    expect(transferCodeStepPct(curve, linear[z]! * 1.0000001)).toBeCloseTo((100 * (linear[z + 1]! - linear[z]!)) / linear[z]!, 3);
    expect(transferCodeStepPct(curve, linear[z]!)).toBeCloseTo((100 * 2.2) / z, 0);
  });
});

describe('decoding through a measured response', () => {
  const linear = Array.from({ length: 256 }, (_, z) => Math.pow(z / 255, 2.2));
  const curve: ResponseCurve = { id: responseId(linear), linear };

  it('reads 8-bit codes through the table, and leaves 16-bit files to their own transfer, saying so', async () => {
    const codes = Buffer.from([0, 64, 128, 200, 255, 17]);
    const png8 = await sharp(codes, { raw: { width: 2, height: 1, channels: 3 } }).png().toBuffer();
    const d8 = await decodePhotoBuffer(png8, 'eight.png', { transfer: curve });
    expect(d8.info.transfer).toBe('response');
    expect(d8.info.responseId).toBe(curve.id);
    for (let i = 0; i < 6; i++) expect(d8.image.data[i]).toBeCloseTo(linear[codes[i]!]!, 6);
    const png16 = await sharp(Buffer.from(new Uint16Array([0, 16384, 32768, 51400, 65535, 4369]).buffer), { raw: { width: 2, height: 1, channels: 3 } })
      .toColourspace('rgb16')
      .png()
      .toBuffer();
    const d16 = await decodePhotoBuffer(png16, 'sixteen.png', { transfer: curve });
    expect(d16.info.transfer).toBe('srgb');
    expect(d16.warnings.join(' ')).toMatch(/16-bit file: the camera response .* is not applied/);
  });
});

describe('bracket sampling', () => {
  it('keeps smooth unclipped patches and drops clipped ones and patches across an edge', () => {
    const W = 80;
    const H = 60;
    const data = new Uint8Array(W * H * 3);
    for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) for (let c = 0; c < 3; c++) data[(y * W + x) * 3 + c] = x < 40 ? 100 : 255;
    // a sharp vertical edge through the patch column at x = 40
    for (let y = 0; y < H; y++) for (let x = 38; x < 42; x++) for (let c = 0; c < 3; c++) data[(y * W + x) * 3 + c] = x < 40 ? 20 : 200;
    const p = framePatches({ width: W, height: H, data }, { cols: 4, rows: 3, patchPx: 8 });
    // columns at x = 10, 30 (code 100), 50, 70 (clipped)
    expect(p[0]).toBe(100);
    expect(Number.isNaN(p[3 * 3])).toBe(true);
    const pts = bracketPoints([p, p]);
    expect(pts).toHaveLength(4 * 3 * 3);
    expect(Array.from(pts[0]!)).toEqual([100, 100]);
  });
});

describe('shutter-speed labels', () => {
  // APEX: time value Tv = log2(1/t), whole Tv = whole stops (ASA PH2.5-1960, via Kerr's APEX notes);
  // cameras label 2^-6 s as 1/60 and set times in thirds or halves of a stop (common practice)
  it('turns a bracket of labels into exact steps, and leaves other times as written', () => {
    const whole = exactShutterTimes([1 / 1000, 1 / 500, 1 / 250, 1 / 125, 1 / 60, 1 / 30, 1 / 15])!;
    expect(whole.map((t) => -Math.log2(t))).toEqual([10, 9, 8, 7, 6, 5, 4]);
    const thirds = exactShutterTimes([1 / 100, 1 / 80, 0.3])!;
    expect(thirds[0]).toBeCloseTo(2 ** (-20 / 3), 12);
    expect(thirds[2]).toBeCloseTo(2 ** (-5 / 3), 12);
    // a half-stop label puts the whole bracket on the half-stop scale: 1/6 is then 2^-2.5 s
    const halves = exactShutterTimes([1 / 90, 1 / 45, 1 / 6])!;
    expect(halves.map((t) => -Math.log2(t))).toEqual([6.5, 5.5, 2.5]);
    // exact times (a generator's, or a camera that writes them) are not labels
    expect(exactShutterTimes([0.000889224, 0.001778448, 0.003556896])).toBeNull();
    expect(exactShutterTimes([1 / 64, 1 / 32, 1 / 16])).toBeNull();
  });

  it('parses times given on the command line', () => {
    expect(parseExposureTime('1/60')).toBeCloseTo(1 / 60, 12);
    expect(parseExposureTime('0.5')).toBe(0.5);
    expect(parseExposureTime('2s')).toBe(2);
    expect(parseExposureTime('fast')).toBeNull();
    expect(parseExposureTime('1/0')).toBeNull();
  });
});
