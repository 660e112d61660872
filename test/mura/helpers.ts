// Shared helpers of the mura tests: analytical half-peak truths and blob matching.
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { renderPhoto } from '../../fixtures/generator/index.js';
import type { PhotoSpec } from '../../fixtures/generator/index.js';
import { analyseMura } from '../../lib/mura/index.js';
import { measurePhoto } from '../../lib/pipeline/index.js';
import type { Blob } from '../../lib/types.js';
import { generatedPhotoOptions, STUDY_QUALITY } from '../../scripts/generated-options.js';
import { synthMap } from '../../scripts/mura-synth.js';

/** Gaussian bump of sigma s (mm): the region phi >= 1/2 is a disc of radius s sqrt(2 ln 2), so its
 *  area is pi 2 ln2 s²; the mean of phi over it is 1 / (2 ln 2) (derived in scripts/mura-synth.ts). */
export function gaussTruth(sigmaMm: number, peakPct: number): { areaMm2: number; contrastPct: number } {
  return { areaMm2: Math.PI * 2 * Math.LN2 * sigmaMm * sigmaMm, contrastPct: peakPct / (2 * Math.LN2) };
}

/** Mean of a 1-D cross-profile phi over its half-peak interval [-w/2, w/2], by Simpson's rule. */
export function meanOverHalfPeak(phi: (d: number) => number, fwhm: number, n = 2000): number {
  const h = fwhm / n;
  let s = phi(-fwhm / 2) + phi(fwhm / 2);
  for (let i = 1; i < n; i++) s += (i % 2 ? 4 : 2) * phi(-fwhm / 2 + i * h);
  return (s * h) / 3 / fwhm;
}

/** The blob nearest to (xMm, yMm), or undefined. */
export function nearest(blobs: Blob[], xMm: number, yMm: number): Blob | undefined {
  let best: Blob | undefined;
  let bd = Infinity;
  for (const b of blobs) {
    const d = Math.hypot(b.xMm - xMm, b.yMm - yMm);
    if (d < bd) {
      bd = d;
      best = b;
    }
  }
  return best;
}

export function relErr(measured: number, truth: number): number {
  return Math.abs(measured - truth) / Math.abs(truth);
}

/** Three Gaussian clouds of 94-118 mm half-peak diameter (sigma 40-50 mm, peak +6 %) on a 600 x 340 mm
 *  panel with smooth variation of order 2: several clouds sharing one panel. */
export const THREE_CLOUDS = [
  { x: 140, y: 130, s: 45 },
  { x: 330, y: 210, s: 50 },
  { x: 480, y: 120, s: 40 },
];

export function threeCloudMap(): ReturnType<typeof synthMap> {
  return synthMap({
    widthMm: 600,
    heightMm: 340,
    pxPerMm: 1,
    noisePct: 0.5,
    seed: 22,
    smooth: [[0, 0.03, -0.05], [0.02, 0.01], [-0.04]],
    features: THREE_CLOUDS.map((c) => ({ kind: 'gauss' as const, xMm: c.x, yMm: c.y, sigmaMm: c.s, contrastPct: 6 })),
  });
}

/**
 * Draw a generated scene, write it as a photo and measure it through the whole pipeline the way the mura
 * study does (the truth's corners, the cos⁴ falloff correction, the study's quality limits).
 */
export async function measureGenerated(spec: PhotoSpec, name: string) {
  const { buffer, ext, truth } = await renderPhoto(spec);
  const file = join(mkdtempSync(join(tmpdir(), 'ef-scene-')), `${name}.${ext}`);
  writeFileSync(file, buffer);
  const m = await measurePhoto(
    file,
    generatedPhotoOptions(spec, { corners: truth.corners, falloff: { kind: 'cos4', focal35mm: spec.camera.focal35 }, quality: STUDY_QUALITY }),
  );
  return { truth, result: m.result };
}

/** A Gaussian bump on a synthetic map: centre (mm), sigma (mm), peak contrast (%). */
export interface GaussBump {
  x: number;
  y: number;
  s: number;
  peak: number;
}

/** Gaussian bumps on a 600 x 340 mm synthetic map at 1 px/mm with 0.5 % noise and smooth variation
 *  (polynomial coefficients, mura-synth.ts; by default of order 2). */
export function bumpMap(bumps: GaussBump[], seed: number, smooth: number[][] = [[0, 0.03, -0.05], [0.02, 0.01], [-0.04]]) {
  return synthMap({
    widthMm: 600,
    heightMm: 340,
    pxPerMm: 1,
    noisePct: 0.5,
    seed,
    smooth,
    features: bumps.map((c) => ({ kind: 'gauss' as const, xMm: c.x, yMm: c.y, sigmaMm: c.s, contrastPct: c.peak })),
  });
}

/** bumpMap with its default smooth variation, analysed as a gray field. */
export function analyseBumps(bumps: GaussBump[], seed: number) {
  return analyseMura(bumpMap(bumps, seed), { pattern: 'gray' });
}
