// The bad-input corpus (fixtures/bad/): photos, manifests and criteria files that must each be refused
// with a clear, named reason, beside 10 good photos and a few odd-but-valid files that must be measured.
// Everything is made here from seeds, so the same command rewrites the same bytes:
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/make-bad-corpus.js
//
// fixtures/bad/expected.json lists every file with what evenfield must do with it (see the README there).

import { mkdirSync, rmSync, writeFileSync } from 'node:fs';
import { deflateSync } from 'node:zlib';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import sharp from 'sharp';
import { Rng, renderPhotoPixels } from '../fixtures/generator/index.js';
import type { PhotoSpec } from '../fixtures/generator/index.js';
import { addNoiseAndClip } from '../fixtures/generator/render.js';
import { encodeImage } from '../fixtures/generator/encode.js';
import type { ErrorCode } from '../lib/errors.js';

const ROOT = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
const OUT = join(ROOT, 'fixtures', 'bad');
const PHOTOS = join(OUT, 'photos');
const CRITERIA = join(OUT, 'criteria');

/** What evenfield must do with one corpus file. */
export interface CorpusEntry {
  /** path relative to fixtures/bad/ */
  file: string;
  /** photo: refused by measurement; grouping: refused before measurement (name, duplicate);
   *  manifest / criteria: the whole run is refused */
  kind: 'photo' | 'grouping' | 'manifest' | 'criteria';
  what: string;
  /** machine-readable code (results.json errorCode, or the code of the run's error); null for grouping
   *  problems, which have a reason but no photo code */
  errorCode: ErrorCode | null;
  /** a fragment of the one-line message */
  message: string;
}

interface ValidEntry {
  file: string;
  what: string;
  /** the panel id the file's name gives, as it must appear (escaped) in results.csv */
  csvPanelCell?: string;
  /** a fragment of a warning the photo must carry */
  warning?: string;
  /** refused as too-oblique when inspected with --max-view-angle set to this */
  strictViewAngle?: number;
}

const bad: CorpusEntry[] = [];
const good: string[] = [];
const valid: ValidEntry[] = [];

function put(rel: string, data: Buffer | string): void {
  const p = join(OUT, rel);
  mkdirSync(dirname(p), { recursive: true });
  writeFileSync(p, data);
}

// ---------------------------------------------------------------- generated photos

/** A well-taken photo: long lens, square-on, well exposed, 640×480 JPEG. */
function goodSpec(seed: number, over: Partial<PhotoSpec['panel']> = {}): PhotoSpec {
  const r = new Rng(seed * 7 + 1);
  return {
    seed,
    panel: {
      widthMm: 597.9,
      heightMm: 336.3,
      pattern: 'white',
      luminance: [{ kind: 'radial', loss: r.uniform(0.05, 0.2), power: 2 }],
      ...over,
    },
    camera: {
      width: 640,
      height: 480,
      focal35: 135,
      fill: r.uniform(0.65, 0.75),
      yawDeg: r.uniform(-2, 2),
      pitchDeg: r.uniform(-2, 2),
      rollDeg: r.uniform(-1, 1),
      supersample: 1,
      edgeSupersample: 8,
    },
    exposure: { whiteCentre: r.uniform(0.55, 0.75) },
    noise: {},
    output: { format: 'jpeg', quality: 90 },
  };
}

type PixelEdit = (d: Float32Array, W: number, H: number) => void;

/** Render noise-free pixels, edit them (blur, moiré), then add noise and encode, as a camera would. */
async function photo(spec: PhotoSpec, edit?: PixelEdit): Promise<Buffer> {
  const s: PhotoSpec = { ...spec, noise: null };
  const p = renderPhotoPixels(s);
  edit?.(p.image.data, p.image.width, p.image.height);
  if (spec.noise !== null) addNoiseAndClip(p.image.data, spec.noise?.fullWell ?? 20000, spec.noise?.readNoise ?? 3, new Rng(spec.seed));
  const enc = await encodeImage(p.image.data, p.image.width, p.image.height, spec.output ?? {}, p.truth.exposure.exif);
  return enc.buffer;
}

/** Separable Gaussian blur of interleaved RGB (sigma 0 = none along that axis). */
function gaussianBlur(sx: number, sy: number): PixelEdit {
  return (d, W, H) => {
    const pass = (s: number, horizontal: boolean) => {
      if (s <= 0) return;
      const r = Math.ceil(3 * s);
      const k: number[] = [];
      let sum = 0;
      for (let i = -r; i <= r; i++) {
        const v = Math.exp(-(i * i) / (2 * s * s));
        k.push(v);
        sum += v;
      }
      const out = new Float32Array(d.length);
      for (let y = 0; y < H; y++)
        for (let x = 0; x < W; x++)
          for (let c = 0; c < 3; c++) {
            let a = 0;
            for (let i = -r; i <= r; i++) {
              const xx = horizontal ? Math.min(W - 1, Math.max(0, x + i)) : x;
              const yy = horizontal ? y : Math.min(H - 1, Math.max(0, y + i));
              a += k[i + r] * d[(yy * W + xx) * 3 + c];
            }
            out[(y * W + x) * 3 + c] = a / sum;
          }
      d.set(out);
    };
    pass(sx, true);
    pass(sy, false);
  };
}

/** Horizontal camera shake: a box of `len` pixels along x. */
function motionBlurX(len: number): PixelEdit {
  return (d, W, H) => {
    const out = new Float32Array(d.length);
    const h = Math.floor(len / 2);
    for (let y = 0; y < H; y++)
      for (let x = 0; x < W; x++)
        for (let c = 0; c < 3; c++) {
          let a = 0;
          for (let i = -h; i <= h; i++) a += d[(y * W + Math.min(W - 1, Math.max(0, x + i))) * 3 + c];
          out[(y * W + x) * 3 + c] = a / (2 * h + 1);
        }
    d.set(out);
  };
}

/** Coloured moiré: each channel multiplied by 1 + A cos(2π f·x + φc), phases 0, 120°, 240°. */
function moire(amplitude: number, periodPx: number, angleRad: number): PixelEdit {
  return (d, W, H) => {
    const fx = Math.cos(angleRad) / periodPx;
    const fy = Math.sin(angleRad) / periodPx;
    for (let y = 0; y < H; y++)
      for (let x = 0; x < W; x++)
        for (let c = 0; c < 3; c++) d[(y * W + x) * 3 + c] *= 1 + amplitude * Math.cos(2 * Math.PI * (fx * x + fy * y) + (2 * Math.PI * c) / 3);
  };
}

// ---------------------------------------------------------------- crafted files

const CRC_TABLE = (() => {
  const t = new Uint32Array(256);
  for (let n = 0; n < 256; n++) {
    let c = n;
    for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
    t[n] = c >>> 0;
  }
  return t;
})();

function crc32(buf: Buffer): number {
  let c = 0xffffffff;
  for (const b of buf) c = CRC_TABLE[(c ^ b) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

function pngChunk(type: string, data: Buffer): Buffer {
  const len = Buffer.alloc(4);
  len.writeUInt32BE(data.length);
  const td = Buffer.concat([Buffer.from(type, 'ascii'), data]);
  const crc = Buffer.alloc(4);
  crc.writeUInt32BE(crc32(td));
  return Buffer.concat([len, td, crc]);
}

/** A PNG whose header claims width × height, followed by a few rows' worth of compressed zeros. */
function pngClaiming(width: number, height: number): Buffer {
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(width, 0);
  ihdr.writeUInt32BE(height, 4);
  ihdr[8] = 8; // bit depth
  ihdr[9] = 2; // RGB
  const idat = deflateSync(Buffer.alloc(Math.min(width * 3 + 1, 1 << 20) * 4));
  return Buffer.concat([Buffer.from('\x89PNG\r\n\x1a\n', 'binary'), pngChunk('IHDR', ihdr), pngChunk('IDAT', idat), pngChunk('IEND', Buffer.alloc(0))]);
}

/** The same JPEG with its frame header (SOF) rewritten to claim width × height. */
function jpegClaiming(jpeg: Buffer, width: number, height: number): Buffer {
  const out = Buffer.from(jpeg);
  for (let i = 2; i < out.length - 9; i++) {
    if (out[i] === 0xff && (out[i + 1] === 0xc0 || out[i + 1] === 0xc2)) {
      out.writeUInt16BE(height, i + 5);
      out.writeUInt16BE(width, i + 7);
      return out;
    }
  }
  throw new Error('no SOF marker');
}

/** Byte offset of the JPEG's start-of-scan marker. */
function scanStart(jpeg: Buffer): number {
  for (let i = 2; i < jpeg.length - 1; i++) if (jpeg[i] === 0xff && jpeg[i + 1] === 0xda) return i;
  throw new Error('no SOS marker');
}

function randomBytes(seed: number, n: number): Buffer {
  const r = new Rng(seed);
  const b = Buffer.alloc(n);
  for (let i = 0; i < n; i++) b[i] = Math.floor(r.next() * 256);
  return b;
}

// ---------------------------------------------------------------- the corpus

async function main(): Promise<void> {
  rmSync(OUT, { recursive: true, force: true });
  mkdirSync(PHOTOS, { recursive: true });
  mkdirSync(CRITERIA, { recursive: true });

  // ten good photos: eight panels on white or gray, two of them with a black field beside the white
  const goodSpecs: [string, PhotoSpec][] = [];
  for (let i = 1; i <= 8; i++) {
    const gray = i === 4 || i === 7;
    const features: NonNullable<PhotoSpec['panel']['features']> =
      i % 3 === 0 ? [{ kind: 'spot', u: 0.3 + 0.05 * i, v: 0.55, sizeMm: 25, contrastPct: i === 6 ? -4 : 2 }] : [];
    const spec = goodSpec(100 + i, { pattern: gray ? 'gray' : 'white', level: gray ? 0.5 : undefined, features });
    goodSpecs.push([`GOOD0${i}_${gray ? 'gray50' : 'white'}.jpg`, spec]);
    if (i <= 2) {
      const black = goodSpec(100 + i, { pattern: 'black', features: [{ kind: 'corner-glow', corner: 'top-left', decayMm: 25, contrastPct: 150 }] });
      black.exposure = { patternCentre: 0.2, iso: 800 };
      goodSpecs.push([`GOOD0${i}_black.jpg`, black]);
    }
  }
  const goodBuffers = new Map<string, Buffer>();
  for (const [name, spec] of goodSpecs) {
    const buf = await photo(spec);
    goodBuffers.set(name, buf);
    put(`photos/${name}`, buf);
    good.push(`photos/${name}`);
  }
  const base = goodBuffers.get('GOOD01_white.jpg')!;
  const basePng = await sharp(base).png().toBuffer();

  const photoBad = (name: string, data: Buffer | string, what: string, errorCode: ErrorCode, message: string) => {
    put(`photos/${name}`, data);
    bad.push({ file: `photos/${name}`, kind: 'photo', what, errorCode, message });
  };

  // --- broken and hostile files
  photoBad('EMPTY_white.jpg', Buffer.alloc(0), 'zero-byte file', 'unreadable', 'empty file (0 bytes)');
  photoBad('TRUNC1_white.jpg', base.subarray(0, Math.floor(base.length * 0.6)), 'JPEG cut at 60 % (copy interrupted)', 'unreadable', 'truncated JPEG');
  photoBad('TRUNC2_white.jpg', base.subarray(0, scanStart(base) + 40), 'JPEG cut just after the start of the image data', 'unreadable', 'truncated JPEG');
  photoBad('TRUNC3_white.png', basePng.subarray(0, Math.floor(basePng.length / 2)), 'PNG cut in half', 'unreadable', 'PNG');
  photoBad('HEADONLY_white.jpg', Buffer.from([0xff, 0xd8, 0xff, 0xd9]), 'JPEG start and end markers, nothing between', 'unreadable', 'JPEG');
  photoBad('TEXT_white.jpg', 'panel KX27-0412 looked fine to me\n', 'a text note saved with a photo name', 'unreadable', 'not an image file');
  photoBad('HTML_white.png', '<!DOCTYPE html><html><body>404 Not Found</body></html>\n', 'a web page saved as a photo', 'unreadable', 'not an image file');
  photoBad('RANDOM_white.jpg', randomBytes(11, 4096), '4 KiB of random bytes', 'unreadable', 'not an image file');
  photoBad('PDF_white.jpg', '%PDF-1.4\n1 0 obj << /Type /Catalog >> endobj\ntrailer << /Root 1 0 R >>\n%%EOF\n', 'a PDF named .jpg', 'unreadable', 'PDF');
  photoBad('ZIP_white.png', Buffer.concat([Buffer.from('PK\x03\x04', 'binary'), randomBytes(12, 200)]), 'a ZIP archive named .png', 'unreadable', 'ZIP');
  photoBad(
    'SVG_white.png',
    '<svg xmlns="http://www.w3.org/2000/svg" width="200000" height="200000"><rect width="100%" height="100%" fill="white"/></svg>\n',
    'an SVG drawing named .png that would rasterise to 200 000 × 200 000',
    'unreadable',
    'SVG',
  );
  photoBad('BOMB1_white.png', pngClaiming(60000, 60000), 'PNG header claiming 60 000 × 60 000 pixels (decompression bomb)', 'too-large', 'above the limit');
  photoBad('BOMB2_white.jpg', jpegClaiming(base, 30000, 30000), 'JPEG frame header claiming 30 000 × 30 000 pixels', 'too-large', 'above the limit');
  photoBad('BOMB3_white.png', pngClaiming(1_000_000, 200), 'PNG 1 000 000 × 200 (absurd aspect, 200 megapixels)', 'too-large', 'above the limit');
  const tinyPng = await sharp({ create: { width: 8, height: 8, channels: 3, background: { r: 200, g: 200, b: 200 } } }).png().toBuffer();
  photoBad('TINY_white.png', tinyPng, 'an 8 × 8 image', 'no-panel', 'too small');
  const strip = await sharp({ create: { width: 4000, height: 1, channels: 3, background: { r: 200, g: 200, b: 200 } } }).png().toBuffer();
  photoBad('STRIP_white.png', strip, 'a 4000 × 1 image', 'no-panel', 'too small');
  const wall = await sharp({ create: { width: 640, height: 480, channels: 3, background: { r: 90, g: 90, b: 90 } } }).jpeg().toBuffer();
  photoBad('WALL_white.jpg', wall, 'an even gray wall, no panel', 'no-panel', 'no bright');
  const noise = await sharp(randomBytes(13, 96 * 72 * 3), { raw: { width: 96, height: 72, channels: 3 } }).png({ palette: true }).toBuffer();
  photoBad('NOISE_white.png', noise, 'a palette PNG of random colours', 'no-panel', 'no bright');
  const wall16 = await sharp({ create: { width: 96, height: 72, channels: 3, background: { r: 60, g: 60, b: 60 } } }).toColourspace('rgb16').png().toBuffer();
  photoBad('WALL16_white.png', wall16, 'a 16-bit PNG of an even wall, no panel', 'no-panel', 'no bright');
  const cmykNoise = await sharp(randomBytes(15, 96 * 72 * 3), { raw: { width: 96, height: 72, channels: 3 } }).toColourspace('cmyk').jpeg().toBuffer();
  photoBad('NOISECMYK_white.jpg', cmykNoise, 'a CMYK JPEG of random values', 'no-panel', 'no bright');

  // --- photos of a panel that cannot be measured honestly
  const s = (seed: number, over: Partial<PhotoSpec['panel']> = {}) => goodSpec(seed, over);
  {
    const sp = s(201);
    sp.exposure = { whiteCentre: 1.05 };
    photoBad('CLIPPED_white.jpg', await photo(sp), 'overexposed: the panel is clipped', 'clipped', 'of the panel is clipped');
  }
  {
    const sp = s(202);
    sp.exposure = { whiteCentre: 0.0016 };
    photoBad('DARK_white.jpg', await photo(sp), 'exposure far too short: the panel sits in the quantisation floor', 'too-dark', 'too dark to measure');
  }
  photoBad('BLUR_white.jpg', await photo(s(203), gaussianBlur(3, 3)), 'out of focus (Gaussian blur, sigma 3 px)', 'blurred', 'outline is blurred');
  photoBad('SHAKE_white.jpg', await photo(s(204), motionBlurX(11)), 'camera shake: 11 px horizontal motion blur', 'blurred', 'right, left edges');
  {
    const sp = s(205);
    sp.glare = [{ u: 0.35, v: 0.4, sizeMm: 60, level: 0.5 }];
    photoBad('GLARE_white.jpg', await photo(sp), 'a lamp reflected on the screen (+50 % of white, 60 mm across)', 'glare', 'a reflection on the screen');
  }
  {
    const sp = s(206, { pattern: 'gray', level: 0.5 });
    sp.glare = [{ u: 0.6, v: 0.55, sizeMm: 40, level: 0.15 }];
    photoBad('GLARE2_gray50.jpg', await photo(sp), 'a reflection on a 50 % gray field (+70 % of the gray level)', 'glare', 'a reflection on the screen');
  }
  photoBad('MOIRE_white.jpg', await photo(s(207), moire(0.03, 10, 0.35)), 'coloured moiré: 3 % ripple, 10 px period', 'moire', 'moiré');
  {
    const sp = s(208);
    sp.camera.yawDeg = 62;
    sp.camera.fill = 0.6;
    photoBad('OBLIQUE_white.jpg', await photo(sp), 'camera 62° off the panel normal: foreshortened more than 2:1', 'too-oblique', 'off its normal (limit 60°)');
  }
  {
    const sp = s(210);
    sp.camera.shift = [0.3, 0];
    photoBad('CUT_white.jpg', await photo(sp), 'panel partly out of the frame (right edge cut)', 'partly-outside', 'runs off the frame');
  }
  {
    // scan data overwritten in the middle: the decoder would fill the blocks with garbage
    const b = Buffer.from(base);
    const at = Math.floor(scanStart(b) + (b.length - scanStart(b)) * 0.4);
    randomBytes(16, 300).copy(b, at);
    photoBad('CORRUPT_white.jpg', b, 'JPEG with 300 bytes of its image data overwritten', 'unreadable', 'damaged');
  }

  // --- refused before measurement: names, duplicates
  const groupingBad = (name: string, data: Buffer, what: string, message: string) => {
    put(`photos/${name}`, data);
    bad.push({ file: `photos/${name}`, kind: 'grouping', what, errorCode: null, message });
  };
  groupingBad('notes.jpg', base, 'a good photo whose name does not follow <panel>_<pattern>', 'does not follow');
  groupingBad('PANEL9_purple.jpg', base, 'unknown pattern name', 'does not follow');
  groupingBad('PANEL9_gray100.jpg', base, 'gray level out of range (100 %)', 'does not follow');
  groupingBad('DUP_white.jpg', base, 'two white photos of one panel (.jpg) ...', 'two white photos for panel DUP');
  groupingBad('DUP_white.jpeg', base, '... and (.jpeg)', 'two white photos for panel DUP');

  // --- odd but valid: must be measured, not refused
  const validPhoto = async (name: string, data: Buffer, what: string, extra: Partial<ValidEntry> = {}) => {
    put(`photos/${name}`, data);
    valid.push({ file: `photos/${name}`, what, ...extra });
  };
  const good3 = goodBuffers.get('GOOD03_white.jpg')!;
  {
    // the JPEG's own 8-bit codes times 257 (c/255 = 257c/65535 exactly), with the same EXIF focal length
    const { data, info } = await sharp(good3).raw().toBuffer({ resolveWithObject: true });
    const codes16 = new Uint16Array(data.length);
    for (let i = 0; i < data.length; i++) codes16[i] = data[i] * 257;
    const png16 = await sharp(codes16, { raw: { width: info.width, height: info.height, channels: 3 } })
      .toColourspace('rgb16')
      .withExif({ IFD2: { FocalLengthIn35mmFilm: '135', FocalLength: '90' } })
      .png()
      .toBuffer();
    await validPhoto('ODD16_white.png', png16, 'a 16-bit PNG holding the same code values as GOOD03_white.jpg (times 257)');
  }
  await validPhoto('ODDCMYK_white.jpg', await sharp(good3).keepExif().toColourspace('cmyk').jpeg({ quality: 95 }).toBuffer(), 'a CMYK JPEG copy of a good photo', {
    warning: 'CMYK',
  });
  await validPhoto('=HYPERLINK(1)_white.jpg', good3, 'a good photo whose panel id looks like a spreadsheet formula', { csvPanelCell: "'=HYPERLINK(1)" });
  await validPhoto('@SUM(A1)_white.jpg', good3, 'a panel id starting with @', { csvPanelCell: "'@SUM(A1)" });
  {
    // measured with a warning under the default limit, refused under --max-view-angle 20
    const yawed = s(212);
    yawed.camera.yawDeg = 25;
    yawed.camera.fill = 0.6;
    await validPhoto('YAW25_white.jpg', await photo(yawed), 'camera 25° off the panel normal', { warning: 'off its normal', strictViewAngle: 20 });
    const wide = s(209);
    wide.camera.focal35 = 28;
    wide.camera.fill = 0.8;
    wide.camera.yawDeg = 0;
    wide.camera.pitchDeg = 0;
    await validPhoto('WIDE_white.jpg', await photo(wide), 'square-on but close with a wide lens: corners about 30° off-axis', { warning: 'off its normal', strictViewAngle: 20 });
  }
  await validPhoto('lot-summary_white.jpg', good3, "a panel whose report would take the lot summary's file name");

  // --- manifests (in photos/, so their paths stay inside their own folder)
  const manifestBad = (name: string, text: string, what: string, message: string) => {
    put(`photos/${name}`, text);
    bad.push({ file: `photos/${name}`, kind: 'manifest', what, errorCode: 'manifest', message });
  };
  manifestBad('manifest-no-pattern.csv', 'file,panel\nGOOD01_white.jpg,GOOD01\n', 'the pattern column is missing', 'missing column "pattern"');
  manifestBad('manifest-twice.csv', 'file,panel,pattern\nGOOD01_white.jpg,GOOD01,white\nGOOD01_white.jpg,GOOD02,white\n', 'one file listed twice', 'listed twice');
  manifestBad('manifest-climb.csv', 'file,panel,pattern\n../criteria/wrong-type.yaml,GOOD01,white\n', 'a path that climbs out of the folder', "outside the manifest's folder");
  manifestBad('manifest-absolute.csv', 'file,panel,pattern\n/etc/passwd,GOOD01,white\n', 'an absolute path', "relative to the manifest's folder");
  manifestBad('manifest-formula.csv', 'file,panel,pattern\nGOOD01_white.jpg,"=cmd|\' /C calc\'!A0",white\n', 'a formula as panel id', 'may contain only');
  manifestBad('manifest-pattern.csv', 'file,panel,pattern\nGOOD01_white.jpg,GOOD01,magenta\n', 'an unknown pattern', 'unknown pattern "magenta"');
  manifestBad('manifest-corners.csv', 'file,panel,pattern,corners\nGOOD01_white.jpg,GOOD01,white,"1,2 3,4 5,6 7"\n', 'corners with seven numbers', 'corners must be 8 numbers');
  manifestBad('manifest-column.csv', 'file,panel,pattern,exposure\nGOOD01_white.jpg,GOOD01,white,1/30\n', 'an unknown column', 'unknown column "exposure"');
  manifestBad('manifest-empty.csv', '', 'an empty file', 'empty');
  manifestBad('manifest-quote.csv', 'file,panel,pattern\n"GOOD01_white.jpg,GOOD01,white\n', 'an unterminated quote', 'not valid CSV');

  // --- criteria files
  const criteriaBad = (name: string, text: string, what: string, message: string) => {
    put(`criteria/${name}`, text);
    bad.push({ file: `criteria/${name}`, kind: 'criteria', what, errorCode: 'criteria', message });
  };
  criteriaBad('wrong-type.yaml', 'name: wrong type\npatterns:\n  white:\n    minOverMaxPctMin: "seventy-five"\n', 'a text where a number belongs', 'minOverMaxPctMin');
  criteriaBad('typo.yaml', 'name: typo\npatterns:\n  white:\n    minOverMaxPctMn: 75\n', 'a misspelt key', 'minOverMaxPctMn');
  criteriaBad('not-yaml.yaml', 'name: [unclosed\npatterns: {\n', 'broken YAML', 'not-yaml.yaml:');
  criteriaBad('list.yaml', '- 75\n- 1.33\n', 'a list instead of a mapping', 'list.yaml:');
  criteriaBad(
    'aliases.yaml',
    'a: &a ["x","x","x","x","x","x","x","x","x"]\nb: &b [*a,*a,*a,*a,*a,*a,*a,*a,*a]\nc: &c [*b,*b,*b,*b,*b,*b,*b,*b,*b]\nd: &d [*c,*c,*c,*c,*c,*c,*c,*c,*c]\ne: &e [*d,*d,*d,*d,*d,*d,*d,*d,*d]\nf: &f [*e,*e,*e,*e,*e,*e,*e,*e,*e]\nname: [*f,*f,*f,*f,*f,*f,*f,*f,*f]\n',
    'a YAML alias bomb (9^7 strings if expanded)',
    'aliases.yaml:1: cannot read the YAML',
  );
  criteriaBad('grid.yaml', 'name: bad grid\ngrid:\n  layout: 7\n', 'a grid of 7 points', 'grid.layout');
  criteriaBad('infinite.yaml', 'name: infinite\npatterns:\n  white:\n    maxOverMinMax: .inf\n', 'an infinite limit', 'maxOverMinMax');

  // criteria for the robustness runs: grid limits only, so a run without the (slow) mura analysis still
  // gives pass and fail verdicts
  put(
    'grid-only.yaml',
    [
      '# Criteria for the robustness tests: grid figures only (no mura limits), so runs with --no-mura judge.',
      'name: robustness tests, grid figures only',
      'patterns:',
      '  white:',
      '    required: false',
      '    minOverMaxPctMin: 92       # test value: splits the good photos into passes and fails',
      '    maxDuvFromCentreMax: 0.01  # ISO 12646:2013 radius, as in the default criteria',
      '  gray:',
      '    required: false',
      '    minOverMaxPctMin: 92       # test value',
      '  black:',
      '    required: false',
      '    maxOverMinMax: 4           # test value',
      '',
    ].join('\n'),
  );

  const doc = {
    about:
      'Bad and hostile inputs for evenfield, made by scripts/make-bad-corpus.ts. "bad": each file with what evenfield must do ' +
      '(kind photo: measured as status error with errorCode; grouping: refused before measurement with the message; manifest / ' +
      'criteria: the run refused with exit status 2 and the message). "good": photos that must be measured and judged exactly as ' +
      'when run alone. "valid": odd but valid files that must be measured.',
    bad,
    good,
    valid,
  };
  put('expected.json', JSON.stringify(doc, null, 2) + '\n');
  put(
    'README.md',
    [
      '# Bad and hostile inputs',
      '',
      'Made by `scripts/make-bad-corpus.ts` (from seeds: the same command writes the same bytes):',
      '',
      '```',
      'npx tsc -p tsconfig.build.json && node dist/scripts/make-bad-corpus.js',
      '```',
      '',
      '`expected.json` lists every file and what evenfield must do with it; `test/robustness/` checks it.',
      '',
      '- `photos/`: photos that must be refused with a code (broken, hostile, or unmeasurable: clipped, too dark,',
      '  blurred, glare, moiré, too oblique, partly outside), files refused before measurement (names, a pattern',
      '  shot twice), 10 good photos (`GOOD*`) that must be judged exactly as when inspected alone, odd but valid',
      '  files that must be measured (16-bit, CMYK, formula-looking names, a panel named like the lot summary),',
      '  and manifests (`manifest-*.csv`) that must each refuse the run;',
      '- `criteria/`: criteria files that must each refuse the run;',
      '- `grid-only.yaml`: criteria with grid limits only, so the tests can skip the slow mura analysis and',
      '  still get pass and fail verdicts.',
      '',
      'All photos are synthetic (the project\'s photo generator), 640 × 480, so the tests stay fast.',
      '',
    ].join('\n'),
  );
  process.stdout.write(`fixtures/bad: ${bad.length} bad, ${good.length} good, ${valid.length} odd-but-valid\n`);
}

await main();
