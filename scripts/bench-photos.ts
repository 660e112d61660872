// The benchmark's photo set: 12- and 24-megapixel JPEGs of one panel (white, gray 50 %, black) with a
// few mura features, taken by a camera with lens falloff, plus flat frames of the same camera and the
// falloff profile made from them. Generated once with the ground-truth generator and cached under
// .cache/bench (git-ignored); a changed SET_VERSION regenerates it.

import { existsSync, mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fitInFrame, renderFlatFrame, renderPhoto } from '../fixtures/generator/index.js';
import type { CameraSpec, FeatureSpec, PhotoSpec } from '../fixtures/generator/index.js';
import { flatFramesToProfile } from '../lib/cli/falloff-commands.js';
import { profileToJson } from '../lib/falloff/index.js';
import type { Pattern } from '../lib/types.js';

const SET_VERSION = 2;
const WIDTH_MM = 597.9;
const HEIGHT_MM = 336.3;

export interface BenchPhoto {
  file: string;
  panel: string;
  token: string;
  pattern: Pattern;
  level: number | null;
}

export interface BenchSize {
  label: string;
  width: number;
  height: number;
  photos: BenchPhoto[];
  /** falloff profile JSON made from this camera's flat frames */
  profile: string;
  flats: string[];
}

export interface BenchSet {
  dir: string;
  panelSizeMm: { width: number; height: number };
  sizes: BenchSize[];
}

const SIZES = [
  { label: '12MP', width: 4000, height: 3000 },
  { label: '24MP', width: 6000, height: 4000 },
];

const PATTERNS: { token: string; pattern: Pattern; level: number | null; iso: number; exposure: { whiteCentre?: number; patternCentre?: number } }[] = [
  { token: 'white', pattern: 'white', level: null, iso: 100, exposure: { whiteCentre: 0.75 } },
  { token: 'gray50', pattern: 'gray', level: 50, iso: 100, exposure: { whiteCentre: 0.75 } },
  { token: 'black', pattern: 'black', level: null, iso: 800, exposure: { patternCentre: 0.25 } },
];

const FEATURES: FeatureSpec[] = [
  { kind: 'spot', u: 0.71, v: 0.33, sizeMm: 10, contrastPct: 4 },
  { kind: 'cloud', u: 0.35, v: 0.6, sizeMm: 140, contrastPct: -2.5, seed: 17, patterns: ['white', 'gray'] },
  { kind: 'band', axis: 'vertical', position: 0.58, widthMm: 20, contrastPct: -1.5, patterns: ['white', 'gray'] },
  { kind: 'cloud', u: 0.55, v: 0.45, sizeMm: 150, contrastPct: 1.2, seed: 5, patterns: ['black'] },
];

function cameraFor(width: number, height: number): CameraSpec {
  return {
    width,
    height,
    focal35: 105,
    cropFactor: 1.5,
    k1: 0.3,
    k2: 0.1,
    make: 'Benchcam',
    model: `BC-${Math.round((width * height) / 1e6)} (synthetic)`,
    lens: '70 mm f/2.8 (105 mm equivalent)',
  };
}

function read(path: string): BenchSet | null {
  try {
    const rec = JSON.parse(readFileSync(path, 'utf8')) as { version: number; set: BenchSet };
    if (rec.version !== SET_VERSION) return null;
    const files = rec.set.sizes.flatMap((s) => [s.profile, ...s.flats, ...s.photos.map((p) => p.file)]);
    return files.every((f) => existsSync(f)) ? rec.set : null;
  } catch {
    return null;
  }
}

/** The cached photo set, generated first if missing or stale. */
export async function ensureBenchPhotos(root: string, log: (s: string) => void): Promise<BenchSet> {
  const index = join(root, 'photos.json');
  const cached = read(index);
  if (cached) return cached;
  const dir = join(root, 'photos');
  rmSync(dir, { recursive: true, force: true });
  mkdirSync(dir, { recursive: true });
  const set: BenchSet = { dir, panelSizeMm: { width: WIDTH_MM, height: HEIGHT_MM }, sizes: [] };
  for (const [k, size] of SIZES.entries()) {
    const camera: CameraSpec = { ...cameraFor(size.width, size.height), yawDeg: 3, pitchDeg: -2, rollDeg: 1.2, fill: 0.8, shift: [0.01, -0.01] };
    const panel = `B${size.label}-0001`;
    const photos: BenchPhoto[] = [];
    for (const [j, p] of PATTERNS.entries()) {
      const t0 = performance.now();
      const spec: PhotoSpec = {
        seed: 7000 + 10 * k + j,
        panel: {
          id: panel,
          widthMm: WIDTH_MM,
          heightMm: HEIGHT_MM,
          bezelMm: 9,
          pattern: p.pattern,
          level: p.level === null ? undefined : p.level / 100,
          luminance: [
            { kind: 'radial', loss: 0.15, power: 2 },
            { kind: 'linear', gx: 0.02, gy: -0.01 },
          ],
          colour: { r: { x: 0.004 }, b: { y: -0.004 } },
          features: FEATURES,
        },
        camera: { ...camera },
        exposure: { ...p.exposure, fNumber: 4, iso: p.iso },
        noise: { fullWell: (20000 * 100) / p.iso, readNoise: 3 },
        output: { format: 'jpeg', quality: 92 },
        surround: { ambient: 0.001, spill: 0.1 },
      };
      fitInFrame(spec, 0.03);
      const res = await renderPhoto(spec);
      const file = join(dir, `${panel}_${p.token}.${res.ext}`);
      writeFileSync(file, res.buffer);
      writeFileSync(join(dir, `${panel}_${p.token}.truth.json`), JSON.stringify(res.truth));
      photos.push({ file, panel, token: p.token, pattern: p.pattern, level: p.level });
      log(`generated ${file} (${((performance.now() - t0) / 1000).toFixed(1)} s)`);
    }
    const flats: string[] = [];
    const gradients: [number, number][] = [
      [0.01, -0.005],
      [-0.015, 0.008],
      [0.004, 0.012],
    ];
    for (const [j, gradient] of gradients.entries()) {
      const res = await renderFlatFrame({
        seed: 7500 + 10 * k + j,
        camera: cameraFor(size.width, size.height),
        level: 0.62,
        gradient,
        noise: { fullWell: 20000, readNoise: 3 },
        output: { format: 'jpeg', quality: 92 },
        exposure: { fNumber: 4, iso: 100, exposureTimeS: 1 / 50 },
      });
      const file = join(dir, 'flats', size.label, `flat-${j + 1}.${res.ext}`);
      mkdirSync(join(dir, 'flats', size.label), { recursive: true });
      writeFileSync(file, res.buffer);
      flats.push(file);
    }
    const profile = join(dir, `falloff-${size.label}.json`);
    writeFileSync(profile, profileToJson(await flatFramesToProfile(flats)));
    log(`generated ${flats.length} flat frames and ${profile}`);
    set.sizes.push({ ...size, photos, profile, flats });
  }
  writeFileSync(index, JSON.stringify({ version: SET_VERSION, set }, null, 2) + '\n');
  return set;
}
