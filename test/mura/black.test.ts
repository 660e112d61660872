// Black fields: light creeping in from an edge (bleed) or a corner is found as glow, on the right
// edge or corner; SEMU there carries the extrapolation note.
import { describe, expect, it } from 'vitest';
import { analyseMura } from '../../lib/mura/index.js';
import { synthMap, type SynthFeature } from '../../scripts/mura-synth.js';

const W = 240;
const H = 150;

function run(features: SynthFeature[], seed: number, pattern: 'black' | 'gray' = 'black') {
  // black fields are dim: the photo noise is several % of the level
  const map = synthMap({ widthMm: W, heightMm: H, pxPerMm: 2, level: 0.002, noisePct: 3, seed, smooth: [[0, 0.02], [0.03], [-0.05]], features });
  return analyseMura(map, { pattern });
}

/** A black map whose outer `border` mm are left out, as the pipeline does for the bezel transition. */
function borderedBlackMap(features: SynthFeature[], seed: number, border: number, noisePct = 3) {
  const map = synthMap({ widthMm: W, heightMm: H, pxPerMm: 2, level: 0.002, noisePct, seed, smooth: [[0, 0.02], [0.03], [-0.05]], features });
  const b = border * map.pxPerMm;
  for (let y = 0; y < map.height; y++) for (let x = 0; x < map.width; x++) {
    if (x < b || y < b || x >= map.width - b || y >= map.height - b) map.valid[y * map.width + x] = 0;
  }
  return map;
}

/** A glow on such a map, analysed without and with the strip's width given: its first finding each time. */
function seenAndCarried(glow: SynthFeature, seed: number, border: number) {
  const map = borderedBlackMap([glow], seed, border);
  return { seen: analyseMura(map, { pattern: 'black' }).blobs[0], carried: analyseMura(map, { pattern: 'black', edgeBorderMm: border }).blobs[0] };
}

describe('glow on black fields', () => {
  it('finds light along a whole edge as edge glow on that edge', () => {
    const decay = 12;
    const r = run([{ kind: 'edge-glow', edge: 'left', decayMm: decay, contrastPct: 80 }], 21);
    expect(r.blobs.length).toBe(1);
    const g = r.blobs[0];
    expect(g.kind).toBe('edge-glow');
    expect(g.detail.edge).toBe('left');
    expect(g.polarity).toBe('bright');
    // exp(-x / decay) falls to half at x = decay ln2: the half-peak region is that strip along the edge;
    // its mean is peak (1/ln2) (1 - 1/2) / 1 = 0.7213 of the peak (integral of exp by hand)
    expect(Math.abs(g.areaMm2 - decay * Math.LN2 * H) / (decay * Math.LN2 * H)).toBeLessThan(0.3);
    expect(Math.abs(g.contrastPct - 80 * 0.5 / Math.LN2) / (80 * 0.5 / Math.LN2)).toBeLessThan(0.25);
    expect(r.notes.some((n) => /extrapolation/.test(n))).toBe(true);
  });

  it('carries an edge glow measured inside a left-out border strip to the edge', () => {
    // exp(-x / 14) with 100 % at the edge; the outer 3 mm of the map left out (as the pipeline does for
    // the bezel transition): seen from x = 3 mm, the peak is exp(-3 / 14) = 0.807 of the edge's and the
    // mean over the half-peak strip 0.7213 of that; carried to the edge, 100 % and 72.1 % (integral of exp
    // by hand). Tolerance on the mean: issue 4's 25 %
    const decay = 14;
    const border = 3;
    const { seen, carried } = seenAndCarried({ kind: 'edge-glow', edge: 'left', decayMm: decay, contrastPct: 100 }, 25, border);
    expect(seen.kind).toBe('edge-glow');
    expect(carried.kind).toBe('edge-glow');
    // the gain is exp(border ln2 / depth) for the half-peak depth found (an exponential halves over
    // decay x ln 2)
    const depth = seen.detail.depthMm as number;
    // within 1 mm: two map pixels at 2 px/mm (common practice)
    expect(Math.abs(depth - decay * Math.LN2)).toBeLessThan(1);
    expect(carried.peakContrastPct / seen.peakContrastPct).toBeCloseTo(Math.exp((border * Math.LN2) / depth), 3);
    // seen: 29 % under the edge's 100 % (19 % the strip, the rest the order-2 black surface lifted under
    // the glow); carried: within 15 % (tolerance: common practice, wide enough for that lift)
    expect(Math.abs(seen.peakContrastPct - 100) / 100).toBeGreaterThan(0.2);
    expect(Math.abs(carried.peakContrastPct - 100) / 100).toBeLessThan(0.15);
    expect(Math.abs(carried.contrastPct - 72.13) / 72.13).toBeLessThan(0.25);
    // the region keeps its width, so its area; the figure seen is kept in the detail
    expect(carried.areaMm2).toBe(seen.areaMm2);
    expect(carried.detail.seenPeakPct).toBeCloseTo(seen.peakContrastPct, 2);
    expect(carried.detail.carriedToEdgeMm).toBe(border);
  });

  it('carries a corner glow measured inside the left-out border strips to the corner', () => {
    // exp(-d / 15), d from the top-right corner, 100 % there; the outer 3 mm of the map left out: the
    // nearest pixel seen is 3 sqrt 2 mm from the corner, exp(-4.24 / 15) = 0.754 of the corner's peak;
    // its seen peak halves at d = 4.24 + 15 ln2 = 14.64 mm, which meets the strip's edge
    // sqrt(14.64² - 3²) - 3 = 11.33 mm along it (hand-worked)
    const border = 3;
    const { seen, carried } = seenAndCarried({ kind: 'corner-glow', corner: 'top-right', decayMm: 15, contrastPct: 100 }, 26, border);
    expect(seen.kind).toBe('corner-glow');
    expect(carried.kind).toBe('corner-glow');
    const reach = seen.detail.reachMm as number;
    // within 1.5 mm: three map pixels at 2 px/mm (common practice)
    expect(Math.abs(reach - 11.33)).toBeLessThan(1.5);
    const decay = (Math.hypot(reach + border, border) - border * Math.SQRT2) / Math.LN2;
    expect(carried.peakContrastPct / seen.peakContrastPct).toBeCloseTo(Math.exp((border * Math.SQRT2) / decay), 3);
    expect(Math.abs(carried.peakContrastPct - 100)).toBeLessThan(Math.abs(seen.peakContrastPct - 100));
    // seen: 31 % under the corner's 100 % (25 % the strips, the rest the black surface lifted under the
    // glow); carried: within 15 % (tolerance: common practice, wide enough for that lift)
    expect(Math.abs(seen.peakContrastPct - 100) / 100).toBeGreaterThan(0.2);
    expect(Math.abs(carried.peakContrastPct - 100) / 100).toBeLessThan(0.15);
  });

  it('finds a weak corner glow as one glow, its peak carried to the corner', () => {
    // Mild leakage, 20-50 % above the field at the corner (exp(-d / decay), d from the corner), under
    // 3 % noise per map pixel, the outer 2.5 mm left out as the pipeline does. Its top at the corner
    // stands on its own tail, which the corner cuts to a quarter ring: taken for a plateau, the glow came
    // out in two pieces, or as a glow and a spot beside it (6 of these 24 maps). One finding each, the
    // corner's glow, its peak within issue 4's 25 % of the value drawn at the corner.
    const cases: [number, number][] = [
      [12, 30],
      [23, 50],
      [18, 20],
      [15, 40],
    ];
    const border = 2.5;
    for (const [decayMm, contrastPct] of cases) {
      for (let seed = 1; seed <= 6; seed++) {
        const map = borderedBlackMap([{ kind: 'corner-glow', corner: 'bottom-left', decayMm, contrastPct }], seed, border);
        const blobs = analyseMura(map, { pattern: 'black', edgeBorderMm: border }).blobs;
        const what = `decay ${decayMm} mm, ${contrastPct} %, seed ${seed}: ${blobs.map((x) => `${x.kind} ${x.peakContrastPct}`).join(', ')}`;
        expect(blobs.length, what).toBe(1);
        expect(blobs[0].kind, what).toBe('corner-glow');
        expect(blobs[0].detail.corner, what).toBe('bottom-left');
        expect(Math.abs(blobs[0].peakContrastPct / contrastPct - 1), what).toBeLessThan(0.25);
      }
    }
  });

  it('counts a speck of a weak edge glow fading along its edge with the glow', () => {
    // exp(-x / 6 mm) across, a Gaussian of 70 mm FWHM along the left edge, 20 % at its top, under 1 %
    // noise per map pixel. Past its half-peak region the glow fades along the edge through the map's
    // threshold, and a speck of it stood out on its own as a small spot beside the glow (seed 5 of these
    // 10). One finding each: the edge glow (one glow drawn, from the map's own formula; common practice
    // that its fading end is part of it).
    const border = 2.5;
    let specks = 0;
    for (let seed = 1; seed <= 10; seed++) {
      const map = borderedBlackMap([{ kind: 'edge-glow', edge: 'left', decayMm: 6, contrastPct: 20, atMm: 75, fwhmAlongMm: 70 }], seed, border, 1);
      const blobs = analyseMura(map, { pattern: 'black', edgeBorderMm: border }).blobs;
      const what = `seed ${seed}: ${blobs.map((x) => `${x.kind} ${x.peakContrastPct} at ${x.xMm}, ${x.yMm}`).join('; ')}`;
      expect(blobs.length, what).toBe(1);
      expect(blobs[0].kind, what).toBe('edge-glow');
      expect(blobs[0].detail.edge, what).toBe('left');
      specks += Number(blobs[0].detail.fadingEndSpecks ?? 0);
    }
    expect(specks).toBeGreaterThan(0);
  });

  it('reports two glows on one edge, 80 mm apart, each on its own', () => {
    // two patches on the left edge (exp(-x / 6 mm) across, 30 mm FWHM along), 40 % and 15 % at their
    // tops, with the bare field between them. Lying on one line along the edge, they were taken for one
    // feature and the fainter was lost; it is also beyond the brighter one's fading end (half its
    // half-peak length past the region's end), so it is not counted with it either. Places from the
    // map's own formula; two patches with the bare field between them are two findings (common practice)
    const r = run(
      [
        { kind: 'edge-glow', edge: 'left', decayMm: 6, contrastPct: 40, atMm: 35, fwhmAlongMm: 30 },
        { kind: 'edge-glow', edge: 'left', decayMm: 6, contrastPct: 15, atMm: 115, fwhmAlongMm: 30 },
      ],
      27,
    );
    const glows = r.blobs.filter((b) => b.kind === 'edge-glow' && b.detail.edge === 'left');
    expect(glows.length, r.blobs.map((b) => `${b.kind} ${b.peakContrastPct} at ${b.yMm}`).join('; ')).toBe(2);
    expect(glows.some((g) => Math.abs(g.yMm - 115) < 10)).toBe(true);
  });

  it('finds a glow patch on part of an edge and a corner glow, each in its place', () => {
    const r = run(
      [
        { kind: 'edge-glow', edge: 'bottom', decayMm: 8, contrastPct: 60, atMm: 150, fwhmAlongMm: 60 },
        { kind: 'corner-glow', corner: 'top-right', decayMm: 15, contrastPct: 100 },
      ],
      22,
    );
    expect(r.blobs.length).toBe(2);
    const patch = r.blobs.find((b) => b.kind === 'edge-glow');
    const corner = r.blobs.find((b) => b.kind === 'corner-glow');
    expect(patch?.detail.edge).toBe('bottom');
    expect(Math.abs(patch!.xMm - 150)).toBeLessThan(5);
    expect(corner?.detail.corner).toBe('top-right');
    expect(corner!.u).toBeGreaterThan(0.9);
    expect(corner!.v).toBeLessThan(0.1);
  });

  it('calls a bright cloud that does not touch an edge a cloud, not glow', () => {
    const r = run([{ kind: 'gauss', xMm: 120, yMm: 70, sigmaMm: 25, contrastPct: 40 }], 23);
    expect(r.blobs.length).toBe(1);
    expect(r.blobs[0].kind).toBe('cloud');
  });

  it('does not look for glow on lit fields', () => {
    const map = synthMap({
      widthMm: W,
      heightMm: H,
      pxPerMm: 2,
      noisePct: 0.5,
      seed: 24,
      features: [{ kind: 'edge-glow', edge: 'top', decayMm: 10, contrastPct: 5 }],
    });
    const r = analyseMura(map, { pattern: 'white' });
    expect(r.blobs.length).toBeGreaterThan(0);
    for (const b of r.blobs) expect(b.kind === 'edge-glow' || b.kind === 'corner-glow').toBe(false);
    expect(r.notes.some((n) => /extrapolation/.test(n))).toBe(false);
  });
});

describe('what black fields report', () => {
  // common practice: a black field is inspected for light that leaks (bleed, clouding); a region darker
  // than its surround there is not a defect of the black
  it('reports a bright cloud (clouding) and not a dark one (less leakage)', () => {
    const r = run(
      [
        { kind: 'gauss', xMm: 70, yMm: 75, sigmaMm: 12, contrastPct: 40 },
        { kind: 'gauss', xMm: 170, yMm: 75, sigmaMm: 12, contrastPct: -40 },
      ],
      23,
    );
    expect(r.blobs.some((b) => b.polarity === 'bright' && Math.hypot(b.xMm - 70, b.yMm - 75) < 5)).toBe(true);
    expect(r.blobs.filter((b) => b.polarity === 'dark' && b.kind !== 'band')).toHaveLength(0);
    // the same dark cloud on a gray field is reported
    const g = analyseMura(synthMap({ widthMm: W, heightMm: H, pxPerMm: 2, noisePct: 0.5, seed: 23, smooth: [[0, 0.02]], features: [{ kind: 'gauss', xMm: 170, yMm: 75, sigmaMm: 12, contrastPct: -4 }] }), { pattern: 'gray' });
    expect(g.blobs.some((b) => b.polarity === 'dark' && Math.hypot(b.xMm - 170, b.yMm - 75) < 5)).toBe(true);
  });
});

describe('a strong drop-off on a black field', () => {
  // The black field of a backlit panel falls off with the backlight. 55 % to the corners as the 2.5th
  // power of the distance from the centre (a strong drop-off of the kind a uniformity limit fails), no
  // feature: nothing is there to report (the generator's formula, scripts/mura-synth.ts, radial). An
  // order-2 surface alone left two edge "glows" of 3.9 % (SEMU 4.8) along the long sides.
  const map = () => synthMap({ widthMm: 400, heightMm: 250, pxPerMm: 2, level: 0.002, noisePct: 1, seed: 71, radial: { loss: 0.55, power: 2.5 } });

  it('reports no glow where a higher-order surface finds none, and says so', () => {
    const r = analyseMura(map(), { pattern: 'black' });
    expect(r.blobs).toEqual([]);
    expect(r.backgroundModel).toMatch(/2 findings left out as not found against a surface of order 4/);
  });

  it('keeps them with the check turned off (background.blackCheckOrder 0)', () => {
    const r = analyseMura(map(), { pattern: 'black', background: { blackCheckOrder: 0 } });
    expect(r.blobs.filter((b) => b.kind === 'edge-glow')).toHaveLength(2);
  });
});
