// Small image makers for the io tests. Images are built from raw code values with sharp's encoders,
// so every test knows the exact code values that went in.

import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { crc32, deflateSync } from 'node:zlib';
import sharp from 'sharp';

/** The parts of piexifjs the tests use (the package ships no type declarations). */
export interface Piexif {
  ImageIFD: Record<string, number>;
  ExifIFD: Record<string, number>;
  dump(exif: Record<string, Record<number, unknown>>): string;
  insert(exifBytes: string, jpegBinary: string): string;
}
const piexifName = 'piexifjs';
export const piexif: Piexif = ((await import(piexifName)) as { default: Piexif }).default;

export function tempDir(prefix = 'evenfield-io-'): { dir: string; file: (name: string) => string; cleanup: () => void } {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  return { dir, file: (n) => join(dir, n), cleanup: () => rmSync(dir, { recursive: true, force: true }) };
}

/** Deterministic pseudo-random generator (LCG), values in [0, 1). */
export function lcg(seed = 1): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return s / 4294967296;
  };
}

/** Standard normal deviates from the LCG (Box–Muller). */
export function gauss(rnd: () => number): () => number {
  return () => Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
}

/** 8-bit RGB test picture: a gradient with noise and a few flat patches. */
export function testPicture8(width: number, height: number, seed = 7, noise = 24): Buffer {
  const rnd = lcg(seed);
  const out = Buffer.alloc(width * height * 3);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = (y * width + x) * 3;
      const base = [40 + (180 * x) / width, 30 + (200 * y) / height, 200 - (150 * (x + y)) / (width + height)];
      for (let c = 0; c < 3; c++) out[i + c] = Math.max(0, Math.min(255, Math.round(base[c]! + (rnd() - 0.5) * noise)));
    }
  }
  return out;
}

export function rawImage(data: Buffer | Uint16Array, width: number, height: number, channels: 1 | 2 | 3 | 4) {
  return sharp(data, { raw: { width, height, channels } });
}

/** Insert a chunk into a PNG right after IHDR (PNG spec §5.3: length, type, data, CRC-32 of type+data). */
export function insertPngChunk(png: Buffer, type: string, data: Buffer): Buffer {
  const ihdrEnd = 8 + 12 + png.readUInt32BE(8);
  const chunk = Buffer.alloc(12 + data.length);
  chunk.writeUInt32BE(data.length, 0);
  chunk.write(type, 4, 'latin1');
  data.copy(chunk, 8);
  chunk.writeUInt32BE(crc32(Buffer.concat([Buffer.from(type, 'latin1'), data])) >>> 0, 8 + data.length);
  return Buffer.concat([png.subarray(0, ihdrEnd), chunk, png.subarray(ihdrEnd)]);
}

/** gAMA chunk payload for a gamma value (stored × 100000). */
export function gamaChunk(gamma: number): Buffer {
  const b = Buffer.alloc(4);
  b.writeUInt32BE(Math.round(gamma * 100000), 0);
  return b;
}

/** iCCP chunk payload: name, NUL, compression method 0, zlib stream (PNG spec §11.3.3.3). */
export function iccpChunk(name: string, profile: Buffer): Buffer {
  return Buffer.concat([Buffer.from(name, 'latin1'), Buffer.from([0, 0]), deflateSync(profile)]);
}

/**
 * A minimal RGB display profile (ICC.1:2010 layout) with the given colorants and one 'para' curve of
 * function type 0 and exponent `gamma` shared by the three channels.
 */
export function makeIccProfile(opts: { description: string; gamma: number; colorants: Array<[number, number, number]> }): Buffer {
  const tags: Array<[string, Buffer]> = [];
  const desc = Buffer.alloc(12 + opts.description.length + 1);
  desc.write('desc', 0, 'latin1');
  desc.writeUInt32BE(opts.description.length + 1, 8);
  desc.write(opts.description, 12, 'latin1');
  tags.push(['desc', desc]);
  const xyz = (v: [number, number, number]) => {
    const b = Buffer.alloc(20);
    b.write('XYZ ', 0, 'latin1');
    v.forEach((c, k) => b.writeInt32BE(Math.round(c * 65536), 8 + 4 * k));
    return b;
  };
  tags.push(['wtpt', xyz([0.9642, 1, 0.8249])]);
  ['rXYZ', 'gXYZ', 'bXYZ'].forEach((s, k) => tags.push([s, xyz(opts.colorants[k]!)]));
  const para = Buffer.alloc(16);
  para.write('para', 0, 'latin1');
  para.writeUInt16BE(0, 8);
  para.writeInt32BE(Math.round(opts.gamma * 65536), 12);
  for (const s of ['rTRC', 'gTRC', 'bTRC']) tags.push([s, para]);
  const headerLen = 128 + 4 + 12 * tags.length;
  let offset = headerLen;
  const table: Buffer[] = [];
  const bodies: Buffer[] = [];
  for (const [sig, body] of tags) {
    const e = Buffer.alloc(12);
    e.write(sig, 0, 'latin1');
    e.writeUInt32BE(offset, 4);
    e.writeUInt32BE(body.length, 8);
    table.push(e);
    const padded = Buffer.alloc(Math.ceil(body.length / 4) * 4);
    body.copy(padded);
    bodies.push(padded);
    offset += padded.length;
  }
  const header = Buffer.alloc(128);
  header.writeUInt32BE(offset, 0);
  header.writeUInt32BE(0x02100000, 8); // version 2.1
  header.write('mntr', 12, 'latin1');
  header.write('RGB ', 16, 'latin1');
  header.write('XYZ ', 20, 'latin1');
  header.write('acsp', 36, 'latin1');
  header.writeInt32BE(Math.round(0.9642 * 65536), 68);
  header.writeInt32BE(65536, 72);
  header.writeInt32BE(Math.round(0.8249 * 65536), 76);
  const count = Buffer.alloc(4);
  count.writeUInt32BE(tags.length, 0);
  return Buffer.concat([header, count, ...table, ...bodies]);
}

export function writeFile(path: string, data: Buffer): string {
  writeFileSync(path, data);
  return path;
}
