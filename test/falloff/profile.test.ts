import { describe, expect, it } from 'vitest';
import {
  PROFILE_FORMAT,
  applyTransmission,
  applyTransmissionWithLuminance,
  channelTransmissionFromProfile,
  legendreInto,
  profileFromJson,
  profileMismatch,
  profileToJson,
  transmissionFromProfile,
} from '../../lib/falloff/index.js';
import type { FalloffProfile } from '../../lib/falloff/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import { luminancePlane } from '../../lib/photometry/index.js';
import { makeProfile } from './profiles.js';
import type { ExposureRecord } from '../../lib/types.js';

const exif: ExposureRecord = {
  make: 'Acme',
  model: 'Phone 9',
  lens: 'main camera 4.2mm f/1.8',
  exposureTimeS: 0.01,
  fNumber: 1.8,
  iso: 100,
  focalLengthMm: 4.2,
  focalLength35mm: 26,
  dateTime: null,
};

describe('Legendre basis', () => {
  it('matches the closed forms P2 = (3x²-1)/2, P3 = (5x³-3x)/2, P4 = (35x⁴-30x²+3)/8', () => {
    // closed forms [Abramowitz & Stegun ch. 22, table of Legendre polynomials; table number from memory]
    const out = new Float64Array(5);
    for (const x of [-1, -0.3, 0, 0.45, 1]) {
      legendreInto(x, 4, out);
      expect(out[2]).toBeCloseTo((3 * x * x - 1) / 2, 14);
      expect(out[3]).toBeCloseTo((5 * x ** 3 - 3 * x) / 2, 14);
      expect(out[4]).toBeCloseTo((35 * x ** 4 - 30 * x * x + 3) / 8, 14);
    }
  });
});

describe('profile evaluation', () => {
  it('evaluates the radial form 1 + k1 r² + k2 r⁴ with r = 1 at the farthest corner', () => {
    // DNG FixVignetteRadial convention: r is the distance from the centre over the distance to the
    // farthest image corner [DNG 1.3 opcode list, via field notes §4]. Checked pixel by pixel.
    const p = makeProfile();
    const T = transmissionFromProfile(p, 400, 300, 1);
    const cx = 199.5;
    const cy = 149.5;
    const rmax = Math.hypot(200, 150); // centre to the outer corner of the corner pixel
    for (const [x, y] of [
      [0, 0],
      [399, 299],
      [200, 150],
      [57, 231],
    ]) {
      const r2 = ((x - cx) ** 2 + (y - cy) ** 2) / rmax ** 2;
      expect(T.data[y * 400 + x]).toBeCloseTo(1 - 0.5 * r2 + 0.1 * r2 * r2, 6);
    }
  });

  it('evaluates the same model at any decode scale', () => {
    const p = makeProfile({ surfaceOrder: 2, surface: [[2, 0, 0.03], [1, 1, -0.02]] });
    const full = transmissionFromProfile(p, 400, 300, 1);
    const half = transmissionFromProfile(p, 200, 150, 2);
    // decoded (x, y) at scale 2 is the full-size point (2x + 0.5, 2y + 0.5): the mean of 4 pixels
    let worst = 0;
    for (let y = 0; y < 150; y++) {
      for (let x = 0; x < 200; x++) {
        const m =
          (full.data[2 * y * 400 + 2 * x] +
            full.data[2 * y * 400 + 2 * x + 1] +
            full.data[(2 * y + 1) * 400 + 2 * x] +
            full.data[(2 * y + 1) * 400 + 2 * x + 1]) /
          4;
        worst = Math.max(worst, Math.abs(half.data[y * 200 + x] - m));
      }
    }
    expect(worst).toBeLessThan(1e-5);
  });

  it('is 1 at the optical centre, including the surface and channel terms', () => {
    const p = makeProfile({
      centre: [0.1, -0.2],
      surfaceOrder: 3,
      surface: [[2, 0, 0.05], [0, 3, 0.02]],
      channels: { r: [[2, 0, 0.01]], g: [], b: [[1, 1, -0.01]] },
    });
    // the optical centre at normalised (0.1, -0.2) is the full-size point (219.5, 119.5) of a 400x300
    // image (u = (x + 0.5) / 200 - 1), i.e. the middle of pixels 219..220 x 119..120
    const T = channelTransmissionFromProfile(p, 400, 300, 1);
    if (!('r' in T)) throw new Error('expected per-channel planes');
    // mean of the four pixels around it (the model is smooth: the curvature error is < 1e-5)
    const at = (pl: { data: Float32Array }) => {
      const x0 = 219;
      const y0 = 119;
      let s = 0;
      for (const [dx, dy] of [
        [0, 0],
        [1, 0],
        [0, 1],
        [1, 1],
      ]) s += pl.data[(y0 + dy) * 400 + x0 + dx];
      return s / 4;
    };
    for (const pl of [T.r, T.g, T.b]) expect(at(pl)).toBeCloseTo(1, 4);
  });

  it('refuses a photo of another aspect ratio and undoes a transmission exactly', () => {
    const p = makeProfile();
    expect(() => transmissionFromProfile(p, 300, 300, 1)).toThrow(EvenfieldError);
    expect(() => transmissionFromProfile(p, 300, 400, 1)).toThrow(/rotated/);
    const T = transmissionFromProfile(p, 40, 30, 10);
    const img = { width: 40, height: 30, data: new Float32Array(40 * 30 * 3) };
    for (let i = 0; i < 40 * 30; i++) for (let c = 0; c < 3; c++) img.data[i * 3 + c] = 0.5 * T.data[i];
    applyTransmission(img, T);
    for (const v of img.data) expect(v).toBeCloseTo(0.5, 6);
    expect(() => applyTransmission({ width: 10, height: 10, data: new Float32Array(300) }, T)).toThrow(/transmission is 40×30/);
  });

  it('corrects and makes the luminance in one pass: the same bits as applyTransmission then luminancePlane', () => {
    const T = channelTransmissionFromProfile(makeProfile(), 40, 30, 10);
    const img = { width: 40, height: 30, data: new Float32Array(40 * 30 * 3) };
    for (let i = 0; i < img.data.length; i++) img.data[i] = 0.05 + ((i * 7919) % 1000) / 1100;
    const ref = { ...img, data: img.data.slice() };
    const clampedRef = applyTransmission(ref, T, { floor: 0.9 });
    const out = applyTransmissionWithLuminance(img, T, { floor: 0.9 });
    expect(out.clamped).toBe(clampedRef);
    expect(Buffer.from(img.data.buffer).equals(Buffer.from(ref.data.buffer))).toBe(true);
    expect(Buffer.from(out.luminance.data.buffer).equals(Buffer.from(luminancePlane(ref).data.buffer))).toBe(true);
  });
});

describe('profile JSON', () => {
  it('round-trips', () => {
    const p = makeProfile({ surfaceOrder: 2, surface: [[2, 0, 0.03]] });
    const back = profileFromJson(profileToJson(p), 'lens.json');
    expect(back).toEqual(p);
  });

  it('says what is wrong with a bad profile', () => {
    expect(() => profileFromJson('{not json', 'lens.json')).toThrow(/lens.json is not valid JSON/);
    expect(() => profileFromJson({ hello: 1 }, 'lens.json')).toThrow(/not an evenfield falloff profile/);
    const noRadial = JSON.parse(profileToJson(makeProfile())) as Record<string, unknown>;
    (noRadial.model as Record<string, unknown>).radial = 'x';
    expect(() => profileFromJson(noRadial, 'lens.json')).toThrow(/model\.radial/);
    const badWidth = JSON.parse(profileToJson(makeProfile()));
    badWidth.camera.imageWidth = -3;
    expect(() => profileFromJson(badWidth, 'lens.json')).toThrow(/camera\.imageWidth/);
    // a radial polynomial that goes negative inside the image is not a transmission
    expect(() => profileFromJson(JSON.parse(profileToJson(makeProfile())), 'ok.json')).not.toThrow();
    const negative = JSON.parse(profileToJson(makeProfile()));
    negative.model.radial = [-1.5];
    expect(() => profileFromJson(negative, 'lens.json')).toThrow(/transmission ranges/);
    const badTerm = JSON.parse(profileToJson(makeProfile()));
    badTerm.model.surface = [[3, 0, 0.1]];
    expect(() => profileFromJson(badTerm, 'lens.json')).toThrow(/outside orders/);
    try {
      profileFromJson('{', 'lens.json');
    } catch (e) {
      expect((e as EvenfieldError).code).toBe('falloff');
    }
  });
});

describe('profile vs photo', () => {
  it('accepts the matching photo', () => {
    expect(profileMismatch(makeProfile(), exif, 400, 300)).toEqual({ severity: 'ok', errors: [], warnings: [] });
  });

  it('rejects another focal length', () => {
    const m = profileMismatch(makeProfile(), { ...exif, focalLengthMm: 6.0, focalLength35mm: 37 }, 400, 300);
    expect(m.severity).toBe('error');
    expect(m.errors[0]).toMatch(/focal length of 4.2 mm .* 6 mm/);
    // within the 5 % tolerance (EXIF rounding) it is fine
    expect(profileMismatch(makeProfile(), { ...exif, focalLengthMm: 4.3 }, 400, 300).severity).toBe('ok');
    // the 35 mm equivalent is used when the real focal length is missing
    const m35 = profileMismatch(makeProfile(), { ...exif, focalLengthMm: null, focalLength35mm: 52 }, 400, 300);
    expect(m35.errors[0]).toMatch(/35 mm equivalent/);
  });

  it('warns about another camera, lens, aperture or resolution, and errors on another aspect', () => {
    const m = profileMismatch(makeProfile(), { ...exif, model: 'Phone 10', fNumber: 2.8, lens: 'tele' }, 800, 600);
    expect(m.severity).toBe('warning');
    expect(m.warnings.join('\n')).toMatch(/Acme Phone 9, photo was taken with Acme Phone 10/);
    expect(m.warnings.join('\n')).toMatch(/f\/1\.8, photo at f\/2\.8/);
    expect(m.warnings.join('\n')).toMatch(/lens "main camera/);
    expect(m.warnings.join('\n')).toMatch(/profile rescaled/);
    const rot = profileMismatch(makeProfile(), exif, 300, 400);
    expect(rot.severity).toBe('error');
    expect(rot.errors[0]).toMatch(/rotated 90°/);
    const none = profileMismatch(makeProfile(), null, 400, 300);
    expect(none.severity).toBe('warning');
    expect(none.warnings.join('\n')).toMatch(/cannot confirm/);
  });
});
