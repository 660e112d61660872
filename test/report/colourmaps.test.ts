import { describe, expect, it } from 'vitest';
import Color from 'colorjs.io';
import sharp from 'sharp';
import { CIVIDIS, VIRIDIS, colourOf, falseColour, NO_DATA_RGB } from '../../lib/report/colourmaps.js';
import { encodePhotoJpeg, encodePng } from '../../lib/report/png.js';

function lightness(lut: Uint8Array): number[] {
  const out: number[] = [];
  for (let i = 0; i < 256; i++) {
    const c = new Color('srgb', [lut[i * 3]! / 255, lut[i * 3 + 1]! / 255, lut[i * 3 + 2]! / 255]);
    out.push(c.to('lab-d65').coords[0] as number);
  }
  return out;
}

const hex = (lut: Uint8Array, i: number): string =>
  [lut[i * 3]!, lut[i * 3 + 1]!, lut[i * 3 + 2]!].map((v) => v.toString(16).padStart(2, '0')).join('');

describe('colour maps', () => {
  for (const map of [VIRIDIS, CIVIDIS]) {
    it(`${map.name}: CIE L* (D65) increases along the table`, () => {
      // 8-bit rounding of the published float table leaves a few flat or slightly negative steps
      // (a few hundredths of L*, against about 0.3 L* per step and ~1 L* for a visible difference)
      const L = lightness(map.lut);
      const dips: number[] = [];
      for (let i = 1; i < 256; i++) {
        expect(L[i]! - L[i - 1]!, `step ${i}`).toBeGreaterThan(-0.05);
        if (L[i]! <= L[i - 1]!) dips.push(i);
      }
      expect(dips.length).toBeLessThanOrEqual(5);
      for (let i = 4; i < 256; i++) expect(L[i]! - L[i - 4]!, `steps ${i - 4}..${i}`).toBeGreaterThan(0.5);
      expect(L[255]! - L[0]!).toBeGreaterThan(70);
    });
  }

  it('end colours match the published tables', () => {
    expect(hex(VIRIDIS.lut, 0)).toBe('440154');
    expect(hex(VIRIDIS.lut, 128)).toBe('21918c');
    expect(hex(VIRIDIS.lut, 255)).toBe('fde725');
    expect(hex(CIVIDIS.lut, 0)).toBe('00224e');
    expect(hex(CIVIDIS.lut, 255)).toBe('fee838');
  });

  it('cividis agrees within one code value with the float table at eleven evenly spaced entries', () => {
    // matplotlib's cividis at entries round(25.5 k), k = 0..10
    const ref = [
      [0.0, 0.135112, 0.304751],
      [0.03211, 0.201199, 0.440785],
      [0.208926, 0.272546, 0.424809],
      [0.309601, 0.340399, 0.42479],
      [0.401418, 0.41179, 0.440708],
      [0.488697, 0.485318, 0.471008],
      [0.582087, 0.55867, 0.468118],
      [0.68395, 0.638793, 0.444251],
      [0.785965, 0.720438, 0.399613],
      [0.896818, 0.81103, 0.320982],
      [0.995737, 0.909344, 0.217772],
    ];
    ref.forEach((rgb, k) => {
      // the sampled source interpolates between entries floor and ceil of 25.5 k
      const candidates = [Math.floor(25.5 * k), Math.ceil(25.5 * k)];
      const close = candidates.some((i) => rgb.every((v, c) => Math.abs(CIVIDIS.lut[i * 3 + c]! - v * 255) <= 1.5));
      expect(close, `entry near ${25.5 * k}`).toBe(true);
    });
  });
});

describe('falseColour', () => {
  // values exact in binary, so the expected table entries are exact too
  const plane = { width: 4, height: 2, data: new Float32Array([-1, 0, 2, 3, Number.NaN, 1, 1.9999, 0.0001]) };

  it('clamps to the ends, paints no data white and keeps the layout', () => {
    const img = falseColour(plane, [0, 2], VIRIDIS);
    expect(img.width).toBe(4);
    expect(img.height).toBe(2);
    expect(img.rgb.length).toBe(24);
    const px = (i: number): number[] => Array.from(img.rgb.slice(i * 3, i * 3 + 3));
    const first = Array.from(VIRIDIS.lut.slice(0, 3));
    const last = Array.from(VIRIDIS.lut.slice(765, 768));
    expect(px(0)).toEqual(first); // below range
    expect(px(1)).toEqual(first); // at lo
    expect(px(2)).toEqual(last); // at hi
    expect(px(3)).toEqual(last); // above range
    expect(px(4)).toEqual([...NO_DATA_RGB]);
    expect(px(5)).toEqual(Array.from(VIRIDIS.lut.slice(128 * 3, 128 * 3 + 3))); // mid-range
    expect(px(6)).toEqual(last);
    expect(px(7)).toEqual(first);
    expect(colourOf(1, [0, 2], 'viridis')).toEqual(px(5));
    expect(colourOf(0.5, [0, 2], CIVIDIS)).toEqual(Array.from(CIVIDIS.lut.slice(64 * 3, 64 * 3 + 3)));
  });

  it('brighter values get lighter colours in both maps', () => {
    for (const map of [VIRIDIS, CIVIDIS]) {
      const ramp = { width: 50, height: 1, data: Float32Array.from({ length: 50 }, (_, i) => i / 49) };
      const img = falseColour(ramp, [0, 1], map);
      const L = Array.from({ length: 50 }, (_, i) =>
        new Color('srgb', [img.rgb[i * 3]! / 255, img.rgb[i * 3 + 1]! / 255, img.rgb[i * 3 + 2]! / 255]).to('lab-d65').coords[0] as number,
      );
      for (let i = 1; i < 50; i++) expect(L[i]!).toBeGreaterThan(L[i - 1]!);
    }
  });

  it('rejects a plane whose data does not match its size', () => {
    expect(() => falseColour({ width: 3, height: 3, data: new Float32Array(8) }, [0, 1], VIRIDIS)).toThrow(/3x3/);
  });
});

describe('encoders', () => {
  it('a false-colour map round-trips exactly through the indexed PNG', async () => {
    const w = 300;
    const h = 170;
    const data = new Float32Array(w * h);
    for (let i = 0; i < data.length; i++) data[i] = 0.8 + 0.2 * Math.sin(i * 0.37) ** 2;
    data[5] = Number.NaN;
    const img = falseColour({ width: w, height: h, data }, [0.8, 1.0], CIVIDIS);
    const png = await encodePng(img);
    expect(png[25]).toBe(3); // IHDR colour type 3: indexed
    const back = await sharp(png).raw().toBuffer({ resolveWithObject: true });
    expect(back.info.width).toBe(w);
    expect(back.info.channels).toBe(3);
    expect(Buffer.compare(Buffer.from(back.data), Buffer.from(img.rgb))).toBe(0);
    expect(Buffer.compare(await encodePng(img), png)).toBe(0); // deterministic
  });

  it('a photo is resized to the requested long side and stays in proportion', async () => {
    const w = 900;
    const h = 600;
    const rgb = new Uint8Array(w * h * 3).map((_, i) => (i * 7) % 251);
    const { jpeg, width, height } = await encodePhotoJpeg({ width: w, height: h, rgb }, 450);
    expect([width, height]).toEqual([450, 300]);
    const meta = await sharp(jpeg).metadata();
    expect([meta.format, meta.width, meta.height]).toEqual(['jpeg', 450, 300]);
  });
});
