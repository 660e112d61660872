// Large clouds: a surface fitted together with a Gaussian bump, and clouds of about half the panel's
// short side measured against it. Truths are analytical (derived by hand; see helpers.ts for the Gaussian's
// half-peak area and mean).
import { describe, expect, it } from 'vitest';
import { analyseMura, fitBackground, legendre, resolveMuraOptions, type WorkRaster } from '../../lib/mura/index.js';
import { synthMap } from '../../scripts/mura-synth.js';
import { bumpMap, gaussTruth, nearest, relErr, THREE_CLOUDS, threeCloudMap } from './helpers.js';

describe('surface with a bump', () => {
  it('recovers an exact polynomial and the amplitude and width of a Gaussian on it', () => {
    // Y = P(x, y) * (1 + a g(x, y)) with P an order-2 Legendre surface and g a Gaussian of sigma 1.25 x the
    // bump given: linear least squares over noise-free cells is exact at the right width (derived by
    // hand), and the width is one of the scales tried (0.8, 1, 1.25, 1.55, 1.9)
    const w = 200;
    const h = 120;
    const Y = new Float32Array(w * h);
    const level = new Float32Array(w * h);
    const P = new Float32Array(w * h);
    const px = new Float64Array(3);
    const py = new Float64Array(3);
    const a = 0.05;
    const bump = { x: 90, y: 55, sLong: 16, sShort: 12, angleRad: 0.3 };
    const g = (x: number, y: number, scale: number): number => {
      const c = Math.cos(bump.angleRad);
      const s = Math.sin(bump.angleRad);
      const u = ((x - bump.x) * c + (y - bump.y) * s) / (bump.sLong * scale);
      const v = (-(x - bump.x) * s + (y - bump.y) * c) / (bump.sShort * scale);
      return Math.exp(-0.5 * (u * u + v * v));
    };
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        legendre(2, (2 * (x + 0.5)) / w - 1, px);
        legendre(2, (2 * (y + 0.5)) / h - 1, py);
        const p = 0.2 * (1 + 0.06 * px[1] - 0.04 * py[1] - 0.05 * px[2] + 0.02 * px[1] * py[1] - 0.03 * py[2]);
        P[y * w + x] = p;
        level[y * w + x] = p;
        Y[y * w + x] = p * (1 + a * g(x, y, 1.25)); // bumps are placed in pixel-index coordinates
      }
    }
    const work: WorkRaster = { w, h, mmPerPx: 1, Y, wt: new Float32Array(w * h).fill(1) };
    const opts = { ...resolveMuraOptions({ pattern: 'gray' }).background, order: 2, cellMm: 2 };
    const fit = fitBackground(work, null, opts, 0.01, null, false, { list: [bump], level, maxSigma: 100 });
    expect(fit.bumps).toHaveLength(1);
    expect(fit.bumps[0].sLong).toBeCloseTo(bump.sLong * 1.25, 6);
    // cells are 2 x 2 px means of a curved surface: a few 1e-4 of error at most
    expect(Math.abs(fit.bumps[0].amplitude - a)).toBeLessThan(1e-3);
    let worst = 0;
    for (let i = 0; i < w * h; i++) worst = Math.max(worst, Math.abs(fit.B[i] / P[i] - 1));
    expect(worst).toBeLessThan(1e-3);
  });
});

describe('clouds of about half the panel short side', () => {
  // a 600 x 340 mm panel with smooth variation up to order 4 (about +-15 %)
  const smooth = [[0, 0.04, -0.08, 0, 0.02], [0.03, 0.01, 0.01], [-0.1, 0.01], [0.01]];
  const measure = (sigma: number, peak: number, x: number, y: number, seed: number, pattern: 'gray' | 'black' = 'gray') => {
    const r = analyseMura(bumpMap([{ x, y, s: sigma, peak }], seed, smooth), { pattern });
    return { ...nearest(r.blobs, x, y)!, model: r.backgroundModel };
  };

  it('measures a bright cloud of 188 mm within the acceptance tolerances', () => {
    // sigma 80 mm: half-peak diameter 188 mm, area 27 873 mm², mean 4.33 % (helpers.ts). Masked out of
    // the surface only, it measured 2.65 % over 16 956 mm² (-39 %, -39 %).
    const t = gaussTruth(80, 6);
    const c = measure(80, 6, 330, 160, 3);
    expect(c.kind).toBe('cloud');
    expect(c.polarity).toBe('bright');
    expect(Math.hypot(c.xMm - 330, c.yMm - 160)).toBeLessThan(10);
    // issue tolerances: mean contrast within 25 %, area within 30 %
    expect(relErr(c.contrastPct, t.contrastPct)).toBeLessThan(0.25);
    expect(relErr(c.areaMm2, t.areaMm2)).toBeLessThan(0.3);
    // and the report's description of the background says so
    expect(c.model).toContain('1 large cloud measured against a surface fitted together with a Gaussian bump');
  });

  it('measures a dark cloud of 165 mm within the acceptance tolerances', () => {
    // sigma 70 mm: 165 mm across, area 21 340 mm², mean -5.77 %; masked out of the surface only, its mean
    // came out 31 % faint
    const t = gaussTruth(70, -8);
    const c = measure(70, -8, 380, 150, 9);
    expect(c.kind).toBe('cloud');
    expect(c.polarity).toBe('dark');
    expect(relErr(c.contrastPct, t.contrastPct)).toBeLessThan(0.25);
    expect(relErr(c.areaMm2, t.areaMm2)).toBeLessThan(0.3);
  });

  it('leaves black fields as they are', () => {
    // on a black field a broad centre "cloud" is more often the order-2 surface missing the roll-off
    // (lot study): the same cloud is found but not measured against a bump
    const c = measure(80, 6, 330, 160, 3, 'black');
    expect(c.polarity).toBe('bright');
    expect(c.model).not.toContain('large cloud');
  });
});

describe('several clouds on one panel', () => {
  // helpers.ts: three clouds of 94-118 mm on a 600 x 340 mm panel; truths derived by hand (gaussTruth)
  const clouds = THREE_CLOUDS;
  const map = threeCloudMap();

  it('measures each against a surface fitted together with all of them, with no false cloud between them', () => {
    const r = analyseMura(map, { pattern: 'gray' });
    for (const c of clouds) {
      const t = gaussTruth(c.s, 6);
      const b = nearest(r.blobs, c.x, c.y)!;
      expect(b.kind).toBe('cloud');
      expect(b.polarity).toBe('bright');
      expect(Math.hypot(b.xMm - c.x, b.yMm - c.y)).toBeLessThan(10);
      // tighter than the 25 % / 30 %: Gaussians on a polynomial are what the joint model is made
      // of, so only noise and the blur correction are left (measured: contrast +3 %, area +1 to +7 %)
      expect(relErr(b.contrastPct, t.contrastPct)).toBeLessThan(0.12);
      expect(relErr(b.areaMm2, t.areaMm2)).toBeLessThan(0.12);
    }
    expect(r.blobs.filter((b) => b.polarity === 'dark' && b.semu >= 1)).toEqual([]);
    expect(r.backgroundModel).toContain('Gaussian bump for each of 3 clouds');
  });

  it('leaves a bright and a dark cloud to be measured one at a time (two of one sign are needed)', () => {
    // one cloud of each sign: the lone dark one could as well be the panel's own level beside a bright
    // one; each is measured as before, the large one against its own bump (truths from helpers.ts)
    const pair = synthMap({
      widthMm: 600,
      heightMm: 340,
      pxPerMm: 1,
      noisePct: 0.5,
      seed: 23,
      smooth: [[0, 0.03, -0.05], [0.02, 0.01], [-0.04]],
      features: [
        { kind: 'gauss', xMm: 180, yMm: 150, sigmaMm: 50, contrastPct: 6 },
        { kind: 'gauss', xMm: 440, yMm: 190, sigmaMm: 45, contrastPct: -6 },
      ],
    });
    const r = analyseMura(pair, { pattern: 'gray' });
    expect(r.backgroundModel).not.toContain('Gaussian bump for each');
    for (const [x, y, s, c] of [[180, 150, 50, 6], [440, 190, 45, -6]]) {
      const b = nearest(r.blobs, x, y)!;
      const t = gaussTruth(s, c);
      expect(b.polarity).toBe(c > 0 ? 'bright' : 'dark');
      expect(relErr(b.contrastPct, t.contrastPct)).toBeLessThan(0.25);
      expect(relErr(b.areaMm2, t.areaMm2)).toBeLessThan(0.3);
    }
  });

  it('against the common surface alone (jointMinClouds 0) the panel between them reads as dark clouds', () => {
    // the failure the joint fit is for: measured 23-26 % faint, and dark "clouds" of SEMU 1.0-1.4
    const r = analyseMura(map, { pattern: 'gray', background: { jointMinClouds: 0 } });
    expect(r.blobs.filter((b) => b.polarity === 'dark' && b.semu >= 1).length).toBeGreaterThan(0);
    expect(r.backgroundModel).not.toContain('Gaussian bump for each');
  });
});
