// Single-pixel spikes (a camera's hot and dead pixels) are replaced before measuring, and nothing larger
// is touched. Replacing an isolated defective pixel by its neighbours is the defect correction camera
// pipelines apply (common practice); the checks are against a generated black field with a glow (the
// generator's truth) and against synthetic fields.
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { randomScene, renderPhoto } from '../../fixtures/generator/index.js';
import { removeImpulses } from '../../lib/pipeline/impulses.js';
import { measurePhoto } from '../../lib/pipeline/index.js';
import { generatedPhotoOptions } from '../../scripts/generated-options.js';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

function field(W: number, H: number, f: (x: number, y: number) => number) {
  const lum = new Float32Array(W * H);
  const rgb = new Float32Array(W * H * 3);
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      const v = f(x, y);
      lum[y * W + x] = v;
      rgb.fill(v, 3 * (y * W + x), 3 * (y * W + x) + 3);
    }
  }
  return { img: { width: W, height: H, data: rgb }, lum: { width: W, height: H, data: lum } };
}

function gauss(seed: number) {
  let s = seed;
  const next = () => (s = (s * 16807) % 2147483647) / 2147483647;
  return () => Math.sqrt(-2 * Math.log(next() + 1e-12)) * Math.cos(2 * Math.PI * next());
}

describe('removeImpulses', () => {
  it('replaces a hot and a dead pixel on a noisy field and nothing else', () => {
    const g = gauss(3);
    const { img, lum } = field(200, 150, () => 0.2 * (1 + 0.01 * g()));
    lum.data[50 * 200 + 60] = 0.9;
    img.data.fill(0.9, 3 * (50 * 200 + 60), 3 * (50 * 200 + 60) + 3);
    lum.data[100 * 200 + 120] = 0.02;
    const spikes = removeImpulses(img, lum);
    expect(spikes.sort((a, b) => a - b)).toEqual([50 * 200 + 60, 100 * 200 + 120]);
    expect(lum.data[50 * 200 + 60]).toBeCloseTo(0.2, 2);
    expect(img.data[3 * (50 * 200 + 60)]).toBeCloseTo(0.2, 2);
  });

  it('leaves pure noise, a spot blurred over two pixels, and an edge alone', () => {
    const g = gauss(5);
    // 1 % noise on a dark and a bright level: no spike in 60 000 pixels
    for (const level of [0.003, 0.5]) {
      const { img, lum } = field(300, 200, () => level * (1 + 0.01 * g()));
      expect(removeImpulses(img, lum)).toEqual([]);
    }
    // a spot of half-peak width 2 pixels (sigma 0.85) at +300 %, and a step edge
    const { img, lum } = field(120, 80, (x, y) => (x < 90 ? 0.1 : 0.6) * (1 + 3 * Math.exp(-((x - 40) ** 2 + (y - 40) ** 2) / (2 * 0.85 ** 2))));
    const before = lum.data.slice();
    expect(removeImpulses(img, lum)).toEqual([]);
    expect(lum.data).toEqual(before);
  });

  it('keeps hot pixels of a long black-field exposure out of the mura findings', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ef-spikes-'));
    const spec = randomScene(8003, { pattern: 'black', width: 1600, height: 1100, features: [1, 1], featureKinds: ['edge-glow'] });
    spec.camera.k1 = 0;
    spec.camera.k2 = 0;
    spec.exposure = { patternCentre: 0.03 };
    const { buffer, truth } = await renderPhoto(spec);
    // 40 hot pixels, one channel each (a raw hot pixel becomes one colour), 120-255 of 255
    const { data, info } = await sharp(buffer).raw().toBuffer({ resolveWithObject: true });
    let s = 17;
    const rnd = () => (s = (s * 16807) % 2147483647) / 2147483647;
    for (let k = 0; k < 40; k++) {
      const x = Math.floor(rnd() * info.width);
      const y = Math.floor(rnd() * info.height);
      data[(y * info.width + x) * 3 + Math.floor(rnd() * 3)] = 120 + Math.floor(rnd() * 135);
    }
    const file = join(dir, 'S1_black.jpg');
    writeFileSync(file, await sharp(data, { raw: info }).jpeg({ quality: 95 }).toBuffer());
    const m = await measurePhoto(file, generatedPhotoOptions(spec, { corners: truth.corners }));
    expect(m.result.status).toBe('ok');
    expect(m.result.exposureStats!.spikesRemoved).toBeGreaterThan(5);
    expect(m.result.warnings.some((w) => /single-pixel spikes? on the panel/.test(w))).toBe(true);
    // the glow is found; no spot
    expect(m.result.blobs.some((b) => b.kind === 'edge-glow')).toBe(true);
    expect(m.result.blobs.filter((b) => b.kind === 'spot' && b.semu >= 1)).toEqual([]);
  }, 60_000);
});
