import { describe, expect, it } from 'vitest';
import {
  FULL_FRAME_DIAGONAL_MM,
  cos4AtRadius,
  cos4FocalFromExposure,
  cos4Transmission,
  fieldAngleDeg,
  focalPxFrom35mm,
} from '../../lib/falloff/index.js';
import { EvenfieldError } from '../../lib/errors.js';

const deg = Math.PI / 180;

describe('cos^4 falloff', () => {
  it('gives the worked values cos^4 30° = 0.5625 and cos^4 20° = 0.77973', () => {
    // cos 30° = sqrt(3)/2, so cos^4 30° = 9/16 = 0.5625 [field notes §4, computed]
    // cos^4 20° = 0.77973 [field notes §4, computed]
    // A 1-row image whose optical centre is pixel 0: pixel x sits at rho = x pixels.
    const rho = 100;
    for (const [angle, expected] of [
      [30, 0.5625],
      [20, 0.77973],
      [10, 0.9406],
      [40, 0.34436],
    ] as const) {
      const focalPx = rho / Math.tan(angle * deg);
      const T = cos4Transmission(rho + 1, 1, { focalPx }, 1, [0, 0]);
      expect(T.data[rho]).toBeCloseTo(expected, 4);
      expect(T.data[0]).toBe(1);
      expect(cos4AtRadius(rho, focalPx)).toBeCloseTo(expected, 5);
      expect(fieldAngleDeg(rho, focalPx)).toBeCloseTo(angle, 10);
    }
  });

  it('places the corner of a 28 mm-equivalent frame at 37.69°', () => {
    // The full-frame half-diagonal is 21.635 mm, so the corner field angle of a 28 mm lens is
    // atan(21.635 / 28) = 37.69° [computed]. A 3600 x 2400 image is the 36 x 24 mm frame at 100 px/mm.
    // 43.27 mm is the diagonal rounded to 0.01 mm; the exact value sqrt(36^2 + 24^2) = 43.2666 mm
    expect(FULL_FRAME_DIAGONAL_MM / 2).toBeCloseTo(21.635, 2);
    const f = focalPxFrom35mm(28, 3600, 2400);
    expect(f).toBeCloseTo(2800, 6);
    const halfDiagPx = Math.hypot(3600, 2400) / 2;
    expect(fieldAngleDeg(halfDiagPx, f)).toBeCloseTo(37.69, 2);
    // T at the outermost pixel centre equals cos^4 of that pixel's own field angle
    const T = cos4Transmission(450, 300, { focal35mm: 28, fullWidth: 3600, fullHeight: 2400 }, 8);
    // decoded pixel (0, 0) at scale 8 is the full-size point (3.5, 3.5); the centre is (1799.5, 1199.5)
    const rho = Math.hypot(1799.5 - 3.5, 1199.5 - 3.5);
    const expected = Math.cos(Math.atan(rho / 2800)) ** 4;
    expect(T.width).toBe(450);
    expect(T.height).toBe(300);
    expect(T.data[0]).toBeCloseTo(expected, 6);
    expect(T.data[0]).toBeLessThan(0.4);
    expect(T.data[0]).toBeGreaterThan(0.39);
  });

  it('agrees between decode scales: a 1/4-size plane matches 4x4 block means of the full plane', () => {
    const full = cos4Transmission(400, 300, { focalPx: 350 });
    const quarter = cos4Transmission(100, 75, { focalPx: 350 }, 4);
    let worst = 0;
    for (let y = 0; y < 75; y++) {
      for (let x = 0; x < 100; x++) {
        let s = 0;
        for (let j = 0; j < 4; j++) for (let i = 0; i < 4; i++) s += full.data[(4 * y + j) * 400 + 4 * x + i];
        worst = Math.max(worst, Math.abs(quarter.data[y * 100 + x] - s / 16));
      }
    }
    // block mean vs value at the block centre differ by the curvature term (b^2/24) T'', here < 2e-4
    expect(worst).toBeLessThan(2e-4);
  });

  it('refuses a photo without a 35 mm equivalent focal length', () => {
    expect(() => cos4FocalFromExposure(null, 4000, 3000)).toThrow(EvenfieldError);
    expect(() => cos4FocalFromExposure(null, 4000, 3000)).toThrow(/35 mm equivalent focal length/);
    expect(() => cos4Transmission(10, 10, { focalPx: 0 })).toThrow(/positive focal length/);
  });
});
