import { describe, expect, it } from 'vitest';
import { calibrateFromFlats, channelTransmissionFromProfile, profileFromJson, profileToJson, transmissionFromProfile } from '../../lib/falloff/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import type { ExposureRecord, RgbImage } from '../../lib/types.js';
import { boxDownsample, maxRelativeError, synthFlat, trueT } from './synth.js';
import type { LensSpec } from './synth.js';

// Truth: the cos^4 law (field notes §4) times an even radial polynomial, written independently in
// synth.ts. Every check normalises at the image centre, because T is only defined up to a constant.

const W = 360;
const H = 270;
const exif: ExposureRecord = {
  make: 'Acme',
  model: 'Phone 9',
  lens: null,
  exposureTimeS: 0.01,
  fNumber: 1.8,
  iso: 50,
  focalLengthMm: 4.2,
  focalLength35mm: 26,
  dateTime: null,
};

function frames(lens: LensSpec, gradient: [number, number], n: number, noise = 0.01): RgbImage[] {
  return Array.from({ length: n }, (_, k) => synthFlat({ width: W, height: H, lens, gradient, noise, seed: 11 + k }));
}

describe('calibration from flat frames', () => {
  it('recovers cos^4 (24 mm) + radial term + decentred lens under a tilted source within 0.3 %', () => {
    const lens: LensSpec = { focal35: 24, k1: -0.08, k2: 0.04, offsetPx: [9, -6] };
    const cal = calibrateFromFlats(frames(lens, [0.03, -0.02], 3), { exposure: exif });
    const T = transmissionFromProfile(cal.profile, W, H, 1);
    const err = maxRelativeError(T, (x, y) => trueT(lens, W, H, x, y));
    expect(err).toBeLessThan(0.003);
    // the corners lost about 70 % of the light
    expect(cal.profile.fit.cornerTransmission).toBeGreaterThan(0.25);
    expect(cal.profile.fit.cornerTransmission).toBeLessThan(0.35);
    // the source tilt was found and reported: +3 % left to right, -2 % top to bottom
    expect(cal.profile.fit.removedTiltPct!.x).toBeCloseTo(3.0, 0);
    expect(cal.profile.fit.removedTiltPct!.y).toBeCloseTo(-2.0, 0);
    // the optical centre (normalised: offset / half size) was found
    expect(cal.profile.model.centre[0]).toBeCloseTo(9 / 180, 2);
    expect(cal.profile.model.centre[1]).toBeCloseTo(-6 / 135, 2);
    // residual ~ the per-block noise: 1 % per pixel value / sqrt(3 frames x 16 px x ~2 channels)
    expect(cal.profile.fit.residualRmsPct).toBeLessThan(0.2);
    expect(cal.frameNoisePct).toBeCloseTo(1, 1);
    expect(cal.profile.camera.focal35mm).toBe(26);
    expect(cal.profile.camera.imageWidth).toBe(W);
    // what is written can be read back
    expect(profileFromJson(profileToJson(cal.profile))).toEqual(cal.profile);
  });

  it('recovers a pure cos^4 28 mm lens from a single frame within 0.3 %', () => {
    const lens: LensSpec = { focal35: 28 };
    const cal = calibrateFromFlats(frames(lens, [0, 0], 1));
    const T = transmissionFromProfile(cal.profile, W, H, 1);
    expect(maxRelativeError(T, (x, y) => trueT(lens, W, H, x, y))).toBeLessThan(0.003);
    expect(cal.warnings.join('\n')).toMatch(/no per-pixel outlier rejection/);
    expect(cal.warnings.join('\n')).toMatch(/no EXIF/);
    // cos^4 of the corner field angle for a 28 mm lens, atan(21.635/28) = 37.69° -> 0.392 [computed]
    expect(cal.profile.fit.cornerTransmission).toBeCloseTo(Math.cos(Math.atan(21.633 / 28)) ** 4, 2);
  });

  it('works from frames decoded at 1/4 scale and the profile applies at full size', () => {
    const lens: LensSpec = { focal35: 26, k1: 0.05 };
    const full = frames(lens, [0.02, 0.01], 3, 0.02);
    const small = full.map((f) => boxDownsample(f, 4));
    const cal = calibrateFromFlats(small, { scale: 4, fullWidth: W, fullHeight: H });
    expect(cal.profile.camera.imageWidth).toBe(W);
    const T = transmissionFromProfile(cal.profile, W, H, 1);
    expect(maxRelativeError(T, (x, y) => trueT(lens, W, H, x, y))).toBeLessThan(0.003);
  });

  it('drops a reflection that is in one frame only', () => {
    const lens: LensSpec = { focal35: 26 };
    const fr = frames(lens, [0, 0], 3);
    // a bright 30 px disc (+25 %) near a corner in frame 2
    const f = fr[1];
    for (let y = 0; y < H; y++) {
      for (let x = 0; x < W; x++) {
        if ((x - 300) ** 2 + (y - 60) ** 2 < 15 * 15) for (let c = 0; c < 3; c++) f.data[(y * W + x) * 3 + c] *= 1.25;
      }
    }
    const cal = calibrateFromFlats(fr);
    expect(cal.rejectedPixelFraction).toBeGreaterThan(0.002);
    const T = transmissionFromProfile(cal.profile, W, H, 1);
    expect(maxRelativeError(T, (x, y) => trueT(lens, W, H, x, y))).toBeLessThan(0.003);
  });

  it('stores per-channel models when the channels shade differently', () => {
    const lens: LensSpec = { focal35: 26, colourRadial: [-0.05, 0.04] };
    const cal = calibrateFromFlats(frames(lens, [0, 0], 3));
    expect(cal.profile.model.channels).not.toBeNull();
    const T = channelTransmissionFromProfile(cal.profile, W, H, 1);
    if (!('r' in T)) throw new Error('expected per-channel transmission');
    const half2 = (W * W + H * H) / 4;
    const gain = (c: number, x: number, y: number) =>
      1 + (c === 0 ? -0.05 : c === 2 ? 0.04 : 0) * (((x - (W - 1) / 2) ** 2 + (y - (H - 1) / 2) ** 2) / half2);
    [T.r, T.g, T.b].forEach((pl, c) => {
      expect(maxRelativeError(pl, (x, y) => trueT(lens, W, H, x, y) * gain(c, x, y))).toBeLessThan(0.003);
    });
    // a lens with no colour shading gets no channel models
    expect(calibrateFromFlats(frames({ focal35: 26 }, [0, 0], 2)).profile.model.channels).toBeNull();
  });

  it('tells a lens ramp from a source tilt with frames rolled 180°', () => {
    // A ramp in the lens shading and a ramp across the source look the same in one orientation: the
    // fit takes it for source tilt and removes it (error > 1 %). Rolling the camera 180° reverses the
    // source ramp in camera coordinates but not the lens's, so with both orientations they separate.
    const lens: LensSpec = { focal35: 26, lensTilt: 0.015 };
    const upright = frames(lens, [0.03, 0], 2);
    const rolled = [0, 1].map((k) => synthFlat({ width: W, height: H, lens, gradient: [-0.03, 0], noise: 0.01, seed: 40 + k }));
    const truth = (x: number, y: number) => trueT(lens, W, H, x, y);
    const one = calibrateFromFlats(upright);
    expect(maxRelativeError(transmissionFromProfile(one.profile, W, H, 1), truth)).toBeGreaterThan(0.01);
    const both = calibrateFromFlats([...upright, ...rolled], { orientations: [0, 0, 180, 180] });
    expect(maxRelativeError(transmissionFromProfile(both.profile, W, H, 1), truth)).toBeLessThan(0.003);
    expect(both.profile.fit.removedTiltPct!.x).toBeCloseTo(3.0, 0);
  });

  it('names the frame of the wrong size', () => {
    const a = synthFlat({ width: 40, height: 30, lens: { focal35: 26 }, seed: 1 });
    const b = synthFlat({ width: 30, height: 40, lens: { focal35: 26 }, seed: 2 });
    let err: unknown;
    try {
      calibrateFromFlats([a, a, b], { names: ['f1.jpg', 'f2.jpg', 'f3.jpg'] });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(EvenfieldError);
    expect((err as EvenfieldError).code).toBe('falloff');
    expect((err as EvenfieldError).file).toBe('f3.jpg');
    expect((err as Error).message).toMatch(/f3\.jpg is 30×40 but f1\.jpg is 40×30/);
  });

  it('refuses frames that do not fit one smooth falloff, and names a frame unlike the others', () => {
    // a photo of a panel among flat frames: a lit rectangle on a dark surround (10 % of the level)
    const lens: LensSpec = { focal35: 26 };
    const panelPhoto = (): RgbImage => {
      const f = frames(lens, [0, 0], 1, 0.01)[0];
      for (let y = 0; y < H; y++) {
        for (let x = 0; x < W; x++) {
          if (x < 60 || x > 300 || y < 50 || y > 220) for (let c = 0; c < 3; c++) f.data[(y * W + x) * 3 + c] *= 0.1;
        }
      }
      return f;
    };
    // one flat and the panel photo: a lens falloff cannot explain the step (flat frames leave well under
    // 1 % rms, common practice), and with two frames none can be told as the odd one
    const two = [frames(lens, [0, 0], 1)[0], panelPhoto()];
    expect(() => calibrateFromFlats(two, { names: ['flat.jpg', 'panel.jpg'] })).toThrow(/do not fit one smooth lens falloff: the fit leaves [0-9.]+ % rms/);
    // three flats and the panel photo: the per-pixel rejection across frames keeps the profile right
    // (within the 0.3 % of the tests above), and the odd frame is named
    const four = [...frames(lens, [0, 0], 3), panelPhoto()];
    const cal = calibrateFromFlats(four, { names: ['f1.jpg', 'f2.jpg', 'f3.jpg', 'panel.jpg'] });
    expect(cal.warnings.join('\n')).toMatch(/unlike the other flat frames: panel\.jpg \(/);
    const T = transmissionFromProfile(cal.profile, W, H, 1);
    expect(maxRelativeError(T, (x, y) => trueT(lens, W, H, x, y))).toBeLessThan(0.003);
    // good frames only: nothing named
    expect(calibrateFromFlats(frames(lens, [0, 0], 3)).warnings.join('\n')).not.toMatch(/unlike the other/);
  });

  it('refuses black, clipped or inconsistent input', () => {
    const black = { width: 64, height: 48, data: new Float32Array(64 * 48 * 3) };
    expect(() => calibrateFromFlats([black])).toThrow(/black/);
    const clipped = { width: 64, height: 48, data: new Float32Array(64 * 48 * 3).fill(1) };
    expect(() => calibrateFromFlats([clipped])).toThrow(/usable blocks/);
    const ok = synthFlat({ width: 64, height: 48, lens: { focal35: 26 }, seed: 3 });
    expect(() => calibrateFromFlats([ok], { scale: 4, fullWidth: 4000, fullHeight: 3000 })).toThrow(/does not match a full size/);
    expect(() => calibrateFromFlats([])).toThrow(/no flat frames/);
  });
});
