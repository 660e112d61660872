// Lines narrower than a millimetre (a row or column of pixels that fails, a scratch in a film) through the
// whole pipeline. The band search finds them on the pyramid's second level (1 mm pixels here), whose pixel
// and smoothing had made every line about 2.5 mm wide and as much fainter: a 0.6 mm line of -16 % read
// -5.8 %, a 0.3 mm line of -49 % read -8.4 % (SEMU 9 for 45). Now a narrow band is measured across again at
// the working raster's scale (0.5 mm here), and a line narrower than two of its pixels is marked
// `belowResolution` and its figures left as seen: its width and area are then upper bounds, its contrast
// and SEMU lower bounds.
//
// References: the generator's truth (a Gaussian line of the given FWHM; mean contrast and area over its
// half-peak region, the mura issue's convention); blur spreads a line's contrast over a wider region and
// keeps its integral, so a figure measured from a blurred line can only be fainter (common practice).
import { describe, expect, it } from 'vitest';
import { graySpec } from '../../scripts/mura-scenes.js';
import { measureGenerated } from './helpers.js';

async function lineScene(seed: number, widthMm: number, contrastPct: number, axis: 'horizontal' | 'vertical', position: number) {
  // a clean study field (smooth variation only) with one line from edge to edge
  const spec = graySpec(seed, true, 2400, 1600);
  spec.panel.features = [{ kind: 'line', axis, position, widthMm, contrastPct }];
  const { truth, result } = await measureGenerated(spec, `L${seed}_gray50`);
  expect(result.status).toBe('ok');
  // the map is analysed at 0.5 mm per pixel: it resolves from 1 mm
  expect(result.mura?.resolvedFromMm).toBe(1);
  const t = truth.features[0];
  const found = result.blobs.filter((b) => b.kind === 'line');
  expect(found).toHaveLength(1);
  return { t, b: found[0], others: result.blobs.filter((b) => b.kind !== 'line' && b.semu >= 1) };
}

describe('lines narrower than the map resolves', () => {
  it('a 0.6 mm line of -20 % peak: most of its contrast, marked, its figures bounds of the truth', async () => {
    const { t, b, others } = await lineScene(5004, 0.6, -20, 'vertical', 0.3);
    expect(b.polarity).toBe('dark');
    expect(Math.abs(b.xMm - t.xMm)).toBeLessThan(1);
    expect(b.detail.belowResolution).toBe('width');
    expect(Math.abs(b.contrastPct)).toBeLessThanOrEqual(Math.abs(t.contrastPct));
    expect(Math.abs(b.contrastPct)).toBeGreaterThan(0.6 * Math.abs(t.contrastPct));
    expect(b.semu).toBeLessThanOrEqual(t.semu);
    expect(b.areaMm2).toBeGreaterThanOrEqual(t.areaMm2);
    expect(others).toEqual([]);
  }, 60_000);

  it('a 0.3 mm line of -60 % peak: marked, contrast and SEMU below the truth but within a factor of 2', async () => {
    const { t, b, others } = await lineScene(5001, 0.3, -60, 'horizontal', 0.4);
    expect(b.detail.belowResolution).toBe('width');
    expect(Math.abs(b.contrastPct)).toBeLessThanOrEqual(Math.abs(t.contrastPct));
    expect(Math.abs(b.contrastPct)).toBeGreaterThan(0.5 * Math.abs(t.contrastPct));
    expect(b.semu).toBeLessThanOrEqual(t.semu);
    expect(b.semu).toBeGreaterThan(0.5 * t.semu);
    expect(b.areaMm2).toBeGreaterThanOrEqual(t.areaMm2);
    expect(others).toEqual([]);
  }, 60_000);
});
