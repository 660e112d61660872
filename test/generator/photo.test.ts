// Rendered photos: determinism, EXIF, partial pixel coverage, exposure, flat frames and shifted sets.
import exifr from 'exifr';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { srgbDecode } from '../../fixtures/generator/colour.js';
import { falloffMap, randomScene, renderFlatFrame, renderPhoto, renderPhotoPixels, renderShiftedSet } from '../../fixtures/generator/index.js';
import type { PhotoSpec } from '../../fixtures/generator/types.js';

const small = (over: Partial<PhotoSpec> = {}): PhotoSpec => ({
  seed: 11,
  panel: {
    widthMm: 300,
    heightMm: 200,
    pattern: 'white',
    luminance: [{ kind: 'radial', loss: 0.15 }],
    features: [{ kind: 'spot', u: 0.3, v: 0.6, sizeMm: 20, contrastPct: -5 }],
  },
  camera: { width: 320, height: 240, focal35: 35, yawDeg: 6, pitchDeg: -4, rollDeg: 2, fill: 0.7 },
  ...over,
});

/** shoelace area of a polygon */
const polyArea = (p: [number, number][]) =>
  Math.abs(p.reduce((s, [x, y], i) => s + x * p[(i + 1) % p.length][1] - p[(i + 1) % p.length][0] * y, 0)) / 2;

describe('renderPhoto', () => {
  it('same seed -> same bytes; another seed -> other noise', async () => {
    const a = await renderPhoto(small());
    const b = await renderPhoto(small());
    const c = await renderPhoto(small({ seed: 12 }));
    expect(a.ext).toBe('jpg');
    expect(Buffer.compare(a.buffer, b.buffer)).toBe(0);
    expect(Buffer.compare(a.buffer, c.buffer)).not.toBe(0);
    expect(JSON.stringify(a.truth)).toBe(JSON.stringify(b.truth));
  });

  it('EXIF written with piexifjs reads back with exifr and matches the truth record', async () => {
    const spec = small({ exposure: { whiteCentre: 0.6, fNumber: 5.6, iso: 200 }, camera: { ...small().camera, make: 'Testmake', model: 'T-1' } });
    const r = await renderPhoto(spec);
    const e = await exifr.parse(r.buffer, true);
    const x = r.truth.exposure.exif;
    expect(e.Make).toBe('Testmake');
    expect(e.Model).toBe('T-1');
    expect(e.FNumber).toBeCloseTo(5.6, 9);
    expect(e.ISO).toBe(200);
    expect(e.FocalLengthIn35mmFormat).toBe(35);
    expect(e.FocalLength).toBeCloseTo(35 / 1.5, 3);
    expect(e.ExposureTime).toBeCloseTo(x.exposureTimeS, 12);
    expect(e.DateTimeOriginal).toBeInstanceOf(Date);
    // exposure equation of field notes §4 (ISO 2720 form, camera constant C): L = C V N^2 / (t S)
    // the white centre of this panel is 250 cd/m² (default) at camera value whiteCentre
    const L = (r.truth.exposure.calibrationC * r.truth.exposure.whiteCentre * 5.6 * 5.6) / (e.ExposureTime * 200);
    expect(L).toBeCloseTo(250, 6);
    expect(r.truth.exposure.whiteCentre).toBeCloseTo(0.6, 4);
  });

  it('16-bit PNG (linear) carries the camera values; EXIF through sharp', async () => {
    const spec = small({ noise: null, output: { format: 'png', bitDepth: 16, transfer: 'linear' } });
    const r = await renderPhoto(spec);
    expect(r.ext).toBe('png');
    expect(r.truth.image).toMatchObject({ bitDepth: 16, transfer: 'linear', format: 'png' });
    const { data, info } = await sharp(r.buffer).toColourspace('rgb16').raw({ depth: 'ushort' }).toBuffer({ resolveWithObject: true });
    const u16 = new Uint16Array(data.buffer, data.byteOffset, data.length / 2);
    const px = renderPhotoPixels(spec).image;
    expect(info.width).toBe(320);
    let worst = 0;
    for (let k = 0; k < u16.length; k += 97) worst = Math.max(worst, Math.abs(u16[k] / 65535 - px.data[k]));
    expect(worst).toBeLessThan(0.5 / 65535 + 1e-7);
    const e = await exifr.parse(r.buffer, true);
    expect(e.FNumber).toBeCloseTo(4, 9);
  });

  it('16-bit TIFF (sRGB-encoded) decodes back to the camera values', async () => {
    const spec = small({ noise: null, output: { format: 'tiff', bitDepth: 16, transfer: 'srgb' } });
    const r = await renderPhoto(spec);
    expect(r.ext).toBe('tif');
    expect(r.truth.image).toMatchObject({ bitDepth: 16, transfer: 'srgb', format: 'tiff' });
    const { data } = await sharp(r.buffer).toColourspace('rgb16').raw({ depth: 'ushort' }).toBuffer({ resolveWithObject: true });
    const u16 = new Uint16Array(data.buffer, data.byteOffset, data.length / 2);
    const px = renderPhotoPixels(spec).image;
    let worst = 0;
    for (let k = 0; k < u16.length; k += 89) worst = Math.max(worst, Math.abs(srgbDecode(u16[k] / 65535) - px.data[k]));
    // half a 16-bit code step of the encoded value, times the largest slope of the decode (1/12.92 ... 2.4)
    expect(worst).toBeLessThan((0.5 / 65535) * 2.4 + 1e-7);
  });

  it('pixels crossing the active-area edge get partial coverage: total light = emission x projected area', () => {
    // uniform panel, no falloff, no noise, black surroundings: the sum of pixel values over the frame is
    // gain * radiance * (area of the projected quadrilateral in px²) when coverage is integrated honestly
    const spec: PhotoSpec = {
      seed: 3,
      panel: { widthMm: 300, heightMm: 200, pattern: 'white', bezelMm: 5 },
      camera: { width: 200, height: 150, focal35: 30, yawDeg: 11, pitchDeg: 7, rollDeg: 3.3, fill: 0.7, cos4: false },
      noise: null,
      surround: { ambient: 0, spill: 0 },
      exposure: { gain: 0.5 },
    };
    const { image, truth } = renderPhotoPixels(spec);
    let sum = 0;
    for (let k = 1; k < image.data.length; k += 3) sum += image.data[k];
    const area = polyArea(truth.corners);
    // edge pixels get their covered area by exact polygon clipping; float32 pixel storage limits to ~1e-7
    expect(Math.abs(sum / (truth.exposure.gain * area) - 1)).toBeLessThan(1e-6);
  });

  it('noise-free centre pixel of a white panel equals whiteCentre; pattern levels follow sRGB decode', () => {
    const base: PhotoSpec = {
      seed: 5,
      panel: { widthMm: 300, heightMm: 200, pattern: 'white' },
      camera: { width: 201, height: 151, focal35: 35, fill: 0.7 },
      noise: null,
      exposure: { gain: 0.8 },
    };
    const w = renderPhotoPixels(base);
    const g = renderPhotoPixels({ ...base, panel: { ...base.panel, pattern: 'gray', level: 0.5 } });
    const k = (75 * 201 + 100) * 3 + 1; // pixel (100, 75): the panel centre is at (100, 75)
    expect(w.truth.corners[0][0] + w.truth.corners[2][0]).toBeCloseTo(200, 6);
    expect(w.image.data[k]).toBeCloseTo(0.8, 6); // on axis: falloff 1
    // gray 50 % emits sRGB-decode(0.5) = 0.2140411 of white (IEC 61966-2-1)
    expect(g.image.data[k] / w.image.data[k]).toBeCloseTo(srgbDecode(0.5), 6);
    expect(g.truth.pattern.emission[0]).toBeCloseTo(0.2140411, 7);
  });

  it('randomScene is deterministic and keeps the panel in the frame', () => {
    for (let s = 1; s <= 20; s++) {
      const a = randomScene(s, { features: [1, 3] });
      expect(JSON.stringify(a)).toBe(JSON.stringify(randomScene(s, { features: [1, 3] })));
      expect(Math.abs(a.camera.yawDeg!)).toBeLessThanOrEqual(15);
      expect(Math.abs(a.camera.rollDeg!)).toBeLessThanOrEqual(5);
    }
    const t = renderPhotoPixels({ ...randomScene(4, { width: 160, height: 120 }), noise: null }).truth;
    for (const [x, y] of t.bezelCorners) {
      expect(x).toBeGreaterThan(0);
      expect(x).toBeLessThan(159);
      expect(y).toBeGreaterThan(0);
      expect(y).toBeLessThan(119);
    }
  });
});

describe('radial lens distortion', () => {
  it('moves the truth corners by the model and draws the panel where they say (Brown radial model, first term)', () => {
    // k > 0: the pixel at radius r shows the pinhole point at r (1 + k r²); a corner's pinhole radius
    // ru and its distorted radius rd satisfy rd (1 + k rd²) = ru, rd < ru (barrel: pulled inwards)
    const k = 0.1;
    const plain = renderPhotoPixels(small({ noise: null }));
    const bent = renderPhotoPixels(small({ noise: null, camera: { ...small().camera, distortion: k } }));
    const half = Math.hypot(320, 240) / 2;
    const r = ([x, y]: [number, number]) => Math.hypot(x - 159.5, y - 119.5) / half;
    for (let i = 0; i < 4; i++) {
      const ru = r(plain.truth.corners[i]);
      const rd = r(bent.truth.corners[i]);
      expect(rd * (1 + k * rd * rd)).toBeCloseTo(ru, 9);
      expect(rd).toBeLessThan(ru);
    }
    // the rendered panel: the pixel at each distorted corner is only partly covered by the panel (the
    // corner of an outline covers about a quarter of it), while pixels 6 px inside are lit; had the image
    // not been resampled, the pinhole corner would lie 4 px or more beyond the moved one
    const c = bent.truth.corners;
    const mx = c.reduce((s, p) => s + p[0], 0) / 4;
    const my = c.reduce((s, p) => s + p[1], 0) / 4;
    const lum = (x: number, y: number) => bent.image.data[(Math.round(y) * 320 + Math.round(x)) * 3 + 1];
    for (let i = 0; i < 4; i++) {
      const [x, y] = c[i];
      const [px, py] = plain.truth.corners[i];
      expect(Math.hypot(px - x, py - y)).toBeGreaterThan(4);
      const ux = (mx - x) / Math.hypot(mx - x, my - y);
      const uy = (my - y) / Math.hypot(mx - x, my - y);
      const inside = lum(x + 6 * ux, y + 6 * uy);
      expect(lum(x, y)).toBeLessThan(0.6 * inside);
      expect(lum(x - 3 * ux, y - 3 * uy)).toBeLessThan(0.3 * inside);
    }
  });
});

describe('flat frames and shifted sets', () => {
  it('noise-free flat frame: pixel ratio at a 30 degree field angle = cos^4 30 = 0.5625 (field notes §4)', async () => {
    const camera = { width: 400, height: 300, focal35: 24 };
    const r = await renderFlatFrame({ seed: 1, camera, level: 0.8, noise: null, output: { format: 'png', bitDepth: 16, transfer: 'linear' } });
    const f = r.truth.falloff.focalPx;
    const x = Math.round(199.5 + f * Math.tan(Math.PI / 6));
    // pick the pixel whose field angle is closest to 30 degrees along the row through the centre
    const angle = Math.atan(Math.hypot(x - 199.5, 0.5) / f);
    const { data } = await sharp(r.buffer).toColourspace('rgb16').raw({ depth: 'ushort' }).toBuffer({ resolveWithObject: true });
    const u16 = new Uint16Array(data.buffer, data.byteOffset, data.length / 2);
    const v = (px: number, py: number) => u16[(py * 400 + px) * 3 + 1] / 65535;
    const centre = (v(199, 149) + v(200, 149) + v(199, 150) + v(200, 150)) / 4;
    const expected = Math.pow(Math.cos(angle), 4);
    expect(Math.abs(angle - Math.PI / 6)).toBeLessThan(0.005);
    const ratio = ((v(x, 149) + v(x, 150)) / 2) / centre;
    expect(ratio).toBeCloseTo(expected, 3);
    expect(Math.abs(expected - 0.5625)).toBeLessThan(0.005);
    // the truth's falloff map agrees with the frame
    const map = falloffMap(camera);
    expect(map[150 * 400 + x]).toBeCloseTo(v(x, 150) / 0.8, 4);
    expect(r.truth.falloffSamples.values.length).toBe(17 * 13);
  });

  it('gradient of the source: fractional change across the frame as given', async () => {
    const r = await renderFlatFrame({ seed: 2, camera: { width: 200, height: 100, focal35: 50, cos4: false }, level: 0.5, gradient: [0.04, 0], noise: null });
    expect(r.linear[(50 * 200 + 199) * 3] / r.linear[(50 * 200 + 0) * 3]).toBeCloseTo((1 + (0.04 * 99.5) / 200) / (1 - (0.04 * 99.5) / 200), 6);
  });

  it('shifted set: the panel moves by the given fraction, exposure fixed', async () => {
    const set = await renderShiftedSet(small({ camera: { ...small().camera, yawDeg: 0, pitchDeg: 0, rollDeg: 0, fill: 0.5 } }), {
      n: 3,
      shifts: [
        [0, 0],
        [0.1, 0],
        [0, -0.1],
      ],
    });
    expect(set.length).toBe(3);
    const c = (k: number) => set[k].truth.corners[0];
    expect(c(1)[0] - c(0)[0]).toBeCloseTo(32, 6); // 0.1 x 320 px
    expect(c(2)[1] - c(0)[1]).toBeCloseTo(-24, 6); // -0.1 x 240 px
    expect(set[1].truth.exposure.gain).toBe(set[0].truth.exposure.gain);
    expect(set[2].truth.exposure.exif.exposureTimeS).toBe(set[0].truth.exposure.exif.exposureTimeS);
  });
});

/** area of the convex polygon `poly` inside the unit-ish square [x0,x1]x[y0,y1] (Sutherland-Hodgman clipping) */
function clippedArea(poly: [number, number][], x0: number, y0: number, x1: number, y1: number): number {
  let pts = poly;
  const clip = (inside: (p: [number, number]) => boolean, cut: (a: [number, number], b: [number, number]) => [number, number]) => {
    const out: [number, number][] = [];
    for (let i = 0; i < pts.length; i++) {
      const a = pts[i];
      const b = pts[(i + 1) % pts.length];
      if (inside(b)) {
        if (!inside(a)) out.push(cut(a, b));
        out.push(b);
      } else if (inside(a)) out.push(cut(a, b));
    }
    pts = out;
  };
  const atX = (x: number) => (a: [number, number], b: [number, number]): [number, number] => [x, a[1] + ((b[1] - a[1]) * (x - a[0])) / (b[0] - a[0])];
  const atY = (y: number) => (a: [number, number], b: [number, number]): [number, number] => [a[0] + ((b[0] - a[0]) * (y - a[1])) / (b[1] - a[1]), y];
  clip((p) => p[0] >= x0, atX(x0));
  if (pts.length) clip((p) => p[0] <= x1, atX(x1));
  if (pts.length) clip((p) => p[1] >= y0, atY(y0));
  if (pts.length) clip((p) => p[1] <= y1, atY(y1));
  return pts.length < 3 ? 0 : polyArea(pts);
}

describe('pixel coverage at the active-area edge', () => {
  it('each pixel value equals the exact area of the pixel square inside the projected panel', () => {
    const spec: PhotoSpec = {
      seed: 3,
      panel: { widthMm: 300, heightMm: 200, pattern: 'white', bezelMm: 5 },
      camera: { width: 200, height: 150, focal35: 30, yawDeg: -9, pitchDeg: 12, rollDeg: 4.2, fill: 0.7, cos4: false },
      noise: null,
      surround: { ambient: 0, spill: 0 },
      exposure: { gain: 1 },
    };
    const { image, truth } = renderPhotoPixels(spec);
    let worst = 0;
    let n = 0;
    for (let y = 0; y < 150; y++) {
      for (let x = 0; x < 200; x++) {
        // the panel's edges are straight lines in the image (homography), so the projected active area is
        // the quadrilateral of the corners; pixel (x, y) covers x-0.5..x+0.5, y-0.5..y+0.5
        const cover = clippedArea(truth.corners, x - 0.5, y - 0.5, x + 0.5, y + 0.5);
        if (cover < 1e-12 || cover > 1 - 1e-12) continue;
        const err = image.data[(y * 200 + x) * 3 + 1] / truth.exposure.gain - cover;
        worst = Math.max(worst, Math.abs(err));
        n++;
      }
    }
    expect(n).toBeGreaterThan(400); // about the perimeter in pixels
    // the renderer clips polygons too, but in its own code; float32 pixel storage limits the match to ~1e-7
    expect(worst).toBeLessThan(1e-6);
  });
});
