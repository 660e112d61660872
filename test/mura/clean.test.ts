// Clean panels (smooth variation only), the noise floor, options and the returned planes.
import { describe, expect, it } from 'vitest';
import { analyseMura, neighbourNoise, workRaster } from '../../lib/mura/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import { SynthRng, synthMap } from '../../scripts/mura-synth.js';

const W = 240;
const H = 150;

describe('clean panels', () => {
  it('reports no mura of SEMU >= 1 on smooth variation of order 2 and 3', () => {
    // smooth variation is graded by the sampled grid, not by mura: a whole-panel polynomial up to
    // +-15 % (issue: at most 0.2 false findings with SEMU >= 1 per clean photo; here none at all)
    const rng = new SynthRng(41);
    let findings = 0;
    for (let k = 0; k < 3; k++) {
      const c = [
        [0, rng.uniform(-0.05, 0.05), rng.uniform(-0.08, 0.02)],
        [rng.uniform(-0.05, 0.05), rng.uniform(-0.03, 0.03), k === 2 ? 0.02 : 0],
        [rng.uniform(-0.1, 0.02)],
        k === 2 ? [0.03] : [],
      ];
      const map = synthMap({ widthMm: W, heightMm: H, pxPerMm: 2, noisePct: 0.5, seed: 40 + k, smooth: c });
      const r = analyseMura(map, { pattern: 'gray' });
      findings += r.blobs.filter((b) => b.semu >= 1).length;
      expect(r.maxSemu).toBeLessThan(1);
    }
    expect(findings).toBe(0);
  });
});

describe('noise floor', () => {
  it('reads the per-pixel noise of white noise and says how it averages down', () => {
    const map = synthMap({ widthMm: W, heightMm: H, pxPerMm: 2, noisePct: 1, seed: 43, smooth: [[0, 0.02], [0.03]] });
    const r = analyseMura(map, { pattern: 'gray' });
    // the neighbour-difference estimate of white noise of sigma 1 %: expected 1, statistical error of a
    // MAD estimate on ~1e5 pixels well under 1 %; tolerance 5 % (common practice)
    expect(Math.abs(r.noiseFloorPct - 1)).toBeLessThan(0.05);
    // resolvable contrast at d mm: threshold x noise / sqrt(pixels in a disc of d): 1/d scaling for
    // white noise, 3 mm -> 10 mm divides by 10/3 (unless the background-model floor is reached)
    const c3 = r.resolvableContrastPct['3'];
    const c10 = r.resolvableContrastPct['10'];
    expect(Object.keys(r.resolvableContrastPct)).toEqual(['3', '10', '30', '100']);
    expect(c3 / c10).toBeGreaterThan(0.9 * (10 / 3));
    expect(c3 / c10).toBeLessThan(1.1 * (10 / 3));
    // 5 sigma of a 3 mm disc at 2 px/mm (28.3 px): 5 x 1 % / sqrt(28.3) = 0.94 %
    expect(Math.abs(c3 - 0.94) / 0.94).toBeLessThan(0.15);
    expect(r.notes.some((n) => /does not average down/.test(n))).toBe(true);
  });

  it('estimates white noise of a known sigma with the neighbour-difference rule', () => {
    // white noise: d = x - mean of 4 neighbours has variance sigma² (1 + 1/4) (hand-worked)
    const map = synthMap({ widthMm: 200, heightMm: 200, pxPerMm: 1, noisePct: 2, seed: 44 });
    const work = workRaster(map, 4e6);
    const C = new Float32Array(work.Y.length);
    for (let i = 0; i < C.length; i++) C[i] = (100 * (work.Y[i] - 0.2)) / 0.2;
    expect(Math.abs(neighbourNoise(C, work) - 2) / 2).toBeLessThan(0.05);
  });
});

describe('maps and options', () => {
  it('works on maps with missing corners and returns planes no larger than the map', () => {
    const map = synthMap({
      widthMm: W,
      heightMm: H,
      pxPerMm: 2,
      noisePct: 0.5,
      seed: 45,
      features: [{ kind: 'gauss', xMm: 120, yMm: 75, sigmaMm: 5, contrastPct: 4 }],
    });
    // a triangle of the top-left corner fell outside the photo
    for (let y = 0; y < map.height; y++) for (let x = 0; x < map.width; x++) if (x + y < 80) map.valid[y * map.width + x] = 0;
    const r = analyseMura(map, { pattern: 'gray' });
    expect(r.blobs.length).toBe(1);
    expect(r.blobs[0].kind).toBe('spot');
    expect(r.contrast.width).toBeLessThanOrEqual(map.width);
    expect(r.contrast.height).toBeLessThanOrEqual(map.height);
    expect(r.background.width).toBe(r.contrast.width);
    expect(Number.isNaN(r.contrast.data[0])).toBe(true); // no data there
    expect(Number.isFinite(r.contrast.data[r.contrast.data.length - 1])).toBe(true);
  });

  it('keeps the working raster under the pixel budget', () => {
    const map = synthMap({ widthMm: 300, heightMm: 200, pxPerMm: 1, noisePct: 0.5, seed: 46 });
    const work = workRaster(map, 20_000);
    expect(work.w * work.h).toBeLessThanOrEqual(20_000);
    // 300 x 200 px: factor 2 gives 150 x 100 = 15000 px, the first integer factor under 20000
    expect(work.mmPerPx).toBeCloseTo(2, 9);
    expect([work.w, work.h]).toEqual([150, 100]);
  });

  it('rejects bad options with a usage error', () => {
    const map = synthMap({ widthMm: 60, heightMm: 40, pxPerMm: 1, seed: 47 });
    const bad = [
      { thresholdSigma: -1 },
      { tileGrid: [0, 2] as [number, number] },
      { background: { order: 9 } },
      { semuConstants: { a: Number.NaN } },
      { minFeatureMm: 50, maxFeatureMm: 60 },
    ];
    for (const o of bad) {
      let err: unknown = null;
      try {
        analyseMura(map, { pattern: 'gray', ...o });
      } catch (e) {
        err = e;
      }
      expect(err).toBeInstanceOf(EvenfieldError);
      expect((err as EvenfieldError).code).toBe('usage');
    }
  });

  it('applies changed SEMU constants and reporting floor', () => {
    const map = synthMap({
      widthMm: W,
      heightMm: H,
      pxPerMm: 2,
      noisePct: 0.5,
      seed: 48,
      features: [{ kind: 'gauss', xMm: 120, yMm: 75, sigmaMm: 5, contrastPct: 3 }],
    });
    const a = analyseMura(map, { pattern: 'gray' });
    const b = analyseMura(map, { pattern: 'gray', semuConstants: { c: 1.44 } });
    expect(a.blobs.length).toBe(1);
    expect(b.blobs.length).toBe(1);
    // same contrast and area, larger Cjnd: SEMU = C / (1.97 / S^0.33 + c)
    const S = a.blobs[0].areaMm2;
    const ratio = (1.97 / S ** 0.33 + 0.72) / (1.97 / S ** 0.33 + 1.44);
    expect(b.blobs[0].semu / a.blobs[0].semu).toBeCloseTo(ratio, 2);
    const c = analyseMura(map, { pattern: 'gray', semuFloor: a.blobs[0].semu + 0.5 });
    expect(c.blobs.length).toBe(0);
    expect(c.maxSemu).toBe(0);
  });
});
