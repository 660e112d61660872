// Natural (cos^4) falloff of an ideal lens.
//
// A point imaged at distance rho from the optical centre on the sensor is seen at field angle theta
// with tan(theta) = rho / f, and receives cos^4(theta) of the on-axis irradiance: one cos from the
// foreshortened entrance pupil, cos^3 from the oblique projection onto the flat sensor
// (the "cos-fourth law"). Writing cos^2 = 1 / (1 + tan^2):
//
//   T = cos^4(theta) = 1 / (1 + (rho / f)^2)^2
//
// The 35 mm equivalent focal length is defined on the 43.27 mm diagonal of the 36 x 24 mm frame, so
// in pixels f_px = f35 / 43.27 * (image diagonal in pixels).

import { EvenfieldError } from '../errors.js';
import type { ExposureRecord, Plane, Point } from '../types.js';

/** Diagonal of the 36 x 24 mm full frame, mm (sqrt(36^2 + 24^2) = 43.267). */
export const FULL_FRAME_DIAGONAL_MM = Math.hypot(36, 24);

export type Cos4Focal = { focalPx: number } | { focal35mm: number; fullWidth: number; fullHeight: number };

/** Focal length in full-size pixels from the 35 mm equivalent focal length and the full image size. */
export function focalPxFrom35mm(focal35mm: number, fullWidth: number, fullHeight: number): number {
  return (focal35mm / FULL_FRAME_DIAGONAL_MM) * Math.hypot(fullWidth, fullHeight);
}

/** cos^4 of the field angle for a point rho pixels from the optical centre. */
export function cos4AtRadius(rhoPx: number, focalPx: number): number {
  const q = rhoPx / focalPx;
  const c2 = 1 / (1 + q * q);
  return c2 * c2;
}

/** Field angle in degrees of a point rho pixels from the optical centre. */
export function fieldAngleDeg(rhoPx: number, focalPx: number): number {
  return (Math.atan(rhoPx / focalPx) * 180) / Math.PI;
}

/**
 * Plane of cos^4 transmission (1 at the optical centre) for an image decoded at width x height at
 * decode scale `scale` (full-size pixel x maps to (x + 0.5)/scale - 0.5). focalPx is in full-size
 * pixels. `centre` is the optical centre in full-size pixel coordinates (default: the image centre).
 */
export function cos4Transmission(
  width: number,
  height: number,
  opts: Cos4Focal,
  scale = 1,
  centre?: Point,
): Plane {
  let fullW: number;
  let fullH: number;
  let focalPx: number;
  if ('focalPx' in opts) {
    fullW = width * scale;
    fullH = height * scale;
    focalPx = opts.focalPx;
  } else {
    fullW = opts.fullWidth;
    fullH = opts.fullHeight;
    focalPx = focalPxFrom35mm(opts.focal35mm, fullW, fullH);
  }
  if (!(focalPx > 0) || !Number.isFinite(focalPx)) {
    throw new EvenfieldError('falloff', `cos4 falloff needs a positive focal length, got ${focalPx}`);
  }
  const cx = centre ? centre[0] : (fullW - 1) / 2;
  const cy = centre ? centre[1] : (fullH - 1) / 2;
  const inv = 1 / focalPx;
  const qx2 = new Float64Array(width);
  for (let x = 0; x < width; x++) {
    const q = ((x + 0.5) * scale - 0.5 - cx) * inv;
    qx2[x] = q * q;
  }
  const out = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    const q = ((y + 0.5) * scale - 0.5 - cy) * inv;
    const qy2 = q * q;
    const row = y * width;
    for (let x = 0; x < width; x++) {
      const c2 = 1 / (1 + qx2[x] + qy2);
      out[row + x] = c2 * c2;
    }
  }
  return { width, height, data: out };
}

/**
 * The cos^4 focal parameters of a photo from its EXIF: the 35 mm equivalent focal length. Throws
 * EvenfieldError('falloff') when the EXIF does not carry it.
 */
export function cos4FocalFromExposure(exposure: ExposureRecord | null, fullWidth: number, fullHeight: number): Cos4Focal {
  const f35 = exposure?.focalLength35mm ?? null;
  if (f35 === null || !(f35 > 0)) {
    throw new EvenfieldError(
      'falloff',
      'the cos4 falloff model needs the 35 mm equivalent focal length, which this photo\'s EXIF does not record; ' +
        'give it explicitly or use a calibrated falloff profile',
    );
  }
  return { focal35mm: f35, fullWidth, fullHeight };
}
