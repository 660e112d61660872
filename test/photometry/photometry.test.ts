import { describe, expect, it } from 'vitest';
import Color from 'colorjs.io';
import {
  D65_XYZ,
  K_DEFAULT,
  LINEAR_LUT_16,
  SRGB_LUT_16,
  SRGB_LUT_8,
  SRGB_TO_XYZ,
  XYZ_TO_SRGB,
  srgbCodeStepPct,
  apexAv,
  apexBv,
  apexEv,
  apexSv,
  apexTv,
  decodeLut,
  deltaUv,
  estimatedLuminance,
  exposureFactor,
  exposureTimeFromTv,
  fNumberFromAv,
  invert3,
  luminanceFromBv,
  luminanceOf,
  luminancePlane,
  meteredLuminance,
  rgbToUv,
  rgbToXyz,
  srgbDecode,
  srgbEncode,
  srgbToLuv,
  xyToUv,
  xyzToLuv,
  xyzToRgb,
  xyzToUv,
} from '../../lib/photometry/index.js';

// culori ships no type declarations; load it untyped so no ambient module declaration is needed.
const culoriName = 'culori';
// eslint-disable-next-line @typescript-eslint/no-explicit-any
const culori: any = await import(culoriName);

describe('sRGB transfer function', () => {
  // IEC 61966-2-1 decode, values from the table in field-notes §1 (computed there; colorjs.io and
  // culori agree to the digits shown).
  const table: Array<[number, number]> = [
    [0.04045, 0.0031308],
    [0.2, 0.0331048],
    [118 / 255, 0.1811642],
    [0.5, 0.2140411],
    [128 / 255, 0.2158605],
    [0.8, 0.6038273],
    [10 / 255, 0.0030353],
  ];
  it('decodes the table values (IEC 61966-2-1 via field-notes §1, 7 decimals)', () => {
    for (const [v, l] of table) expect(srgbDecode(v)).toBeCloseTo(l, 7);
  });

  it('encodes L 0.18 -> 0.461356 and 0.5 -> 0.735357 (field-notes §1; colorjs.io and culori agree)', () => {
    expect(srgbEncode(0.18)).toBeCloseTo(0.461356, 6);
    expect(srgbEncode(0.5)).toBeCloseTo(0.735357, 6);
  });

  it("agrees with colorjs.io 'srgb' -> 'srgb-linear' and back over 0..1", () => {
    for (let i = 0; i <= 1000; i++) {
      const v = i / 1000;
      const ref = new Color('srgb', [v, v, v]).to('srgb-linear').coords[0] as number;
      // both evaluate the same double-precision formula: 1e-12 allows for pow() rounding only
      expect(Math.abs(srgbDecode(v) - ref)).toBeLessThan(1e-12);
      const back = new Color('srgb-linear', [v, v, v]).to('srgb').coords[0] as number;
      expect(Math.abs(srgbEncode(v) - back)).toBeLessThan(1e-12);
    }
  });

  it('gives the contrast of one 8-bit code value as the central difference of colorjs.io sRGB decoding', () => {
    // reference: colorjs.io 'srgb' -> 'srgb-linear' (IEC 61966-2-1) at V - 1/2 and V + 1/2 code values
    for (const V of [5, 20, 60, 90, 128, 200, 250]) {
      const lin = (c: number): number => new Color('srgb', [c / 255, c / 255, c / 255]).to('srgb-linear').coords[0] as number;
      const y = lin(V);
      const ref = (100 * (lin(V + 0.5) - lin(V - 0.5))) / y;
      // a derivative against a one-code difference: agree to 0.5 % of the value (curvature over one code)
      expect(Math.abs(srgbCodeStepPct(y) - ref) / ref).toBeLessThan(0.005);
    }
    // worked values (formula 2.4 / (V + 14.025)): code 90 -> 2.31 %, code 200 -> 1.12 %
    expect(srgbCodeStepPct(new Color('srgb', [90 / 255, 0, 0]).to('srgb-linear').coords[0] as number)).toBeCloseTo(2.307, 2);
    expect(srgbCodeStepPct(new Color('srgb', [200 / 255, 0, 0]).to('srgb-linear').coords[0] as number)).toBeCloseTo(1.121, 2);
  });

  it('agrees with culori rgb -> lrgb', () => {
    const toLrgb = culori.converter('lrgb');
    for (let i = 0; i <= 255; i++) {
      const v = i / 255;
      expect(Math.abs(srgbDecode(v) - toLrgb({ mode: 'rgb', r: v, g: v, b: v }).r)).toBeLessThan(1e-12);
    }
  });

  it('round-trips within 1e-7 (the two thresholds do not meet exactly: WP-sRGB; tolerance common practice)', () => {
    for (let i = 0; i <= 10000; i++) {
      const v = i / 10000;
      expect(Math.abs(srgbEncode(srgbDecode(v)) - v)).toBeLessThan(1e-7);
    }
  });

  it('lookup tables hold the decode of every code value', () => {
    expect(SRGB_LUT_8.length).toBe(256);
    expect(SRGB_LUT_16.length).toBe(65536);
    // Float32 tables: relative error of float32 rounding is < 6e-8 (IEEE 754 single, 24-bit significand)
    for (let c = 0; c < 256; c++) expect(Math.abs(SRGB_LUT_8[c]! - srgbDecode(c / 255))).toBeLessThanOrEqual(6e-8 * srgbDecode(c / 255) + 1e-45);
    for (let c = 0; c < 65536; c += 97) expect(Math.abs(SRGB_LUT_16[c]! - srgbDecode(c / 65535))).toBeLessThanOrEqual(6e-8);
    // 118/255 from the field-notes table
    expect(SRGB_LUT_8[118]!).toBeCloseTo(0.1811642, 7);
    // code 257*c in 16 bits is the same fraction of white as c in 8 bits
    expect(SRGB_LUT_16[257 * 128]).toBe(SRGB_LUT_8[128]);
    expect(LINEAR_LUT_16[65535]).toBe(1);
    expect(decodeLut(16, 'linear')).toBe(LINEAR_LUT_16);
    expect(decodeLut(8, 'srgb')).toBe(SRGB_LUT_8);
  });
});

describe('sRGB -> XYZ matrix', () => {
  it('matches the 4-decimal matrix printed in IEC 61966-2-1 (rounding to 4 decimals)', () => {
    const printed = [0.4124, 0.3576, 0.1805, 0.2126, 0.7152, 0.0722, 0.0193, 0.1192, 0.9505];
    // the printed values are rounded, so agreement is within half a unit of the 4th decimal
    for (let k = 0; k < 9; k++) expect(Math.abs(SRGB_TO_XYZ[k]! - printed[k]!)).toBeLessThanOrEqual(0.00005 + 1e-12);
  });

  it('inverse: the printed IEC 61966-2-1 inverse is the inverse of the printed 4-decimal forward matrix', () => {
    const forward = [0.4124, 0.3576, 0.1805, 0.2126, 0.7152, 0.0722, 0.0193, 0.1192, 0.9505];
    const printed = [3.2406, -1.5372, -0.4986, -0.9689, 1.8758, 0.0415, 0.0557, -0.204, 1.057];
    const inv = invert3(forward);
    // printed to 4 decimals: within half a unit of the last digit
    for (let k = 0; k < 9; k++) expect(Math.abs(inv[k]! - printed[k]!)).toBeLessThanOrEqual(0.00005);
  });

  it('XYZ_TO_SRGB agrees with colorjs.io xyz-d65 -> srgb-linear (full-precision form)', () => {
    const axes: Array<[number, number, number]> = [
      [1, 0, 0],
      [0, 1, 0],
      [0, 0, 1],
    ];
    axes.forEach((xyz, k) => {
      const ref = new Color('xyz-d65', xyz).to('srgb-linear').coords as number[];
      for (let row = 0; row < 3; row++) expect(Math.abs(XYZ_TO_SRGB[row * 3 + k]! - ref[row]!)).toBeLessThan(1e-6);
    });
  });

  it('matches colorjs.io for the primaries (its matrix is the full-precision form)', () => {
    const cols: Array<[number, number, number]> = [
      [1, 0, 0],
      [0, 1, 0],
      [0, 0, 1],
    ];
    cols.forEach((rgb, k) => {
      const ref = new Color('srgb-linear', rgb).to('xyz-d65').coords as number[];
      const ours = rgbToXyz(...rgb);
      for (let i = 0; i < 3; i++) expect(Math.abs(ours[i]! - ref[i]!)).toBeLessThan(1e-7);
      expect(ours[1]).toBeCloseTo([0.212639, 0.7151687, 0.0721923][k]!, 7); // field-notes §1 [computed]
    });
  });

  it('maps sRGB grey 0.5 to (0.2034367, 0.2140411, 0.2331032) like colorjs.io and culori xyz65', () => {
    const l = srgbDecode(0.5);
    const ours = rgbToXyz(l, l, l);
    const cj = new Color('srgb', [0.5, 0.5, 0.5]).to('xyz-d65').coords as number[];
    const cu = culori.converter('xyz65')({ mode: 'rgb', r: 0.5, g: 0.5, b: 0.5 });
    const cuArr = [cu.x, cu.y, cu.z];
    const table = [0.2034367, 0.2140411, 0.2331032]; // field-notes §7
    for (let i = 0; i < 3; i++) {
      // colorjs.io and culori use the same primaries-derived matrix; allow 1e-7 for their
      // rationals versus our derivation at run time.
      expect(Math.abs(ours[i]! - cj[i]!)).toBeLessThan(1e-7);
      expect(Math.abs(ours[i]! - cuArr[i]!)).toBeLessThan(1e-7);
      expect(ours[i]).toBeCloseTo(table[i]!, 7);
    }
  });

  it('maps RGB white to the D65 white (0.9504559, 1, 1.0890578) (field-notes §1)', () => {
    const w = rgbToXyz(1, 1, 1);
    expect(w[0]).toBeCloseTo(0.9504559, 7);
    expect(w[1]).toBeCloseTo(1, 12);
    expect(w[2]).toBeCloseTo(1.0890578, 7);
    expect(D65_XYZ[0]).toBeCloseTo(0.9504559, 7);
    const back = xyzToRgb(...w);
    for (const c of back) expect(c).toBeCloseTo(1, 12);
  });

  it('luminance weights are Y = 0.2126 R + 0.7152 G + 0.0722 B to 4 decimals (IEC 61966-2-1)', () => {
    expect(luminanceOf(1, 0, 0)).toBeCloseTo(0.2126, 4);
    expect(luminanceOf(0, 1, 0)).toBeCloseTo(0.7152, 4);
    expect(luminanceOf(0, 0, 1)).toBeCloseTo(0.0722, 4);
    expect(luminanceOf(1, 1, 1)).toBeCloseTo(1, 12);
  });

  it('luminancePlane equals luminanceOf per pixel', () => {
    const data = new Float32Array([0.1, 0.2, 0.3, 1, 1, 1, 0, 0.5, 0]);
    const p = luminancePlane({ width: 3, height: 1, data });
    expect(p.width).toBe(3);
    expect(p.data[0]).toBeCloseTo(luminanceOf(0.1, 0.2, 0.3), 6);
    expect(p.data[1]).toBeCloseTo(1, 6);
    // colorjs.io as an outside check on the middle pixel's luminance
    const y = new Color('srgb-linear', [0, 0.5, 0]).to('xyz-d65').coords[1] as number;
    expect(Math.abs(p.data[2]! - y)).toBeLessThan(1e-7);
  });
});

describe("CIE 1976 u'v'", () => {
  it('D65 xy (0.3127, 0.3290) -> (0.197830, 0.468320) (field-notes §1 table)', () => {
    const [u, v] = xyToUv(0.3127, 0.329);
    expect(u).toBeCloseTo(0.19783, 6);
    expect(v).toBeCloseTo(0.46832, 6);
  });

  it('xy (0.54369558, 0.32107944) -> (0.3772021, 0.5012026) (colour-docs xy_to_Luv_uv worked example)', () => {
    const [u, v] = xyToUv(0.54369558, 0.32107944);
    expect(u).toBeCloseTo(0.3772021, 7);
    expect(v).toBeCloseTo(0.5012026, 7);
  });

  it('sRGB white through the 4-decimal matrix -> (0.197841, 0.468323) (field-notes §1 table)', () => {
    const X = 0.4124 + 0.3576 + 0.1805;
    const Y = 0.2126 + 0.7152 + 0.0722;
    const Z = 0.0193 + 0.1192 + 0.9505;
    const [u, v] = xyzToUv(X, Y, Z);
    expect(u).toBeCloseTo(0.197841, 6);
    expect(v).toBeCloseTo(0.468323, 6);
  });

  it('primaries and white agree with the table and with colorjs.io .uv', () => {
    const cases: Array<[[number, number, number], [number, number]]> = [
      [[1, 0, 0], [0.450704, 0.522887]],
      [[0, 1, 0], [0.125, 0.5625]],
      [[0, 0, 1], [0.175439, 0.157895]],
      [[1, 1, 1], [0.19783, 0.46832]],
    ];
    for (const [rgb, table] of cases) {
      const [u, v] = rgbToUv(...rgb);
      expect(u).toBeCloseTo(table[0], 6);
      expect(v).toBeCloseTo(table[1], 6);
      const ref = new Color('srgb-linear', rgb).uv as unknown as number[]; // a getter at run time (typed as a method)
      expect(Math.abs(u - ref[0]!)).toBeLessThan(1e-7);
      expect(Math.abs(v - ref[1]!)).toBeLessThan(1e-7);
    }
  });

  it('u\'v\' of XYZ agrees with colorjs.io .uv on random colours, and black gives NaN', () => {
    let s = 12345;
    const rnd = () => ((s = (s * 1103515245 + 12345) & 0x7fffffff) / 0x7fffffff);
    for (let i = 0; i < 200; i++) {
      const X = rnd() * 1.2;
      const Y = rnd() + 0.01;
      const Z = rnd() * 1.2;
      const [u, v] = xyzToUv(X, Y, Z);
      const ref = new Color('xyz-d65', [X, Y, Z]).uv as unknown as number[]; // a getter at run time (typed as a method)
      expect(Math.abs(u - ref[0]!)).toBeLessThan(1e-12);
      expect(Math.abs(v - ref[1]!)).toBeLessThan(1e-12);
    }
    expect(xyzToUv(0, 0, 0).every(Number.isNaN)).toBe(true);
  });

  it("Δu'v' is the Euclidean distance (panel datasheet note, field-notes §1)", () => {
    expect(deltaUv(0.2, 0.47, 0.203, 0.474)).toBeCloseTo(0.005, 12);
    expect(deltaUv(0.1, 0.1, 0.1, 0.1)).toBe(0);
  });
});

describe('CIE L*u*v*', () => {
  it('XYZ (0.20654008, 0.12197225, 0.05136952) -> (41.5278752, 96.8362605, 17.7521014) (colour-docs XYZ_to_Luv)', () => {
    const [L, u, v] = xyzToLuv(0.20654008, 0.12197225, 0.05136952);
    expect(L).toBeCloseTo(41.5278752, 6);
    expect(u).toBeCloseTo(96.8362605, 6);
    expect(v).toBeCloseTo(17.7521014, 6);
  });

  it("sRGB -> L*u*v* agrees with colorjs.io 'luv' (D65)", () => {
    const samples: Array<[number, number, number]> = [
      [0.5, 0.5, 0.5],
      [1, 0, 0],
      [0.2, 0.7, 0.3],
      [0.02, 0.03, 0.01],
      [0.9, 0.8, 0.95],
    ];
    for (const rgb of samples) {
      const ours = srgbToLuv(...rgb);
      const ref = new Color('srgb', rgb).to('luv').coords as number[];
      for (let i = 0; i < 3; i++) expect(Math.abs(ours[i]! - ref[i]!)).toBeLessThan(1e-6);
    }
  });
});

describe('exposure equation and APEX', () => {
  it('f/16, 1/100 s, ISO 100, K 12.5 -> 3200 cd/m² (ISO 2720 equation; forum worked example in field-notes §4)', () => {
    expect(meteredLuminance({ fNumber: 16, exposureTimeS: 1 / 100, iso: 100 }, 12.5)).toBeCloseTo(3200, 9);
    expect(K_DEFAULT).toBe(12.5);
  });

  it('f/2.8, 1/60 s, ISO 100 -> 58.8 cd/m² (field-notes §4, computed)', () => {
    expect(meteredLuminance({ fNumber: 2.8, exposureTimeS: 1 / 60, iso: 100 })).toBeCloseTo(58.8, 9);
  });

  it('K is settable: the ISO 2720 range ends scale the result', () => {
    const e = { fNumber: 16, exposureTimeS: 1 / 100, iso: 100 };
    expect(meteredLuminance(e, 10.6)).toBeCloseTo(2713.6, 9);
    expect(meteredLuminance(e, 13.4)).toBeCloseTo(3430.4, 9);
    expect(() => meteredLuminance(e, 0)).toThrow(RangeError);
    expect(() => meteredLuminance({ ...e, iso: 0 })).toThrow(RangeError);
  });

  it('APEX: Sv = 5 at ISO 100, Av = 8 at f/16, Tv(1/100) = log2 100 (ASA PH2.5-1960 via Kerr 2007)', () => {
    expect(apexSv(100)).toBeCloseTo(5, 12);
    expect(apexAv(16)).toBeCloseTo(8, 12);
    expect(apexAv(1)).toBe(0);
    expect(apexTv(1 / 100)).toBeCloseTo(Math.log2(100), 12);
    expect(apexEv(16, 1 / 100)).toBeCloseTo(8 + Math.log2(100), 12);
    const e = { fNumber: 16, exposureTimeS: 1 / 100, iso: 100 };
    expect(apexBv(e)).toBeCloseTo(8 + Math.log2(100) - 5, 12);
    // Bv and the exposure equation describe the same luminance
    expect(luminanceFromBv(apexBv(e), 12.5)).toBeCloseTo(3200, 9);
    expect(fNumberFromAv(apexAv(5.6))).toBeCloseTo(5.6, 12);
    expect(exposureTimeFromTv(apexTv(1 / 250))).toBeCloseTo(1 / 250, 15);
  });

  it('exposureFactor = N²/(t·S), null when a value is missing', () => {
    expect(exposureFactor({ fNumber: 16, exposureTimeS: 0.01, iso: 100 })).toBeCloseTo(256, 12);
    expect(exposureFactor({ fNumber: null, exposureTimeS: 0.01, iso: 100 })).toBeNull();
    expect(exposureFactor({ fNumber: 4, exposureTimeS: 0, iso: 100 })).toBeNull();
    // two frames of the same scene one stop apart give the same V_lin * factor (reciprocity)
    const a = exposureFactor({ fNumber: 4, exposureTimeS: 1 / 50, iso: 100 })!;
    const b = exposureFactor({ fNumber: 4, exposureTimeS: 1 / 100, iso: 100 })!;
    expect((0.4 * a) / (0.2 * b)).toBeCloseTo(1, 12);
  });

  it('uncalibrated estimate: a mid-tone at linear 0.18 reads as the metered luminance (field-notes §4)', () => {
    const e = { fNumber: 2.8, exposureTimeS: 1 / 60, iso: 100 };
    expect(estimatedLuminance(0.18, e)).toBeCloseTo(58.8, 9);
    expect(estimatedLuminance(0.18, e, { calibration: 100 })).toBeCloseTo((100 * 0.18 * 7.84 * 60) / 100, 9);
  });
});
