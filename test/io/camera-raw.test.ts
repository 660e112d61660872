// Camera raw files are refused with a line that says what to do, not measured from their preview.
//
// Sources: TIFF 6.0 (NewSubfileType 254 bit 0 = reduced-resolution image, PhotometricInterpretation 262);
// TIFF Technical Note 1 (SubIFDs 330); TIFF/EP and DNG 1.4 (PhotometricInterpretation 32803 = colour
// filter array, 34892 = LinearRaw; DNGVersion 50706 in the first directory). The header signatures of
// ORF, RW2, RAF, CR2, CR3 and X3F are from memory.
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import sharp from 'sharp';
import { describe, expect, it } from 'vitest';
import { cameraRawKind, decodePhoto } from '../../lib/io/index.js';

interface Entry {
  tag: number;
  type: 1 | 3 | 4;
  value: number;
}

/**
 * A little-endian TIFF whose first directory is an 8-bit RGB image of 64 × 48 (optionally marked
 * reduced-resolution, with a SubIFD of 16-bit sensor data, a DNGVersion), laid out as raw files are.
 */
function tiffLike(o: { preview?: boolean; subIfd?: boolean; dng?: boolean; photometric?: number } = {}): Buffer {
  const pw = 64;
  const ph = 48;
  const rw = 32;
  const rh = 24;
  const pvLen = pw * ph * 3;
  const rawLen = rw * rh * 2;
  const pvOff = 8;
  const rawOff = pvOff + pvLen;
  const ifd0 = rawOff + rawLen;
  const e0: Entry[] = [];
  if (o.preview) e0.push({ tag: 254, type: 4, value: 1 });
  e0.push(
    { tag: 256, type: 3, value: pw },
    { tag: 257, type: 3, value: ph },
    { tag: 258, type: 3, value: 8 },
    { tag: 259, type: 3, value: 1 },
    { tag: 262, type: 3, value: o.photometric ?? 2 },
    { tag: 273, type: 4, value: pvOff },
    { tag: 277, type: 3, value: 3 },
    { tag: 278, type: 3, value: ph },
    { tag: 279, type: 4, value: pvLen },
  );
  const n0 = e0.length + (o.subIfd ? 1 : 0) + (o.dng ? 1 : 0);
  const ifd1 = ifd0 + 2 + n0 * 12 + 4;
  if (o.subIfd) e0.push({ tag: 330, type: 4, value: ifd1 });
  if (o.dng) e0.push({ tag: 50706, type: 1, value: 0 });
  e0.sort((a, b) => a.tag - b.tag);
  const e1: Entry[] = [
    { tag: 254, type: 4, value: 0 },
    { tag: 256, type: 3, value: rw },
    { tag: 257, type: 3, value: rh },
    { tag: 258, type: 3, value: 16 },
    { tag: 259, type: 3, value: 1 },
    { tag: 262, type: 3, value: 32803 },
    { tag: 273, type: 4, value: rawOff },
    { tag: 277, type: 3, value: 1 },
    { tag: 278, type: 3, value: rh },
    { tag: 279, type: 4, value: rawLen },
  ];
  const out = Buffer.alloc(ifd1 + (o.subIfd ? 2 + e1.length * 12 + 4 : 0));
  out.write('II', 0, 'latin1');
  out.writeUInt16LE(42, 2);
  out.writeUInt32LE(ifd0, 4);
  out.fill(200, pvOff, pvOff + pvLen);
  const write = (at: number, es: Entry[]) => {
    out.writeUInt16LE(es.length, at);
    es.forEach((e, i) => {
      const p = at + 2 + i * 12;
      out.writeUInt16LE(e.tag, p);
      out.writeUInt16LE(e.type, p + 2);
      out.writeUInt32LE(e.type === 1 ? 4 : 1, p + 4);
      if (e.type === 3) out.writeUInt16LE(e.value, p + 8);
      else if (e.type === 4) out.writeUInt32LE(e.value, p + 8);
      else out.writeUInt32BE(0x01040000, p + 8); // DNGVersion 1.4.0.0
    });
    out.writeUInt32LE(0, at + 2 + es.length * 12);
  };
  write(ifd0, e0);
  if (o.subIfd) write(ifd1, e1);
  return out;
}

describe('camera raw files', () => {
  it('are told from their first TIFF directory, their signature or their name', async () => {
    const plain = tiffLike();
    // the plain TIFF is an ordinary image the decoder reads (the control for the marks below)
    expect((await sharp(plain).metadata()).width).toBe(64);
    expect(cameraRawKind(plain, 'P1_white.tif')).toBeNull();
    expect(cameraRawKind(tiffLike({ dng: true, preview: true, subIfd: true }), 'x.tif')).toBe('DNG');
    expect(cameraRawKind(tiffLike({ preview: true, subIfd: true }), 'x.tif')).toBe('TIFF-based raw');
    // a preview without sub-images is only a reduced-resolution TIFF
    expect(cameraRawKind(tiffLike({ preview: true }), 'x.tif')).toBeNull();
    expect(cameraRawKind(tiffLike({ photometric: 32803 }), 'x.tif')).toBe('raw sensor data in TIFF');
    expect(cameraRawKind(tiffLike({ photometric: 34892 }), 'x.tif')).toBe('raw sensor data in TIFF');
    const cr2 = tiffLike();
    cr2.write('CR', 8, 'latin1');
    expect(cameraRawKind(cr2)).toBe('Canon CR2');
    expect(cameraRawKind(Buffer.from('IIRO\x08\0\0\0', 'latin1'))).toBe('Olympus ORF');
    expect(cameraRawKind(Buffer.from('IIU\0\x08\0\0\0', 'latin1'))).toBe('Panasonic RW2');
    expect(cameraRawKind(Buffer.from('FUJIFILMCCD-RAW 0201', 'latin1'))).toBe('Fujifilm RAF');
    expect(cameraRawKind(Buffer.from('\0\0\0\x18ftypcrx \0\0\0\x01', 'latin1'))).toBe('Canon CR3');
    expect(cameraRawKind(Buffer.from('FOVb\0\0\0\0', 'latin1'))).toBe('Sigma X3F');
    // by name: a TIFF-like file or unknown bytes with a raw extension, but not a JPEG so named
    expect(cameraRawKind(plain, '/lot/P1_white.NEF')).toBe('NEF');
    expect(cameraRawKind(Buffer.from('\0\x01\x02\x03'), 'P1_white.arw')).toBe('ARW');
    expect(cameraRawKind(Buffer.from([0xff, 0xd8, 0xff, 0xe0, 0, 0]), 'P1_white.raw')).toBeNull();
  });

  it('are refused in one line that says how to convert them, and a folder of them is explained', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ef-raw-'));
    const dng = join(dir, 'R1_white.dng');
    writeFileSync(dng, tiffLike({ dng: true, preview: true, subIfd: true }));
    // without the check the preview decodes as a photo (64 × 48 pixels of 200)
    expect((await sharp(dng).metadata()).width).toBe(64);
    await expect(decodePhoto(dng)).rejects.toThrow(/camera raw file \(DNG\).*16-bit TIFF with linear values.*--linear/);
    const bin = join(__dirname, '..', '..', 'bin', 'evenfield.js');
    const r = spawnSync(process.execPath, [bin, 'inspect', dir, '--out', join(dir, 'out')], { encoding: 'utf8' });
    expect(r.status).toBe(2);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/no photos .* found in .*only 1 camera raw file: .*dcraw -4 -T/);
  });
});
