// Elongated mura at any angle. The study's scenes draw round spots and clouds; real ones are often
// elongated (a pressure mark, a clouded diffuser), and `mura-accuracy.js --elliptic` draws the same
// scenes with spots and clouds stretched into ellipses (aspect 1-3, any angle, the same area). One of
// them, a faint dark ellipse, was lost: resolved on no level with a signal of 10, it had its finest view
// chosen - a speck of noise on its own top, measured against the ellipse as its surround and dropped as
// insignificant - and nothing else was tried (the group fallback in detectFeatures, lib/mura/detect.ts).
// Checked against the generator's truth (the half-peak region and its mean; the ellipse's area and mean
// are checked against the Gaussian's closed form in test/generator/truth.test.ts) with issue 4's tolerance on
// contrast; the feature is of SEMU 1.57, over the 1.5 of issue 4's recall line.
import { describe, expect, it } from 'vitest';
import { graySpec } from '../../scripts/mura-scenes.js';
import { measureGenerated, relErr } from './helpers.js';

describe('an elongated cloud at an angle', () => {
  it('finds a faint dark ellipse of 94 x 35 mm at 42 degrees (scene 1055 of the elliptic set)', async () => {
    const spec = graySpec(1055, false, 2400, 1600, 'half-peak', null, false, false, false, true);
    const f = spec.panel.features!.find((x) => x.kind === 'cloud' && (x.aspect ?? 1) > 2)!;
    expect(f, 'the scene has an elongated cloud').toBeDefined();
    const { truth, result } = await measureGenerated(spec, 'L1055_gray50');
    expect(result.status).toBe('ok');
    const t = truth.features.find((x) => x.kind === 'cloud' && x.polarity === 'dark' && x.semu >= 1.5)!;
    expect(t, 'the truth has it at SEMU >= 1.5').toBeDefined();
    const got = result.blobs.map((x) => `${x.kind} (${x.xMm}, ${x.yMm}) C ${x.contrastPct} A ${x.areaMm2}`).join('; ');
    const b = result.blobs.find((x) => x.polarity === 'dark' && Math.hypot(x.xMm - t.xMm, x.yMm - t.yMm) < 0.5 * Math.sqrt(t.areaMm2));
    expect(b, `${got}; truth at (${t.xMm.toFixed(0)}, ${t.yMm.toFixed(0)}) C ${t.contrastPct.toFixed(2)} A ${t.areaMm2.toFixed(0)}`).toBeDefined();
    expect(b!.kind, got).toBe('cloud');
    expect(relErr(b!.contrastPct, t.contrastPct), got).toBeLessThan(0.25);
  }, 60_000);
});
