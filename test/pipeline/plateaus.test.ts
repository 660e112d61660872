// A JPEG's 8-bit codes: dithered by the photo's noise, or a bare staircase of whole codes
// (lib/pipeline/plateaus.ts), and what the measurement makes of a photo without noise.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { renderPhoto } from '../../fixtures/generator/index.js';
import type { PhotoSpec } from '../../fixtures/generator/index.js';
import { plateauShare } from '../../lib/pipeline/plateaus.js';
import { measurePhoto } from '../../lib/pipeline/index.js';
import type { Corners } from '../../lib/types.js';
import { generatedPhotoOptions, STUDY_QUALITY } from '../../scripts/generated-options.js';
import { graySpec } from '../../scripts/mura-scenes.js';

const COLS = 60;
const ROWS = 40;
const ALL: Corners = [
  [0, 0],
  [8 * COLS, 0],
  [8 * COLS, 8 * ROWS],
  [0, 8 * ROWS],
];

/** Flat blocks over a field rising `codes` code values from left to right; each block's mean as its
 *  DC term carries it: 8 x the mean of the level-shifted samples (the 8 x 8 forward DCT of ITU-T T.81
 *  with its 1/4 C(0) C(0) = 1/8 factor on a sum of 64: computed; the clause from memory), rounded to a
 *  multiple of the quantiser q, over 8, plus the shift. `whole`: the samples were rounded to whole
 *  codes before coding (each block inside one plateau). */
function blocks(q: number, codes: number, whole: boolean) {
  const mean = new Float32Array(COLS * ROWS);
  for (let j = 0; j < ROWS; j++)
    for (let i = 0; i < COLS; i++) {
      const level = 100 + (codes * (i + 0.37 * j)) / (COLS + 0.37 * ROWS);
      const m = whole ? Math.round(level) : level;
      mean[j * COLS + i] = (Math.round((8 * (m - 128)) / q) * q) / 8 + 128;
    }
  return { cols: COLS, rows: ROWS, blockW: 8, blockH: 8, mean, dcQuant: q };
}

describe('plateau share of flat JPEG blocks', () => {
  it('is 1 for a staircase of whole codes and about 0 when the means are spread over every fraction', () => {
    for (const q of [1, 2, 3, 5]) {
      expect(plateauShare(blocks(q, 12, true), ALL)!.share).toBeGreaterThan(0.95);
      // the decoded means of a dithered field lie within q / 16 of a whole code for a share q / 8 of
      // blocks (computed: the DC grid's points over one period), which the share takes out
      expect(plateauShare(blocks(q, 12, false), ALL)!.share).toBeLessThan(0.08);
    }
  });

  it('counts a photo whose blocks are nearly all noisy as dithered, however its few flat blocks lie', () => {
    // 1 % of the blocks flat, all on whole codes: the samples of those few rounded alike (noise that
    // reaches nearly every block's AC terms dithers the codes)
    const b = blocks(3, 12, true);
    const sparse = Float32Array.from(b.mean, (m, k) => (k % 100 === 0 ? m : NaN));
    const big = { ...b, cols: COLS, rows: ROWS, mean: sparse };
    const few = plateauShare(big, ALL);
    expect(few === null || few.share === 0).toBe(true);
    // ...and so is a larger field with 300 such blocks, enough for a verdict: 0, not 1
    const many = new Float32Array(200 * 150).fill(NaN);
    for (let k = 0; k < many.length; k += 100) many[k] = 100 + ((k * 7) % 13); // whole codes 100-112
    const r = plateauShare({ cols: 200, rows: 150, blockW: 8, blockH: 8, mean: many, dcQuant: 1 }, [
      [0, 0],
      [1600, 0],
      [1600, 1200],
      [0, 1200],
    ]);
    expect(r!.flatBlocks).toBe(300);
    expect(r!.share).toBe(0);
  });

  it('cannot tell within a field of a code or two, or when the DC quantiser is 8 or more', () => {
    expect(plateauShare(blocks(3, 2, true), ALL)).toBeNull();
    expect(plateauShare(blocks(8, 12, true), ALL)).toBeNull();
  });
});

describe('a photo without noise', () => {
  const dir = mkdtempSync(join(tmpdir(), 'evenfield-plateaus-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  async function measure(spec: PhotoSpec, name: string) {
    const r = await renderPhoto(spec);
    const file = join(dir, `${name}.jpg`);
    writeFileSync(file, r.buffer);
    const m = await measurePhoto(
      file,
      generatedPhotoOptions(spec, {
        corners: r.truth.corners,
        falloff: { kind: 'cos4', focal35mm: spec.camera.focal35 },
        quality: STUDY_QUALITY,
        mura: true,
      }),
    );
    return m.result;
  }

  it('is seen as a staircase of whole codes, and its plateaus are not reported as mura', async () => {
    // clean gray fields of the mura study (smooth variation only), drawn without sensor noise: before
    // the plateau share, the first gave 12 findings of SEMU 1 or more (islands and rings about a code
    // value high) and the second was refused as moiré of 1.8 % (the channels' code contours side by side)
    for (const seed of [5001, 5028]) {
      const spec = graySpec(seed, true, 2400, 1600);
      spec.noise = null;
      const res = await measure(spec, `quiet-${seed}`);
      expect(res.status).toBe('ok');
      expect(res.decode!.codePlateauShare).toBeGreaterThan(0.9);
      expect(res.warnings.some((w) => w.includes('almost no noise'))).toBe(true);
      expect(res.mura!.blobs.filter((b) => b.semu >= 1)).toEqual([]);
    }
  });

  it('with the sensor noise of the study, the codes are dithered and nothing changes', async () => {
    const res = await measure(graySpec(5001, true, 2400, 1600), 'noisy-5001');
    expect(res.decode!.codePlateauShare).toBeLessThan(0.1);
    expect(res.warnings.some((w) => w.includes('almost no noise'))).toBe(false);
  });
});
