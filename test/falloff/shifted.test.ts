import { describe, expect, it } from 'vitest';
import { calibrateFromShifted, transmissionFromProfile } from '../../lib/falloff/index.js';
import type { ShiftedFrame } from '../../lib/falloff/index.js';
import { EvenfieldError } from '../../lib/errors.js';
import type { Corners } from '../../lib/types.js';
import { maxRelativeError, panelPattern, panelQuad, synthShifted, trueT } from './synth.js';
import type { LensSpec } from './synth.js';

// Photos of one non-uniform panel (synth.ts: a backlight 12 % darker at the corners, a tilt, a cloud
// and a dark corner) through a lens with cos^4 falloff, the camera moved between shots. Truth is the
// lens model written independently in synth.ts; errors are normalised at the image centre.

const W = 288;
const H = 216;

function shotSet(lens: LensSpec, quads: [number, number][][], noise = 0.01): ShiftedFrame[] {
  return quads.map((q, k) => ({
    image: synthShifted(W, H, lens, { corners: q, exposure: 1 + 0.05 * k }, noise, 100 + k),
    panelToImage: q as Corners,
    name: `shot${k + 1}.jpg`,
  }));
}

function shiftedQuads(shifts: [number, number][], fill = 0.72): [number, number][][] {
  return shifts.map(([dx, dy]) => panelQuad(W / 2 + dx * W, H / 2 + dy * H, W * fill, H * fill, 3));
}

describe('calibration from shifted photos', () => {
  it('recovers cos^4 (24 mm) + radial term of a decentred lens from 4 photos within 1 %', () => {
    const lens: LensSpec = { focal35: 24, k1: -0.06, k2: 0.03, offsetPx: [7, -5] };
    const cal = calibrateFromShifted(
      shotSet(lens, shiftedQuads([[0, 0], [0.17, 0.15], [-0.17, 0.15], [0.17, -0.15]])),
      { fullWidth: W, fullHeight: H },
    );
    const T = transmissionFromProfile(cal.profile, W, H, 1);
    expect(maxRelativeError(T, (x, y) => trueT(lens, W, H, x, y))).toBeLessThan(0.01);
    // the panel's own pattern comes out too, within 1 % (relative to its mean). The outer ring of nodes
    // lies in the 3 % border left out of the fit and is extrapolated, so only inner nodes are checked.
    const nodes = cal.panel;
    const ratios: number[] = [];
    for (let j = 1; j < nodes.height - 1; j++) {
      for (let i = 1; i < nodes.width - 1; i++) {
        ratios.push(nodes.data[j * nodes.width + i] / panelPattern(i / (nodes.width - 1), j / (nodes.height - 1)));
      }
    }
    const meanRatio = ratios.reduce((a, b) => a + b, 0) / ratios.length;
    for (const r of ratios) expect(Math.abs(r / meanRatio - 1)).toBeLessThan(0.01);
    // exposures 1, 1.05, 1.10, 1.15
    cal.exposures.forEach((e, k) => expect(e).toBeCloseTo(1 + 0.05 * k, 2));
    const c = cal.profile.fit.conditioning!;
    expect(c.separability).toBeGreaterThan(0.05);
    expect(c.separability).toBeLessThanOrEqual(1);
    expect(c.conditionNumber).toBeGreaterThan(1);
    expect(cal.profile.kind).toBe('shifted-photos');
    expect(cal.overlapFraction).toBeGreaterThan(0.5);
  });

  it('refuses shifts too small to separate lens and panel', () => {
    const lens: LensSpec = { focal35: 26 };
    const frames = shotSet(lens, shiftedQuads([[0, 0], [0.015, 0.01], [-0.015, 0.01]]));
    expect(() => calibrateFromShifted(frames)).toThrow(/camera shifts are too small .* \d\.\d % of the frame \(need at least 10 %\)/);
  });

  it('refuses a 180° roll about the lens axis: large motion, but the radial falloff does not move', () => {
    // Rolling the camera about the optical axis maps every radius onto itself, so a radial falloff and
    // a radial panel pattern stay confounded however far the panel moves in the frame.
    const lens: LensSpec = { focal35: 26 };
    const q = panelQuad(W / 2, H / 2, W * 0.7, H * 0.7, 3);
    const roll = q.map(([x, y]) => [W - 1 - x, H - 1 - y] as [number, number]);
    const nudged = panelQuad(W / 2 + 2, H / 2 + 1, W * 0.7, H * 0.7, 3);
    const frames = shotSet(lens, [q, roll, nudged]);
    let err: unknown;
    try {
      calibrateFromShifted(frames);
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(EvenfieldError);
    expect((err as Error).message).toMatch(/cannot separate lens falloff.*separability 0\.0/);
  });

  it('refuses photos that show different parts of the panel', () => {
    // a panel three frames wide and high; each photo sees a different third of it
    const lens: LensSpec = { focal35: 26 };
    const big = (cx: number, cy: number) => panelQuad(cx * W, cy * H, 3 * W, 3 * H, 0);
    const frames = shotSet(lens, [big(1.4, 1.4), big(-0.4, 1.4), big(0.5, -0.4)]);
    expect(() => calibrateFromShifted(frames)).toThrow(/photos do not overlap on the panel/);
  });

  it('refuses fewer than 3 photos, photos of different sizes, and a photo without the panel', () => {
    const lens: LensSpec = { focal35: 26 };
    const frames = shotSet(lens, shiftedQuads([[0, 0], [0.15, 0.1], [-0.15, 0.1]]));
    expect(() => calibrateFromShifted(frames.slice(0, 2))).toThrow(/at least 3 photos/);
    const odd = { ...frames[2], image: { width: 10, height: 10, data: new Float32Array(100) } };
    expect(() => calibrateFromShifted([frames[0], frames[1], odd])).toThrow(/shot3\.jpg is 10×10 but shot1\.jpg is 288×216/);
    const away: ShiftedFrame = { ...frames[2], panelToImage: panelQuad(5 * W, 5 * H, 50, 40) as Corners };
    expect(() => calibrateFromShifted([frames[0], frames[1], away])).toThrow(/shot3\.jpg.*panel covers too little/);
  });
});
