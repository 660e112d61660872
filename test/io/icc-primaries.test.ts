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
import { measurePhoto } from '../../lib/pipeline/index.js';
import { generatedPhotoOptions } from '../../scripts/generated-options.js';
import { SRGB_TO_XYZ } from '../../lib/photometry/index.js';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
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
    const run = (file: string) => measurePhoto(file, generatedPhotoOptions(spec, { corners: truth.corners, mura: false }));
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

/**
 * A matrix/TRC RGB display profile (ICC.1 version 2 layout: header, tag table, 'desc', 'wtpt', colorants
 * and one gamma curve for R, G and B), built here with the Adobe RGB (1998) encoding's primaries as
 * colorjs.io gives them (its 'a98rgb-linear' space, adapted to D50) and its gamma of 563/256.
 */
function a98LikeProfile(): Buffer {
  const cols = [
    [1, 0, 0],
    [0, 1, 0],
    [0, 0, 1],
  ].map((c) => new Color('a98rgb-linear', c as [number, number, number]).to('xyz-d50').coords as number[]);
  const s15 = (v: number) => {
    const b = Buffer.alloc(4);
    b.writeInt32BE(Math.round(v * 65536));
    return b;
  };
  const xyzTag = (x: number, y: number, z: number) => Buffer.concat([Buffer.from('XYZ \0\0\0\0', 'latin1'), s15(x), s15(y), s15(z)]);
  const text = 'A98-like test profile';
  const desc = Buffer.concat([
    Buffer.from('desc\0\0\0\0', 'latin1'),
    (() => {
      const b = Buffer.alloc(4);
      b.writeUInt32BE(text.length + 1);
      return b;
    })(),
    Buffer.from(text + '\0', 'latin1'),
    Buffer.alloc(4 + 4 + 2 + 1 + 67),
  ]);
  const curv = Buffer.concat([Buffer.from('curv\0\0\0\0\0\0\0\x01', 'latin1'), Buffer.from([0x02, 0x33, 0, 0])]);
  const tags: [string, Buffer][] = [
    ['desc', desc],
    ['wtpt', xyzTag(0.9642, 1, 0.8249)],
    ['rXYZ', xyzTag(cols[0]![0]!, cols[0]![1]!, cols[0]![2]!)],
    ['gXYZ', xyzTag(cols[1]![0]!, cols[1]![1]!, cols[1]![2]!)],
    ['bXYZ', xyzTag(cols[2]![0]!, cols[2]![1]!, cols[2]![2]!)],
    ['rTRC', curv],
    ['gTRC', curv],
    ['bTRC', curv],
    ['cprt', Buffer.from('text\0\0\0\0none\0\0\0\0', 'latin1')],
  ];
  const tableLen = 4 + 12 * tags.length;
  let off = 128 + tableLen;
  const table = Buffer.alloc(tableLen);
  table.writeUInt32BE(tags.length, 0);
  const bodies: Buffer[] = [];
  tags.forEach(([sig, body], i) => {
    const padded = Buffer.concat([body, Buffer.alloc((4 - (body.length % 4)) % 4)]);
    table.write(sig, 4 + 12 * i, 'latin1');
    table.writeUInt32BE(off, 8 + 12 * i);
    table.writeUInt32BE(body.length, 12 + 12 * i);
    bodies.push(padded);
    off += padded.length;
  });
  const header = Buffer.alloc(128);
  header.writeUInt32BE(off, 0);
  header.writeUInt32BE(0x02100000, 8);
  header.write('mntrRGB XYZ ', 12, 'latin1');
  header.write('acsp', 36, 'latin1');
  s15(0.9642).copy(header, 68);
  s15(1).copy(header, 72);
  s15(0.8249).copy(header, 76);
  return Buffer.concat([header, table, ...bodies]);
}

describe('colour profiles with another tone curve', () => {
  const dir = mkdtempSync(join(tmpdir(), 'ef-a98-'));
  const icc = join(dir, 'a98-like.icc');
  writeFileSync(icc, a98LikeProfile());

  it("reads the profile's curve as a table: gamma 563/256 (colorjs.io's a98rgb decoding)", () => {
    const s = readIccSummary(readFileSync(icc))!;
    expect(s.curve).toBe('other');
    for (const z of [1, 10, 30, 64, 128, 200, 254]) {
      const want = new Color('a98rgb', [z / 255, z / 255, z / 255]).to('a98rgb-linear').coords[0]!;
      expect(Math.abs(s.curveTable![z]! - want)).toBeLessThan(1e-6 + 1e-4 * want);
    }
  });

  it('decodes an 8-bit photo in that profile to the source colours (curve and primaries)', async () => {
    for (const hex of ['#1c1c1c', '#303844', '#808080', '#c8aa96']) {
      const coded = await sharp({ create: { width: 32, height: 24, channels: 3, background: hex } })
        .withIccProfile(icc)
        .png()
        .toBuffer();
      const d = await decodePhotoBuffer(coded, 'a.png');
      expect(d.info.transfer).toBe('profile');
      const { data } = d.image;
      const mean = [0, 0, 0];
      for (let i = 0; i < data.length; i += 3) for (let c = 0; c < 3; c++) mean[c]! += data[i + c]! / (data.length / 3);
      const M = d.rgbToXyz;
      const Y = M[3]! * mean[0]! + M[4]! * mean[1]! + M[5]! * mean[2]!;
      const ref = new Color(hex).to('xyz-d65').coords[1]!;
      // 8-bit coding in the profile: half a code step at the darkest patch (code ~25) is 4 % of its level
      // (measured 2.5 %; read through the sRGB curve it came out 38 % bright)
      expect(Math.abs(Y / ref - 1)).toBeLessThan(0.03);
    }
  });

  it('decodes a 16-bit photo in that profile through the curve at every 16-bit code', async () => {
    for (const hex of ['#1c1c1c', '#808080']) {
      const coded = await sharp({ create: { width: 32, height: 24, channels: 3, background: hex } })
        .toColourspace('rgb16')
        .withIccProfile(icc)
        .png()
        .toBuffer();
      const d = await decodePhotoBuffer(coded, 'a16.png');
      expect(d.info.bitDepth).toBe(16);
      expect(d.info.transfer).toBe('profile');
      const { data } = d.image;
      let Y = 0;
      const M = d.rgbToXyz;
      for (let i = 0; i < data.length; i += 3) Y += (M[3]! * data[i]! + M[4]! * data[i + 1]! + M[5]! * data[i + 2]!) / (data.length / 3);
      // libvips widens the 8-bit source to 16 bits by 256, not 257: the source colour is that value
      const src = [1, 3, 5].map((k) => (parseInt(hex.slice(k, k + 2), 16) * 256) / 65535) as [number, number, number];
      const ref = new Color('srgb', src).to('xyz-d65').coords[1]!;
      // lcms's 16-bit conversion: within 0.1 % measured
      expect(Math.abs(Y / ref - 1)).toBeLessThan(0.005);
    }
  });
});
