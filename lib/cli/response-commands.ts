// File-facing side of the camera response: measure it from an exposure bracket, write and read it.

import { existsSync } from 'node:fs';
import { basename } from 'node:path';
import sharp from 'sharp';
import { z } from 'zod';
import { EvenfieldError } from '../errors.js';
import { readExif, readInputFile, readTextFile, sha256OfBuffer, writeFileAtomic } from '../io/index.js';
import { decodePhotoBuffer } from '../io/decode.js';
import {
  bracketPoints,
  framePatches,
  responseId,
  solveResponse,
  srgbDecode,
  type ResponseCurve,
} from '../photometry/index.js';

export const RESPONSE_FORMAT = 'evenfield camera response';
export const RESPONSE_VERSION = 1;

/**
 * Limits of a usable bracket. The fit's rms is of ln-light residuals: a still scene and true exposure
 * times leave well under 1 % (photon noise on patch means); a moved camera, a changing scene, flicker or
 * exposure times that are not the times used leave more.
 */
export const BRACKET_LIMITS = {
  minPhotos: 3,
  /** the exposures must span at least this many stops (a factor of 4) */
  minSpanStops: 2,
  /** largest fit rms, % of linear light */
  maxFitRmsPct: 3,
  /** the measured codes must span at least this many code values */
  minCodeSpan: 128,
};

const photoSchema = z.object({
  file: z.string(),
  sha256: z.string(),
  exposureTimeS: z.number().positive().nullable(),
  fNumber: z.number().positive().nullable(),
  iso: z.number().positive().nullable(),
  relativeExposure: z.number().positive(),
});

const responseSchema = z.object({
  format: z.literal(RESPONSE_FORMAT),
  version: z.literal(RESPONSE_VERSION),
  madeBy: z.string(),
  createdAt: z.string().nullable(),
  camera: z.object({ make: z.string().nullable(), model: z.string().nullable(), lens: z.string().nullable() }),
  photos: z.array(photoSchema).min(2),
  measuredCodes: z.tuple([z.number().min(0).max(255), z.number().min(0).max(255)]),
  fitRmsPct: z.number().min(0),
  points: z.number().int().min(1),
  largestDifferenceFromSrgb: z.object({ pct: z.number(), code: z.number().int().min(0).max(255) }),
  linear: z.array(z.number().min(0).max(1)).length(256),
});

export type ResponseFile = z.infer<typeof responseSchema>;

/** A curve from a response file's table, checked: 256 values rising strictly to 1. */
export function curveFromTable(linear: number[], source: string): ResponseCurve {
  if (Math.abs(linear[255]! - 1) > 1e-6) throw new EvenfieldError('response', `${source}: the table must end at 1 (code 255), got ${linear[255]}`);
  for (let z = 1; z < 256; z++) {
    if (!(linear[z]! > linear[z - 1]!)) throw new EvenfieldError('response', `${source}: the table must rise at every code value (it does not at code ${z})`);
  }
  return { id: responseId(linear), linear };
}

export function loadResponse(path: string): ResponseCurve {
  const text = readTextFile(path, 'camera response file', 'response');
  let obj: unknown;
  try {
    obj = JSON.parse(text);
  } catch {
    throw new EvenfieldError('response', 'not JSON (a camera response made by "evenfield calibrate --bracket" is expected)', path);
  }
  if (typeof obj !== 'object' || obj === null || (obj as { format?: unknown }).format !== RESPONSE_FORMAT) {
    throw new EvenfieldError('response', `not an evenfield camera response (format must be "${RESPONSE_FORMAT}")`, path);
  }
  const parsed = responseSchema.safeParse(obj);
  if (!parsed.success) {
    const why = parsed.error.issues
      .slice(0, 4)
      .map((i) => `${i.path.length ? i.path.join('.') : '(top level)'}: ${i.message}`)
      .join('; ');
    throw new EvenfieldError('response', `not a valid camera response: ${why}`, path);
  }
  try {
    const curve = curveFromTable(parsed.data.linear, 'table');
    return {
      ...curve,
      camera: { make: parsed.data.camera.make, model: parsed.data.camera.model },
      measuredCodes: parsed.data.measuredCodes,
    };
  } catch (e) {
    throw new EvenfieldError('response', `not a valid camera response: ${(e as Error).message}`, path);
  }
}

/** Exposure time in seconds from "1/60", "0.5" or "2". */
export function parseExposureTime(s: string): number | null {
  const m = /^\s*(\d+(?:\.\d+)?)\s*(?:\/\s*(\d+(?:\.\d+)?))?\s*s?\s*$/.exec(s);
  if (!m) return null;
  const v = m[2] !== undefined ? Number(m[1]) / Number(m[2]) : Number(m[1]);
  return v > 0 && Number.isFinite(v) ? v : null;
}

// Shutter speeds as cameras label them: the times are set in exact thirds (or halves) of a stop, 2^(k/3)
// or 2^(k/2) seconds, and labelled with round numbers (1/60 for 1/64 s, 1/125 for 1/128 s), which is what
// EXIF ExposureTime usually holds (common practice). One stop of a bracket labelled 1/125 -> 1/60 is then
// a factor of 2.08 in the file but 2 in the camera: a bend of 4 % in the measured response.
const THIRD_STOP_LABELS = [
  1 / 8000, 1 / 6400, 1 / 5000, 1 / 4000, 1 / 3200, 1 / 2500, 1 / 2000, 1 / 1600, 1 / 1250, 1 / 1000, 1 / 800, 1 / 640, 1 / 500, 1 / 400,
  1 / 320, 1 / 250, 1 / 200, 1 / 160, 1 / 125, 1 / 100, 1 / 80, 1 / 60, 1 / 50, 1 / 40, 1 / 30, 1 / 25, 1 / 20, 1 / 15, 1 / 13, 1 / 10,
  1 / 8, 1 / 6, 1 / 5, 1 / 4, 0.3, 0.4, 0.5, 0.6, 0.8, 1, 1.3, 1.6, 2, 2.5, 3.2, 4, 5, 6, 8, 10, 13, 15, 20, 25, 30,
];
/** labels found only on the half-stop scale */
const HALF_STOP_ONLY_LABELS = [1 / 6000, 1 / 3000, 1 / 1500, 1 / 750, 1 / 350, 1 / 180, 1 / 90, 1 / 45, 0.7, 1.5, 3, 12];

function isLabel(t: number, labels: number[]): boolean {
  return labels.some((l) => Math.abs(t / l - 1) < 0.005);
}

/**
 * The exact times behind a bracket's shutter-speed labels: when every time is a camera label, each
 * becomes 2^(k/3) s (2^(k/2) s when any label is one of the half-stop scale only), k the nearest step;
 * otherwise null (the times are taken as written: a generator's or a camera's exact values).
 */
export function exactShutterTimes(times: number[]): number[] | null {
  const half = times.some((t) => isLabel(t, HALF_STOP_ONLY_LABELS));
  if (!times.every((t) => isLabel(t, THIRD_STOP_LABELS) || isLabel(t, HALF_STOP_ONLY_LABELS))) return null;
  const steps = half ? 2 : 3;
  return times.map((t) => 2 ** (Math.round(steps * Math.log2(t)) / steps));
}

export interface BracketReport {
  file: ResponseFile;
  lines: string[];
}

/**
 * Measure the response from photos of one still scene at several exposures (tripod; fixed aperture,
 * focus and white balance). Exposures come from EXIF (time × ISO / f-number²) or from `times`.
 */
export async function bracketToResponse(files: string[], times: number[] | null, createdAt: string | null, madeBy: string): Promise<BracketReport> {
  const L = BRACKET_LIMITS;
  if (files.length < L.minPhotos) {
    throw new EvenfieldError('usage', `give at least ${L.minPhotos} photos of one still scene at different exposures (got ${files.length})`);
  }
  if (times && times.length !== files.length) {
    throw new EvenfieldError('usage', `--times gives ${times.length} exposure times for ${files.length} photos`);
  }
  const patches: Float64Array[] = [];
  let size: { width: number; height: number } | null = null;
  const photos: ResponseFile['photos'] = [];
  let camera: ResponseFile['camera'] = { make: null, model: null, lens: null };
  const warnings: string[] = [];
  const notes: string[] = [];
  for (const [j, f] of files.entries()) {
    const buf = await readInputFile(f);
    // the header checks and the refusals of inspect (raw files, damaged data, pixel limit)
    const probe = await decodePhotoBuffer(buf, f, { scale: 8, jpegSamples: '8bit' });
    if (probe.info.bitDepth !== 8) throw new EvenfieldError('response', 'the bracket must be 8-bit photos (the response is of 8-bit code values)', f);
    if (size && (probe.info.width !== size.width || probe.info.height !== size.height)) {
      throw new EvenfieldError('response', `photo is ${probe.info.width}×${probe.info.height} but ${files[0]} is ${size.width}×${size.height}: one camera setting and framing for the whole bracket`, f);
    }
    size = { width: probe.info.width, height: probe.info.height };
    const raw = await sharp(buf, { limitInputPixels: false }).removeAlpha().toColourspace('srgb').raw().toBuffer({ resolveWithObject: true });
    if (raw.info.channels !== 3) throw new EvenfieldError('response', `decoded to ${raw.info.channels} channels, expected 3`, f);
    patches.push(framePatches({ width: raw.info.width, height: raw.info.height, data: new Uint8Array(raw.data.buffer, raw.data.byteOffset, raw.data.length) }));
    const e = (await readExif(buf)).exposure;
    if (j === 0) camera = { make: e.make, model: e.model, lens: e.lens };
    const t = times ? times[j]! : e.exposureTimeS;
    if (t === null) {
      throw new EvenfieldError('response', 'no exposure time in EXIF: give the times in the order of the photos with --times (e.g. --times 1/250 1/125 1/60)', f);
    }
    photos.push({ file: basename(f), sha256: sha256OfBuffer(buf), exposureTimeS: t, fNumber: e.fNumber, iso: e.iso, relativeExposure: 1 });
  }
  // EXIF holds the shutter's label (1/60), the camera exposed 2^-6 s: use the exact steps (not for --times)
  const exact = times ? null : exactShutterTimes(photos.map((p) => p.exposureTimeS!));
  if (exact) {
    photos.forEach((p, j) => (p.exposureTimeS = exact[j]!));
    notes.push('exposure times read as the camera\'s shutter-speed labels and taken as exact steps of a third (or half) stop (1/60 as 1/64 s); give --times to use other values');
  }
  // ISO and aperture scale the exposure when EXIF gives them (time alone otherwise)
  for (const p of photos) p.relativeExposure = (p.exposureTimeS! * (p.iso ?? 100)) / (p.fNumber ?? 1) ** 2;
  const fs = new Set(photos.map((p) => p.fNumber));
  if (fs.size > 1) warnings.push(`the f-number changes within the bracket (${[...fs].join(', ')}): vignetting changes with it, so vary the exposure time instead`);
  const lnX = photos.map((p) => Math.log(p.relativeExposure));
  const spanStops = (Math.max(...lnX) - Math.min(...lnX)) / Math.LN2;
  if (spanStops < L.minSpanStops) {
    throw new EvenfieldError('response', `the exposures span ${spanStops.toFixed(1)} stops; a bracket needs ${L.minSpanStops} or more (e.g. five photos one stop apart)`, files[0]);
  }
  const points = bracketPoints(patches);
  let sol;
  try {
    sol = solveResponse(points, lnX);
  } catch (e) {
    throw new EvenfieldError('response', `no usable points: ${(e as Error).message} (is the scene smooth somewhere, and not clipped in every photo?)`, files[0]);
  }
  const [lo, hi] = sol.codeRange;
  if (!sol.monotonic) {
    throw new EvenfieldError('response', 'the fitted response does not rise with the light: the exposure times do not match the photos (or the scene changed)', files[0]);
  }
  if (sol.fitRmsPct > L.maxFitRmsPct) {
    throw new EvenfieldError(
      'response',
      `the photos do not fit one response (${sol.fitRmsPct.toFixed(1)} % rms, limit ${L.maxFitRmsPct} %): the camera or the scene moved, the light changed or flickered, or the exposure times are not the times used`,
      files[0],
    );
  }
  if (hi - lo < L.minCodeSpan) {
    throw new EvenfieldError('response', `the bracket reaches only codes ${lo.toFixed(0)}–${hi.toFixed(0)}: widen it until the brightest photo nears white and the darkest nears black`, files[0]);
  }
  // how far the camera's curve is from the sRGB curve the files claim, over the measured codes
  let worst = 0;
  let worstCode = 128;
  for (let z = Math.ceil(lo); z <= Math.floor(hi); z++) {
    const d = 100 * (sol.curve.linear[z]! / srgbDecode(z / 255) - 1);
    if (Math.abs(d) > Math.abs(worst)) {
      worst = d;
      worstCode = z;
    }
  }
  const file: ResponseFile = {
    format: RESPONSE_FORMAT,
    version: RESPONSE_VERSION,
    madeBy,
    createdAt,
    camera,
    photos,
    measuredCodes: [Math.round(lo * 10) / 10, Math.round(hi * 10) / 10],
    fitRmsPct: Math.round(sol.fitRmsPct * 1000) / 1000,
    points: sol.points,
    largestDifferenceFromSrgb: { pct: Math.round(worst * 100) / 100, code: worstCode },
    linear: sol.curve.linear.map((v) => Number(v.toPrecision(7))),
  };
  file.linear[255] = 1;
  const lines = [
    `photos: ${files.length} (${size!.width}×${size!.height}), exposures spanning ${spanStops.toFixed(1)} stops`,
    `response measured between codes ${lo.toFixed(0)} and ${hi.toFixed(0)} from ${sol.points} points; fit ${sol.fitRmsPct.toFixed(2)} % rms`,
    `largest difference from the sRGB curve there: ${worst >= 0 ? '+' : ''}${worst.toFixed(1)} % of linear light at code ${worstCode}`,
    ...notes.map((w) => `note: ${w}`),
    ...warnings.map((w) => `warning: ${w}`),
  ];
  return { file, lines };
}

export async function bracketCommand(
  photos: string[],
  out: string,
  opts: { force: boolean; times: string[] | null; madeBy: string; createdAt: string | null },
): Promise<number> {
  if (existsSync(out) && !opts.force) throw new EvenfieldError('output', 'already exists: add --force to replace it', out);
  let times: number[] | null = null;
  if (opts.times) {
    times = opts.times.map((s) => {
      const t = parseExposureTime(s);
      if (t === null) throw new EvenfieldError('usage', `--times: "${s}" is not an exposure time (e.g. 1/60 or 0.5)`);
      return t;
    });
  }
  const rep = await bracketToResponse(photos, times, opts.createdAt, opts.madeBy);
  // the table must read back as written
  curveFromTable(rep.file.linear, out);
  await writeFileAtomic(out, JSON.stringify(rep.file, null, 2) + '\n');
  for (const l of rep.lines) process.stderr.write(`${l}\n`);
  process.stderr.write(`camera response written to ${out}\n`);
  return 0;
}
