// What 8-bit JPEG coding can fake is not reported: patches no larger than two 8 x 8 blocks (JPEG codes
// each block on its own: ITU-T T.81 / ISO/IEC 10918-1, baseline DCT on 8 x 8 blocks) and small findings
// fainter than one code value at the panel's level (IEC 61966-2-1 transfer, see srgbCodeStepPct).
import { describe, expect, it } from 'vitest';
import { analyseMura } from '../../lib/mura/index.js';
import { srgbCodeStepPct } from '../../lib/photometry/index.js';
import { synthMap } from '../../scripts/mura-synth.js';
import { nearest } from './helpers.js';

const W = 240;
const H = 150;

function map(sigmaMm: number, peakPct: number) {
  return synthMap({
    widthMm: W,
    heightMm: H,
    pxPerMm: 2,
    noisePct: 0.3,
    seed: 31,
    smooth: [[0, 0.02], [0.03]],
    features: [{ kind: 'gauss', xMm: 100, yMm: 70, sigmaMm, contrastPct: peakPct }],
  });
}

describe('coding limits', () => {
  it('drops a finding no wider than two JPEG blocks, and keeps it when the input is not JPEG', () => {
    // sigma 1 mm: half-peak diameter 2.35 mm; blocks of 2 mm on the panel -> must reach 4 mm
    const m = map(1, 8);
    const plain = analyseMura(m, { pattern: 'gray' });
    const spot = nearest(plain.blobs, 100, 70);
    expect(spot && Math.hypot(spot.xMm - 100, spot.yMm - 70)).toBeLessThan(1);
    const jpeg = analyseMura(m, { pattern: 'gray', jpegBlockMm: 2 });
    expect(jpeg.blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 5)).toHaveLength(0);
    // the same spot twice as wide spans more than two 2 mm blocks and stays
    const wide = analyseMura(map(2, 8), { pattern: 'gray', jpegBlockMm: 2 });
    expect(wide.blobs.some((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 1)).toBe(true);
    // a block's rounding is a code value or two: the small spot at 8 % peak is four code values of 2 % and
    // stays; at 3 % per code value (peak under three code values) it goes
    expect(analyseMura(m, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 2 }).blobs.some((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 1)).toBe(true);
    expect(analyseMura(m, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 3 }).blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 5)).toHaveLength(0);
  });

  it('drops a small finding fainter than one 8-bit code value, and keeps it at a finer step', () => {
    // sigma 3 mm (7 mm across): peak 2 %, mean over the half-peak region 2 / (2 ln 2) = 1.44 %
    const m = map(3, 2);
    const coarse = analyseMura(m, { pattern: 'gray', codeStepPct: 2 });
    expect(coarse.blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 5)).toHaveLength(0);
    const fine = analyseMura(m, { pattern: 'gray', codeStepPct: 1 });
    const s = fine.blobs.find((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 1);
    expect(s?.kind).toBe('spot');
    expect(s!.contrastPct).toBeGreaterThan(1);
    expect(s!.contrastPct).toBeLessThan(2);
  });

  it('takes the code step where the finding is: darker there (lens falloff) means a coarser step', () => {
    // the same spot (mean about 1.44 %) on a panel whose centre sits at linear 0.578 (code 200: one code
    // value is 1.12 % there) is kept; with the lens passing 35 % of the light where the spot is (linear
    // 0.202, code 124: 1.74 %) it is dropped. Steps from the sRGB transfer of IEC 61966-2-1.
    const m = map(3, 2);
    expect(srgbCodeStepPct(0.578)).toBeCloseTo(1.12, 1);
    expect(srgbCodeStepPct(0.578 * 0.35)).toBeCloseTo(1.74, 1);
    const flat = { cols: 2, rows: 2, data: Float32Array.from([1, 1, 1, 1]) };
    const dimLeft = { cols: 3, rows: 2, data: Float32Array.from([0.35, 0.35, 1, 0.35, 0.35, 1]) };
    const near = (r: ReturnType<typeof analyseMura>) => r.blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 5);
    expect(near(analyseMura(m, { pattern: 'gray', codeStepPct: 1.12, codeLevel: { centreY: 0.578, gain: flat } }))).toHaveLength(1);
    expect(near(analyseMura(m, { pattern: 'gray', codeStepPct: 1.12, codeLevel: { centreY: 0.578, gain: dimLeft } }))).toHaveLength(0);
  });

  it('a JPEG decoded in float: the level step is a fraction of a code, the two-block rule still counts whole codes', () => {
    // The spot of the test above (mean about 1.44 %) where one code value is 1.74 % of the level (linear
    // 0.202, code 124): dropped under whole-code decoding, kept when the level step is 0.375 of a code (a
    // JPEG of quality 92 decoded in float: DC quantiser 3, the ITU-T T.81 Annex K table scaled as libjpeg
    // does for quality 92)
    const m = map(3, 2);
    const flat = { cols: 2, rows: 2, data: Float32Array.from([1, 1, 1, 1]) };
    const near = (r: ReturnType<typeof analyseMura>) => r.blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 5);
    expect(near(analyseMura(m, { pattern: 'gray', codeStepPct: 1.74, codeLevel: { centreY: 0.202, gain: flat, stepCodes: 1 } }))).toHaveLength(0);
    expect(near(analyseMura(m, { pattern: 'gray', codeStepPct: 0.375 * 1.74, codeLevel: { centreY: 0.202, gain: flat, stepCodes: 0.375 } }))).toHaveLength(1);
    // a spot no wider than two 2 mm blocks at 8 % peak (6 % as measured): kept where a code value is 1.12 %
    // of the level (code 200); where it is 3.1 % (linear 0.05, code 66) the spot is under three whole codes
    // and goes, however fine the level step (a quantised AC term draws such patterns over its block)
    const small = map(1, 8);
    expect(srgbCodeStepPct(0.05)).toBeCloseTo(3.11, 1);
    expect(near(analyseMura(small, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 0.375 * 1.12, codeLevel: { centreY: 0.578, gain: flat, stepCodes: 0.375 } }))).toHaveLength(1);
    expect(near(analyseMura(small, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 0.375 * 3.11, codeLevel: { centreY: 0.05, gain: flat, stepCodes: 0.375 } }))).toHaveLength(0);
  });

  it('a photo without noise: a finding of any size must beat the bare staircase share of a code value', () => {
    // a broad cloud (sigma 20 mm: 47 mm across) of 2.2 % peak, about 1.6 % mean (peak / (2 ln 2) for a
    // Gaussian over its half-peak region): a JPEG's plateau rule for findings of 25 mm and more asks 0.6
    // of the level step, 0.45 % while the codes are dithered (0.375 of a code of 2 %) and 1.2 % on a
    // staircase of whole codes (step 1 code): it stays either way by that rule; the staircase's own rule
    // (plateau share 1: a whole code value at any size) drops it
    const m = map(20, 2.2);
    const flat = { cols: 2, rows: 2, data: Float32Array.from([1, 1, 1, 1]) };
    const near = (r: ReturnType<typeof analyseMura>) => r.blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 10);
    const dithered = analyseMura(m, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 0.375 * 2, codeLevel: { centreY: 0.2, gain: flat, stepCodes: 0.375 } });
    expect(near(dithered)).toHaveLength(1);
    const bare = analyseMura(m, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 2, codeLevel: { centreY: 0.2, gain: flat, stepCodes: 1, bareStepCodes: 1 } });
    expect(near(bare)).toHaveLength(0);
  });

  it('says the coding limits in the smallest resolvable contrast, by feature size', () => {
    // the map's noise (0.3 %) alone would resolve a few tenths of a percent at 30 and 100 mm; an 8-bit
    // PNG whose code value is 2 % of the level needs the whole step under 25 mm, half of it to 100 mm
    // and nothing beyond (the rules of the test above); a JPEG 0.6 of its step at every size from
    // 25 mm; a staircase of whole codes the whole code at every size
    const m = map(3, 0);
    const flat = { cols: 2, rows: 2, data: Float32Array.from([1, 1, 1, 1]) };
    const png = analyseMura(m, { pattern: 'gray', codeStepPct: 2, codeLevel: { centreY: 0.2, gain: flat, stepCodes: 1 } }).resolvableContrastPct;
    expect(png['3']).toBeGreaterThanOrEqual(2);
    expect(png['10']).toBeGreaterThanOrEqual(2);
    expect(png['30']).toBeGreaterThanOrEqual(1);
    expect(png['100']).toBeLessThan(1);
    const jpeg = analyseMura(m, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 0.75, codeLevel: { centreY: 0.2, gain: flat, stepCodes: 0.375 } }).resolvableContrastPct;
    expect(jpeg['100']).toBeGreaterThanOrEqual(0.6 * 0.75);
    const bare = analyseMura(m, { pattern: 'gray', jpegBlockMm: 2, codeStepPct: 2, codeLevel: { centreY: 0.2, gain: flat, stepCodes: 1, bareStepCodes: 1 } }).resolvableContrastPct;
    for (const d of ['3', '10', '30', '100']) expect(bare[d]).toBeGreaterThanOrEqual(2);
  });

  it('drops a half-peak region smaller than a quarter of the smallest feature searched for', () => {
    // sigma 0.4 mm on a map of 0.5 mm pixels: measured over about 1.9 mm² (the map's own smoothing).
    // Kept with the default smallest feature (3 mm: a quarter of its disc is 1.77 mm²), dropped when the
    // smallest feature is 6 mm (7.1 mm²).
    const m = map(0.4, 30);
    const near = (r: ReturnType<typeof analyseMura>) => r.blobs.filter((b) => Math.hypot(b.xMm - 100, b.yMm - 70) < 5);
    const kept = near(analyseMura(m, { pattern: 'gray' }));
    expect(kept).toHaveLength(1);
    expect(kept[0]!.areaMm2).toBeGreaterThan(0.25 * Math.PI * 1.5 ** 2);
    expect(kept[0]!.areaMm2).toBeLessThan(0.25 * Math.PI * 3 ** 2);
    expect(near(analyseMura(m, { pattern: 'gray', minFeatureMm: 6 }))).toHaveLength(0);
  });
});
