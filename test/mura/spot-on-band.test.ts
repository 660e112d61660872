// A bright spot on a bright band near the panel's top edge. The round search's candidates of the band
// (peaked elsewhere along it) had been grouped with the spot's as one feature, because their centroids
// lay within half the smaller one's size; the first round then masked only the spot, the band left in
// the next surface fit pulled it (model error 1.7 %), and three times that error, the floor for every
// finding, hid both bands of the scene. The scene is one of the mura study's generated photos
// (scripts/mura-scenes.ts, seed 1033 of the set with lines), checked against the generator's truth
// (each feature's mean contrast and area over its own half-peak region).
import { describe, expect, it } from 'vitest';
import { graySpec } from '../../scripts/mura-scenes.js';
import { measureGenerated } from './helpers.js';

describe('a spot on a band', () => {
  it('is found apart from the band, and both bands of the scene are found and measured', async () => {
    const { truth, result } = await measureGenerated(graySpec(1033, false, 2400, 1600, 'half-peak', null, false, true), 'S1033_gray50');
    expect(result.status).toBe('ok');
    // the scene: bright bands at y 52 mm (34 mm wide, 7.8 % mean) and y 238 mm (48 mm, 3.0 %), a bright
    // spot of 23 mm (7.7 %) on the first
    const bands = truth.features.filter((f) => f.kind === 'band' && f.visible);
    const spot = truth.features.find((f) => f.kind === 'spot' && f.semu >= 2)!;
    expect(bands).toHaveLength(2);
    for (const t of bands) {
      const b = result.blobs.find((x) => x.kind === 'band' && x.polarity === 'bright' && Math.abs(x.yMm - t.yMm) < 10);
      expect(b, `band at y ${t.yMm.toFixed(0)} mm`).toBeDefined();
      expect(Math.abs(b!.contrastPct / t.contrastPct - 1)).toBeLessThan(0.25);
      expect(Math.abs(b!.areaMm2 / t.areaMm2 - 1)).toBeLessThan(0.3);
    }
    const s = result.blobs.find((x) => x.kind === 'spot' && Math.hypot(x.xMm - spot.xMm, x.yMm - spot.yMm) < 10);
    expect(s).toBeDefined();
    expect(Math.abs(s!.contrastPct / spot.contrastPct - 1)).toBeLessThan(0.25);
  }, 60_000);
});
