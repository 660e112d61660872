// Photos tagged with an RGB profile whose primaries are not sRGB's (phones' Display P3 JPEGs, cameras set
// to Adobe RGB) hold their colours in those primaries: colour is computed with the profile's own
// colorants (ICC.1: rXYZ, gXYZ, bXYZ in the D50 connection space, adapted to D65 by Bradford). The
// reference is colorjs.io (its 'p3-linear' and 'srgb-linear' spaces to XYZ D65, and u'v' of the source
// colours); the P3 photos are made from sRGB ones by libvips' colour management (lcms), sharp's
// withIccProfile('p3').
import Color from 'colorjs.io';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { randomScene, renderPhoto } from '../../fixtures/generator/index.js';
import { decodePhotoBuffer } from '../../lib/io/index.js';
import { readIccSummary } from '../../lib/io/tags.js';
import { DEFAULT_MEASURE_OPTIONS, measurePhoto } from '../../lib/pipeline/index.js';
import { SRGB_TO_XYZ } from '../../lib/photometry/index.js';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

function matrixOf(space: string): number[] {
  const cols = [
    [1, 0, 0],
    [0, 1, 0],
    [0, 0, 1],
  ].map((c) => new Color(space, c as [number, number, number]).to('xyz-d65').coords as number[]);
  return [0, 1, 2].flatMap((r) => cols.map((c) => c[r]!));
}

function uv(X: number, Y: number, Z: number): [number, number] {
  const d = X + 15 * Y + 3 * Z;
  return [(4 * X) / d, (9 * Y) / d];
}

const patch = (hex: string, profile: 'srgb' | 'p3') =>
  sharp({ create: { width: 32, height: 24, channels: 3, background: hex } })
    .withIccProfile(profile)
    .png()
    .toBuffer();

describe('colour profiles with other primaries', () => {
  it('read the RGB to XYZ matrix from the colorants: sRGB and Display P3 as colorjs.io has them', async () => {
    for (const [profile, space] of [
      ['srgb', 'srgb-linear'],
      ['p3', 'p3-linear'],
    ] as const) {
      const meta = await sharp(await patch('#808080', profile)).metadata();
      const m = readIccSummary(meta.icc!)!.rgbToXyzD65!;
      const ref = matrixOf(space);
      // the profiles' colorants are s15Fixed16 numbers adapted to D50 and back: 0.002 of a unit
      for (let k = 0; k < 9; k++) expect(Math.abs(m[k]! - ref[k]!)).toBeLessThan(0.002);
    }
  });

  it("a P3-tagged patch decodes to the source colour's u'v'", async () => {
    for (const hex of ['#c8aa96', '#5a8cc8', '#e6e6dc']) {
      const d = await decodePhotoBuffer(await patch(hex, 'p3'), 'p.png');
      expect(d.rgbToXyz).not.toBe(SRGB_TO_XYZ);
      const { data } = d.image;
      const mean = [0, 0, 0];
      for (let i = 0; i < data.length; i += 3) for (let c = 0; c < 3; c++) mean[c]! += data[i + c]! / (data.length / 3);
      const M = d.rgbToXyz;
      const X = M[0]! * mean[0]! + M[1]! * mean[1]! + M[2]! * mean[2]!;
      const Y = M[3]! * mean[0]! + M[4]! * mean[1]! + M[5]! * mean[2]!;
      const Z = M[6]! * mean[0]! + M[7]! * mean[1]! + M[8]! * mean[2]!;
      const [ru, rv] = (() => {
        const [x, y, z] = new Color(hex).to('xyz-d65').coords as number[];
        return uv(x!, y!, z!);
      })();
      const [u, v] = uv(X, Y, Z);
      // 8-bit coding of the P3 values: a code step moves u'v' by about 0.001
      expect(Math.hypot(u - ru, v - rv)).toBeLessThan(0.002);
    }
  });

  it("a generated photo re-coded in Display P3 measures the same colour differences as the sRGB one", async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ef-p3-'));
    const spec = randomScene(61, { pattern: 'white', width: 1600, height: 1100 });
    // a strongly tinted panel (Δu'v' of 0.005-0.012 from the centre): the colour differences are what
    // the primaries scale; P3 values of a colour are less saturated than its sRGB values
    spec.panel.colour = { r: { x: 0.25, radial: 0.15 }, b: { y: -0.25 } };
    const { buffer, truth } = await renderPhoto(spec);
    const files = { srgb: join(dir, 'A_white.jpg'), p3: join(dir, 'B_white.jpg') };
    writeFileSync(files.srgb, buffer);
    writeFileSync(files.p3, await sharp(buffer).withIccProfile('p3').jpeg({ quality: 98, chromaSubsampling: '4:4:4' }).toBuffer());
    const run = (file: string) =>
      measurePhoto(file, {
        ...DEFAULT_MEASURE_OPTIONS,
        pattern: 'white',
        patternLevel: null,
        corners: truth.corners,
        panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
        grid: { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
        mura: false,
        artifacts: false,
      });
    const a = (await run(files.srgb)).result;
    const b = (await run(files.p3)).result;
    expect(b.warnings.some((w) => /computed with its primaries/.test(w))).toBe(true);
    const pa = a.grid!.points;
    const pb = b.grid!.points;
    // the P3 photo is a second 8-bit, JPEG-coded generation of the first: its own figures move by up to
    // 0.5 % in luminance and 8 % in a single point's Δu'v' (measured), so the colour check is the mean
    // ratio of Δu'v' over the points with a clear difference (read as sRGB it came out 0.87)
    const ratios: number[] = [];
    for (let k = 0; k < pa.length; k++) {
      expect(Math.abs(pb[k]!.relative - pa[k]!.relative)).toBeLessThan(0.008);
      if (pa[k]!.duvFromCentre >= 0.004) ratios.push(pb[k]!.duvFromCentre / pa[k]!.duvFromCentre);
    }
    expect(ratios.length).toBeGreaterThanOrEqual(4);
    expect(Math.abs(ratios.reduce((x, y) => x + y, 0) / ratios.length - 1)).toBeLessThan(0.04);
  }, 60_000);
});
