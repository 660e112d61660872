// A band beside a large strong cloud is found as a band. The medians of the columns through a large
// cloud wiggle into many local extrema of the cloud's sign, and they had filled the ten places of the
// band search: a band of that sign elsewhere was found only in pieces, as clouds. The scene is one of
// the mura study's generated photos (scripts/mura-scenes.ts, seed 1022), checked against the
// generator's truth (the band's place, width and mean contrast over its half-peak region).
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { renderPhoto } from '../../fixtures/generator/index.js';
import { measurePhoto } from '../../lib/pipeline/index.js';
import { generatedPhotoOptions, STUDY_QUALITY } from '../../scripts/generated-options.js';
import { graySpec } from '../../scripts/mura-scenes.js';

describe('band search', () => {
  it('finds a band beside a large strong cloud, as a band, with its contrast', async () => {
    const spec = graySpec(1022, false, 2400, 1600);
    const { buffer, ext, truth } = await renderPhoto(spec);
    const file = join(mkdtempSync(join(tmpdir(), 'ef-band-')), `B1022_gray50.${ext}`);
    writeFileSync(file, buffer);
    const band = truth.features.find((f) => f.kind === 'band' && f.visible && Math.abs(f.contrastPct) > 2)!;
    // the scene: a vertical dark band 46 mm wide at x 371 mm (-2.77 % mean), a dark cloud of -14 % to its left
    expect(band.detail.axis).toBe('vertical');
    const m = await measurePhoto(
      file,
      generatedPhotoOptions(spec, { corners: truth.corners, falloff: { kind: 'cos4', focal35mm: spec.camera.focal35 }, quality: STUDY_QUALITY }),
    );
    expect(m.result.status).toBe('ok');
    const found = m.result.blobs.filter((b) => b.polarity === 'dark' && Math.abs(b.xMm - band.xMm) < 20);
    expect(found.map((b) => b.kind)).toContain('band');
    const b = found.find((x) => x.kind === 'band')!;
    expect(Math.abs(b.contrastPct / band.contrastPct - 1)).toBeLessThan(0.25);
  }, 60_000);
});
