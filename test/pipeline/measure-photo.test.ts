// One photo end to end against the generator's truth, which is computed from the emitted field, not
// from the rendered photo (fixtures/generator does not import lib/).
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { randomScene, renderPhoto } from '../../fixtures/generator/index.js';
import { DEFAULT_MEASURE_OPTIONS, measurePhoto, orientCorners, type MeasureOptions } from '../../lib/pipeline/index.js';
import { quarterTurn } from '../../lib/pipeline/measure-photo.js';
import type { Corners } from '../../lib/types.js';

const dir = mkdtempSync(join(tmpdir(), 'ef-pipe-'));

/** A demo photo's white field: the demo panel's size, a 9-point grid, no report images. */
const DEMO_WHITE: MeasureOptions = {
  ...DEFAULT_MEASURE_OPTIONS,
  pattern: 'white',
  patternLevel: null,
  panelSizeMm: { width: 597.9, height: 336.3 },
  grid: { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
  artifacts: false,
};

async function photo(seed: number, output: 'png16' | 'jpeg') {
  const spec = randomScene(seed, { width: 1200, height: 900, features: [0, 0], k1: [0, 0], focal35: [50, 50] });
  spec.camera.cos4 = false;
  spec.noise = null;
  if (output === 'png16') spec.output = { format: 'png', bitDepth: 16 };
  const r = await renderPhoto(spec);
  const file = join(dir, `S${seed}_white.${r.ext}`);
  writeFileSync(file, r.buffer);
  return { file, spec, truth: r.truth };
}

describe('measurePhoto', () => {
  it('reproduces the true 25-point grid of a noise-free 16-bit photo (truth: disc means of the emitted field)', async () => {
    const { file, spec, truth } = await photo(7, 'png16');
    const m = await measurePhoto(file, {
      ...DEFAULT_MEASURE_OPTIONS,
      pattern: 'white',
      patternLevel: null,
      panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
      grid: { layout: 25, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
      mura: false,
    });
    expect(m.result.status).toBe('ok');
    const tg = (truth.grids as unknown as { layout: number; placement: string; points: { relative: number; uprime: number; vprime: number }[] }[]).find(
      (g) => g.layout === 25 && g.placement === 'cells',
    )!;
    m.result.grid!.points.forEach((p, k) => {
      // 0.1 %: the rectified map averages camera pixels (area averaging), the truth integrates the
      // emitted field exactly; on a smooth field the two differ by far less than this (measured 0.00x %)
      expect(Math.abs(p.relative / tg.points[k].relative - 1)).toBeLessThan(0.001);
      expect(Math.abs(p.uprime - tg.points[k].uprime)).toBeLessThan(0.0005);
      expect(Math.abs(p.vprime - tg.points[k].vprime)).toBeLessThan(0.0005);
    });
    // corners within 0.2 % of the image diagonal (issue acceptance), here far better
    const diag = Math.hypot(1200, 900);
    m.result.corners!.forEach((c, k) => expect(Math.hypot(c[0] - truth.corners[k][0], c[1] - truth.corners[k][1]) / diag).toBeLessThan(0.002));
    // the report gets the photo as taken and the panel map
    expect(m.artifacts?.thumbnail?.width).toBeGreaterThan(100);
    expect(m.artifacts?.relMap?.width).toBeGreaterThan(100);
  });

  it('keeps the ringing of a JPEG at the bezel out of the mura analysis of a lit field (demo HX27-3101, a good panel)', async () => {
    // The step from the dark bezel to the lit panel rings inside the 8 x 8 blocks that hold it (JPEG codes
    // each block on its own, ITU-T T.81): a bright rim of about 2 % a millimetre or two inside the edge.
    // The generator planted nothing on this panel (fixtures/demo/truth/planted.md); with the edge border
    // one block wider on JPEG input nothing is found within 2 % of an edge (without it: a 12 mm "line" of
    // SEMU 1.0 along the bottom edge).
    const m = await measurePhoto(join(__dirname, '..', '..', 'fixtures', 'demo', 'HX27-3101_white.jpg'), DEMO_WHITE);
    expect(m.result.status).toBe('ok');
    expect(m.result.decode?.jpegSamples).toBe('float');
    const nearEdge = m.result.blobs!.filter((b) => Math.min(b.u, 1 - b.u, b.v, 1 - b.v) < 0.02);
    expect(nearEdge).toEqual([]);
  });

  it('does the same for a TIFF with JPEG compression (the demo photo re-saved that way)', async () => {
    // the same codec in another container rings the same way (without the TIFF's compression read: a
    // 9 mm dark "line" of SEMU 3.2 along the bottom edge)
    const tif = join(dir, 'HX27-3101_white.tif');
    await sharp(join(__dirname, '..', '..', 'fixtures', 'demo', 'HX27-3101_white.jpg')).tiff({ compression: 'jpeg', quality: 80 }).toFile(tif);
    const m = await measurePhoto(tif, DEMO_WHITE);
    expect(m.result.status).toBe('ok');
    expect(m.result.decode?.format).toBe('tiff');
    expect(m.result.decode?.jpegCoded).toBe(true);
    const nearEdge = m.result.blobs!.filter((b) => Math.min(b.u, 1 - b.u, b.v, 1 - b.v) < 0.02);
    expect(nearEdge).toEqual([]);
  });

  it('takes a photo turned a quarter against the panel size (no EXIF orientation) without stretching the panel', async () => {
    // the demo's HX27-3104 (a cloud planted, fixtures/demo/truth/planted.md) turned 90° clockwise and
    // half a turn, pixels rotated and no orientation tag. The quarter-turned outline is portrait against
    // a landscape size: its long side is taken as the panel's width, the top as the photo's left, which
    // for a clockwise quarter turn is the half-turned view. Before, the outline was mapped onto the
    // size as it stood: the panel stretched about threefold, the cloud at (0.60, 0.35) instead.
    const src = join(__dirname, '..', '..', 'fixtures', 'demo', 'HX27-3104_white.jpg');
    const quarter = join(dir, 'Q1_white.jpg');
    const half = join(dir, 'Q2_white.jpg');
    await sharp(src).rotate(90).jpeg({ quality: 95 }).toFile(quarter);
    await sharp(src).rotate(180).jpeg({ quality: 95 }).toFile(half);
    const q = (await measurePhoto(quarter, DEMO_WHITE)).result;
    const h = (await measurePhoto(half, DEMO_WHITE)).result;
    expect(q.warnings.some((w) => w.includes('the photo is turned a quarter against the panel'))).toBe(true);
    expect(h.warnings.some((w) => w.includes('turned a quarter'))).toBe(false);
    const cq = q.blobs!.find((b) => b.kind === 'cloud')!;
    const ch = h.blobs!.find((b) => b.kind === 'cloud')!;
    // the same panel either way: the cloud at the same place (within 2 % of the panel) and of the same
    // area (within 10 %: the two photos are resampled and coded differently), the same uniformity
    // (within the criteria's 1-point allowance, common practice)
    expect(Math.hypot(cq.u - ch.u, cq.v - ch.v)).toBeLessThan(0.02);
    expect(Math.abs(cq.areaMm2 / ch.areaMm2 - 1)).toBeLessThan(0.1);
    expect(Math.abs(q.uniformity!.minOverMaxPct - h.uniformity!.minOverMaxPct)).toBeLessThan(1);
  });

  it('warns when the panel size given does not have the aspect the outline shows through the EXIF focal length', async () => {
    // the demo panel is 597.9 x 336.3 mm (16:9, fixtures/demo/truth/planted.md); given as 16:10 (597.9 x
    // 373.7, 10 % off) the areas and SEMU would rest on the wrong scale. A rectangle seen through a known
    // focal length gives its own aspect (the pose of a plane from its homography and the focal length,
    // common practice)
    const src = join(__dirname, '..', '..', 'fixtures', 'demo', 'HX27-3101_white.jpg');
    const right = (await measurePhoto(src, { ...DEMO_WHITE, mura: false })).result;
    const wrong = (await measurePhoto(src, { ...DEMO_WHITE, mura: false, panelSizeMm: { width: 597.9, height: 373.7 } })).result;
    expect(right.warnings.filter((w) => w.includes('check --panel-size'))).toEqual([]);
    expect(wrong.warnings.some((w) => /has an aspect of 1\.7[0-9]+, the panel size given 1\.600/.test(w))).toBe(true);
  });

  it('tells a quarter turn only from outlines clearly of the other orientation', () => {
    expect(quarterTurn(0.57, 1.78)).not.toBeNull();
    expect(quarterTurn(1.7, 0.6)).not.toBeNull();
    // a 16:9 panel seen at a steep angle, or a square one: not a quarter turn
    expect(quarterTurn(1.3, 1.78)).toBeNull();
    expect(quarterTurn(0.9, 1.0)).toBeNull();
  });

  it('says from what size it resolves mura features when the photo gives the panel too few pixels', async () => {
    // Two samples across the smallest feature (the Nyquist-Shannon sampling theorem; common practice for
    // the smallest feature an image can show): the mura list of a coarse photo says nothing of smaller
    // features, and the photo must say so. The same scene photographed at 480 x 360 and at 1200 x 900.
    const opts = (spec: { panel: { widthMm: number; heightMm: number } }) => ({
      ...DEFAULT_MEASURE_OPTIONS,
      pattern: 'white' as const,
      patternLevel: null,
      panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
      grid: { layout: 9 as const, placement: 'cells' as const, insetFraction: 0.1, spotRadiusPct: 2 },
      muraOptions: { minFeatureMm: 3 },
      artifacts: false,
    });
    for (const [width, height] of [
      [480, 360],
      [1200, 900],
    ] as const) {
      const spec = randomScene(11, { width, height, features: [0, 0], k1: [0, 0], focal35: [50, 50], fill: [0.7, 0.7] });
      spec.camera.cos4 = false;
      const r = await renderPhoto(spec);
      const file = join(dir, `R${width}_white.${r.ext}`);
      writeFileSync(file, r.buffer);
      const m = await measurePhoto(file, opts(spec));
      expect(m.result.status).toBe('ok');
      const pxPerMm = m.result.geometry!.pxPerMm / m.result.mura!.workScale!;
      expect(m.result.mura!.resolvedFromMm).toBeCloseTo(2 / pxPerMm, 2);
      const said = m.result.warnings.filter((w) => w.startsWith('the photo resolves mura features from'));
      if (width === 480) {
        // about 0.58 px per mm on the panel: features from about 3.5 mm
        expect(m.result.mura!.resolvedFromMm).toBeGreaterThan(3.1);
        expect(said).toHaveLength(1);
        expect(said[0]).toContain(`from ${(2 / pxPerMm).toFixed(1)} mm across`);
        expect(said[0]).toContain('not from the 3 mm sought');
      } else {
        expect(m.result.mura!.resolvedFromMm).toBeLessThan(3);
        expect(said).toEqual([]);
      }
    }
  });

  it('keeps the thumbnail of a photo it refuses, so the report can show why', async () => {
    const { file } = await photo(8, 'jpeg');
    const m = await measurePhoto(file, {
      ...DEFAULT_MEASURE_OPTIONS,
      pattern: 'white',
      patternLevel: null,
      panelSizeMm: null,
      grid: { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
      mura: false,
      // an impossible viewing-angle limit refuses every photo with a known focal length
      quality: { ...DEFAULT_MEASURE_OPTIONS.quality, maxViewAngleDeg: 0.01 },
    });
    expect(m.result.status).toBe('error');
    expect(m.result.errorCode).toBe('too-oblique');
    expect(m.artifacts?.thumbnail).toBeTruthy();
  });

  it('orders corners as the viewer sees the panel for each EXIF orientation (Exif 2.2 Orientation tag)', () => {
    const c: Corners = [
      [0, 0],
      [10, 0],
      [10, 5],
      [0, 5],
    ];
    expect(orientCorners(c, 1)).toEqual(c);
    // 6: shown after a 90° clockwise turn, so the stored bottom-left becomes the viewer's top-left
    expect(orientCorners(c, 6)[0]).toEqual([0, 5]);
    // 8: shown after a 90° counter-clockwise turn, so the stored top-right becomes the viewer's top-left
    expect(orientCorners(c, 8)[0]).toEqual([10, 0]);
    expect(orientCorners(c, 3)[0]).toEqual([10, 5]);
  });
});
