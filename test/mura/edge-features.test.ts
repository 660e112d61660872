// Clouds at the panel's edge. The whole-panel surface has the least support at the edges and bent
// towards a cloud there, masked or not: 52 % and 55 % of the contrast of the two clouds below went into
// it. They are now measured against a quadratic fitted over a ring around them (remeasureEdgeFeatures
// in lib/mura/analyse.ts). The scenes are the mura study's generated photos with the features moved
// against the edges (scripts/mura-scenes.ts toEdges, seeds 1011 and 1013 of `mura-accuracy.js --edges`),
// checked against the generator's truth (each feature's mean contrast and area over its own half-peak
// region inside the panel) with issue 4's tolerances.
import { describe, expect, it } from 'vitest';
import { analyseMura } from '../../lib/mura/index.js';
import { graySpec } from '../../scripts/mura-scenes.js';
import { synthMap } from '../../scripts/mura-synth.js';
import { measureGenerated, nearest, relErr } from './helpers.js';

/**
 * Half-peak figures of a Gaussian of sigma s (mm) and peak c (%) centred at (x, y) inside a W x H panel,
 * cut by the panel's edges: the region where it is at least half its peak, inside the panel, and its mean
 * there, by summing over a 0.25 mm grid (the Gaussian's own formula; its peak lies inside the panel).
 */
function clippedGaussTruth(x0: number, y0: number, s: number, c: number, W: number, H: number): { areaMm2: number; contrastPct: number } {
  const h = 0.25;
  const r = s * Math.sqrt(2 * Math.LN2);
  let area = 0;
  let sum = 0;
  for (let y = Math.max(0, y0 - r); y < Math.min(H, y0 + r); y += h) {
    for (let x = Math.max(0, x0 - r); x < Math.min(W, x0 + r); x += h) {
      const phi = Math.exp(-((x + h / 2 - x0) ** 2 + (y + h / 2 - y0) ** 2) / (2 * s * s));
      if (phi >= 0.5) {
        area += h * h;
        sum += phi * h * h;
      }
    }
  }
  return { areaMm2: area, contrastPct: (c * sum) / area };
}

/**
 * An edge scene of the study (`mura-accuracy.js --edges`, the scene moved against the edges) through the
 * whole pipeline: the truth's first bright feature of `kind` of SEMU >= 3, the blob found within half its
 * size of it (if any), and the findings and the truth as text for the messages.
 */
async function edgeScene(seed: number, kind: 'cloud' | 'spot') {
  const { truth, result } = await measureGenerated(graySpec(seed, false, 2400, 1600, 'half-peak', null, false, false, true), `E${seed}_gray50`);
  expect(result.status).toBe('ok');
  const t = truth.features.find((f) => f.kind === kind && f.polarity === 'bright' && f.semu >= 3)!;
  expect(t, `the scene has a bright ${kind} of SEMU >= 3`).toBeDefined();
  const b = result.blobs.find((x) => x.polarity === 'bright' && Math.hypot(x.xMm - t.xMm, x.yMm - t.yMm) < 0.5 * Math.sqrt(t.areaMm2));
  const got = result.blobs.map((x) => `${x.kind} (${x.xMm}, ${x.yMm}) C ${x.contrastPct} A ${x.areaMm2}`).join('; ');
  return { t, b, got: `${got}; truth C ${t.contrastPct.toFixed(2)} A ${t.areaMm2.toFixed(0)}` };
}

describe('clouds at the panel edge', () => {
  const scenes = [
    // a bright cloud of 122 mm (5.8 % mean) whose half-peak region runs into the bottom-right corner,
    // with a bright band along the top edge
    { seed: 1011, what: 'cloud in the bottom-right corner' },
    // a bright cloud of 108 mm (2.6 %) centred 35 mm below the top edge, a faint dark one in the opposite corner
    { seed: 1013, what: 'cloud at the top edge' },
  ];
  for (const { seed, what } of scenes) {
    it(`measures a ${what} within issue 4's tolerances (scene ${seed})`, async () => {
      const { t: cloud, b, got } = await edgeScene(seed, 'cloud');
      expect(b, got).toBeDefined();
      expect(Math.abs(b!.contrastPct / cloud.contrastPct - 1), got).toBeLessThan(0.25);
      expect(Math.abs(b!.areaMm2 / cloud.areaMm2 - 1), got).toBeLessThan(0.3);
    }, 60_000);
  }
});

describe('clouds in a corner (synthetic maps)', () => {
  // A 600 x 340 mm map with the generator's kind of roll-off (13 % at the corners as the 2.4th power of
  // the distance from a centre a little off the middle) and an order-2 tilt, a Gaussian cloud whose
  // half-peak region runs into a corner, 0.5 % noise. Against the whole-panel surface alone they came out
  // 34 % and 26 % faint; with the ring measurement but every other finding kept out of the ring, the
  // dark one still 34 %: faint findings left by the surface's own misfit (SEMU 0.3-0.4) took most of its
  // quarter ring away. Only findings of the reporting floor are kept out now. Issue 4's tolerances.
  const corners = [
    { x: 560, y: 300, s: 50, peak: -5, seed: 60 },
    { x: 50, y: 290, s: 45, peak: 4, seed: 62 },
  ];
  for (const c of corners) {
    it(`measures a ${c.peak > 0 ? 'bright' : 'dark'} cloud ${Math.round(Math.min(c.x, 600 - c.x))} mm and ${Math.round(Math.min(c.y, 340 - c.y))} mm from two edges`, () => {
      const map = synthMap({
        widthMm: 600,
        heightMm: 340,
        pxPerMm: 1,
        noisePct: 0.5,
        seed: c.seed,
        smooth: [[0, 0.03, -0.05], [0.04, 0.01], [-0.06]],
        radial: { loss: 0.13, power: 2.4, u0: 0.55, v0: 0.55 },
        features: [{ kind: 'gauss', xMm: c.x, yMm: c.y, sigmaMm: c.s, contrastPct: c.peak }],
      });
      const r = analyseMura(map, { pattern: 'gray' });
      const t = clippedGaussTruth(c.x, c.y, c.s, c.peak, 600, 340);
      const b = nearest(r.blobs, c.x, c.y);
      const got = r.blobs.map((x) => `${x.kind} (${x.xMm}, ${x.yMm}) C ${x.contrastPct} A ${x.areaMm2}`).join('; ');
      expect(b, got).toBeDefined();
      expect(b!.kind, got).toBe('cloud');
      expect(relErr(b!.contrastPct, t.contrastPct), `${got}; truth C ${t.contrastPct.toFixed(2)} A ${t.areaMm2.toFixed(0)}`).toBeLessThan(0.25);
      expect(relErr(b!.areaMm2, t.areaMm2), `${got}; truth C ${t.contrastPct.toFixed(2)} A ${t.areaMm2.toFixed(0)}`).toBeLessThan(0.3);
    });
  }
});

describe('spots beside the panel edge', () => {
  // The analysed map leaves out a strip along every edge (the bezel's transition: 3 camera pixels, one
  // JPEG block on lit fields, one map pixel; about 5 mm in these photos). A spot whose half-peak region
  // reaches into that strip was measured without the part under it: the two spots below came out 31 %
  // and 38 % small. A region that reaches the map's edge is now carried across the strip to the panel's
  // edge (findingOf in lib/mura/analyse.ts). Scenes of the study's second set of edge scenes
  // (`mura-accuracy.js --edges --seeds=100`), against the generator's truth (the half-peak region inside
  // the panel and the mean over it; the generator's spot truth is checked against the Gaussian's closed
  // form in test/generator/truth.test.ts), with issue 4's tolerances.
  const scenes = [
    // a bright spot of 28 mm (5.9 %) centred 7 mm above the bottom edge (510 mm² of it inside the panel)
    { seed: 1127, what: '28 mm spot 7 mm from the bottom edge' },
    // a bright spot of 39 mm (3.0 %) centred 10 mm above the bottom edge (964 mm² inside), a cloud in a corner
    { seed: 1141, what: '39 mm spot 10 mm from the bottom edge' },
  ];
  for (const { seed, what } of scenes) {
    it(`measures a ${what} within issue 4's tolerances (scene ${seed})`, async () => {
      const { t: spot, b, got } = await edgeScene(seed, 'spot');
      expect(b, got).toBeDefined();
      expect(b!.kind, got).toBe('spot');
      expect(relErr(b!.contrastPct, spot.contrastPct), got).toBeLessThan(0.25);
      expect(relErr(b!.areaMm2, spot.areaMm2), got).toBeLessThan(0.3);
      expect(b!.detail.borderStripMm2, got).toBeGreaterThan(0);
    }, 60_000);
  }
});
