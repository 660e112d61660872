// Two clouds side by side, their flanks overlapping so that the saddle between them lies above half the
// lower one's height: each is a feature of its own, measured over its half-peak region within its own
// catchment (detect.ts basinHalfPeak). Truths are analytical: each cloud's half-peak area and mean
// contrast alone, from the Gaussian's closed form (helpers.ts gaussTruth); tolerances are issue 4's
// (mean contrast within 25 %, area within 30 %). Before the catchments the lower cloud was lost (first
// scene) or read as a spot of 0.5 % of its area beside a higher cloud twice its size (second). In the
// third the lower cloud's cap above the saddle is of a spot's size: it read as a spot of 1 % beside a
// cloud of twice the area until a catchment of a cloud's size was tried before a spot above the saddle.
import { describe, expect, it } from 'vitest';
import { graySpec, otherSmooth } from '../../scripts/mura-scenes.js';
import { analyseBumps, gaussTruth, measureGenerated, nearest, relErr } from './helpers.js';
import type { GaussBump } from './helpers.js';

describe('clouds side by side', () => {
  const cases: [string, GaussBump, GaussBump][] = [
    ['a sharp 10 % cloud beside a broad 7 % one, 120 mm apart', { x: 200, y: 150, s: 31, peak: 10 }, { x: 320, y: 180, s: 50, peak: 7 }],
    ['an 8 % and a 6 % cloud of about the same size, 120 mm apart', { x: 200, y: 150, s: 40, peak: 8 }, { x: 320, y: 180, s: 45, peak: 6 }],
    ['a 6 % and a 5 % cloud of one size, 100 mm apart', { x: 250, y: 170, s: 35, peak: 6 }, { x: 350, y: 170, s: 35, peak: 5 }],
  ];
  for (const [name, a, b] of cases) {
    it(`${name}: both found as clouds, each with its own contrast and area`, () => {
      const r = analyseBumps([a, b], 5);
      const clouds = r.blobs.filter((f) => f.semu >= 1);
      expect(clouds).toHaveLength(2);
      for (const c of [a, b]) {
        const t = gaussTruth(c.s, c.peak);
        const f = nearest(clouds, c.x, c.y)!;
        expect(f.kind).toBe('cloud');
        expect(Math.hypot(f.xMm - c.x, f.yMm - c.y)).toBeLessThan(0.5 * c.s);
        expect(relErr(f.contrastPct, t.contrastPct)).toBeLessThan(0.25);
        expect(relErr(f.areaMm2, t.areaMm2)).toBeLessThan(0.3);
      }
    });
  }
});

// The mura study's scene 1033 with the panel's light falling steeply into the corners
// (`mura-accuracy.js --smooth=steep`): a 129 mm bright cloud of 7.0 % centred 50 mm below the top edge,
// a second bright cloud 140 mm from it and a band. The joint fit carries both clouds with bumps of their
// own (and, with the clouds' catchments, finds this one again against it: before, it kept the rounds'
// 5.9 %). A ring's quadratic at the top edge (remeasureEdgeFeatures) could not follow the steep fall and
// read the cloud at 12.2 %; a cloud the joint fit carries is now left to it. Checked against the generator's
// truth (the cloud's mean contrast and area over its own half-peak region) with issue 4's tolerances.
describe('a cloud the joint fit carries, at the top edge of a panel falling steeply into the corners', () => {
  it('keeps the figures of the joint fit (scene 1033, --smooth=steep)', async () => {
    const spec = graySpec(1033, false, 2400, 1600, 'half-peak');
    otherSmooth(spec, 'steep');
    const { truth, result } = await measureGenerated(spec, 'S1033_gray50');
    expect(result.status).toBe('ok');
    const t = truth.features.filter((f) => f.kind === 'cloud' && f.polarity === 'bright' && f.semu >= 3).sort((a, b) => a.yMm - b.yMm)[0];
    expect(t.yMm).toBeLessThan(60);
    const b = nearest(result.blobs, t.xMm, t.yMm)!;
    const got = `${b.kind} (${b.xMm}, ${b.yMm}) C ${b.contrastPct} A ${b.areaMm2}; truth C ${t.contrastPct.toFixed(2)} A ${t.areaMm2.toFixed(0)}`;
    expect(b.kind, got).toBe('cloud');
    expect(Math.hypot(b.xMm - t.xMm, b.yMm - t.yMm), got).toBeLessThan(0.5 * Math.sqrt(t.areaMm2 / Math.PI));
    expect(relErr(b.contrastPct, t.contrastPct), got).toBeLessThan(0.25);
    expect(relErr(b.areaMm2, t.areaMm2), got).toBeLessThan(0.3);
  });
});
