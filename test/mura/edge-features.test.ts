// Clouds at the panel's edge. The whole-panel surface has the least support at the edges and bent
// towards a cloud there, masked or not: 52 % and 55 % of the contrast of the two clouds below went into
// it. They are now measured against a quadratic fitted over a ring around them (remeasureEdgeFeatures
// in lib/mura/analyse.ts). The scenes are the mura study's generated photos with the features moved
// against the edges (scripts/mura-scenes.ts toEdges, seeds 1011 and 1013 of `mura-accuracy.js --edges`),
// checked against the generator's truth (each feature's mean contrast and area over its own half-peak
// region inside the panel) with issue 4's tolerances.
import { describe, expect, it } from 'vitest';
import { graySpec } from '../../scripts/mura-scenes.js';
import { measureGenerated } from './helpers.js';

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
      const { truth, result } = await measureGenerated(graySpec(seed, false, 2400, 1600, 'half-peak', null, false, false, true), `E${seed}_gray50`);
      expect(result.status).toBe('ok');
      const cloud = truth.features.find((f) => f.kind === 'cloud' && f.semu >= 3)!;
      expect(cloud, 'the scene has a cloud of SEMU >= 3').toBeDefined();
      const b = result.blobs.find((x) => x.polarity === 'bright' && Math.hypot(x.xMm - cloud.xMm, x.yMm - cloud.yMm) < 0.5 * Math.sqrt(cloud.areaMm2));
      const got = result.blobs.map((x) => `${x.kind} (${x.xMm}, ${x.yMm}) C ${x.contrastPct} A ${x.areaMm2}`).join('; ');
      expect(b, got).toBeDefined();
      expect(Math.abs(b!.contrastPct / cloud.contrastPct - 1), got).toBeLessThan(0.25);
      expect(Math.abs(b!.areaMm2 / cloud.areaMm2 - 1), got).toBeLessThan(0.3);
    }, 60_000);
  }
});
