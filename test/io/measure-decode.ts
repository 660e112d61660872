// Decode speed and jpeg-shrink bias, measured by hand (not part of the suite: it takes a minute).
//
//   npx tsc --outDir /tmp/ef-measure --module nodenext --moduleResolution nodenext --target es2022 \
//     --skipLibCheck --esModuleInterop test/io/measure-decode.ts && node /tmp/ef-measure/test/io/measure-decode.js
//
// Makes 12 MP and 24 MP JPEGs (gradient + noise, quality 92, 4:2:0 like a camera) and times:
// sharp's plain full-size decode to raw, decodePhoto at scale 1, and both reduction methods at
// scales 2, 4 and 8. Then measures the bias of 'jpeg-shrink' against 'linear-box' on noisy flat fields.

import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { decodePhoto, type DecodeOptions } from '../../lib/io/index.js';

function lcg(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return s / 4294967296;
  };
}

async function makeJpeg(path: string, w: number, h: number, level: number | null, sigma: number, seed = 1): Promise<void> {
  const rnd = lcg(seed);
  const buf = Buffer.alloc(w * h * 3);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const i = (y * w + x) * 3;
      const base = level ?? 60 + (150 * x) / w + (30 * y) / h;
      // sum of 4 uniforms: roughly Gaussian, variance 4/12 → scale to sigma
      for (let c = 0; c < 3; c++) {
        const n = (rnd() + rnd() + rnd() + rnd() - 2) * Math.sqrt(3) * sigma;
        buf[i + c] = Math.max(0, Math.min(255, Math.round(base + n)));
      }
    }
  }
  const jpg = await sharp(buf, { raw: { width: w, height: h, channels: 3 } }).jpeg({ quality: 92, chromaSubsampling: '4:2:0' }).toBuffer();
  writeFileSync(path, jpg);
}

async function time(fn: () => Promise<unknown>, runs = 3): Promise<number> {
  const t: number[] = [];
  for (let i = 0; i < runs; i++) {
    const t0 = performance.now();
    await fn();
    t.push(performance.now() - t0);
  }
  t.sort((a, b) => a - b);
  return t[Math.floor(runs / 2)]!;
}

const mean = (x: Float32Array) => {
  let s = 0;
  for (let i = 0; i < x.length; i++) s += x[i]!;
  return s / x.length;
};

async function main(): Promise<void> {
  const dir = mkdtempSync(join(tmpdir(), 'ef-measure-'));
  sharp.cache(false);
  console.log(`sharp ${sharp.versions.sharp}, libvips ${sharp.versions.vips}, concurrency ${sharp.concurrency()}`);
  try {
    for (const [mp, w, h] of [
      [12, 4000, 3000],
      [24, 6000, 4000],
    ] as const) {
      const f = join(dir, `g${mp}.jpg`);
      await makeJpeg(f, w, h, null, 6);
      const rows: string[] = [];
      const plain = await time(() => sharp(f).raw().toBuffer());
      rows.push(`sharp(file).raw().toBuffer()   ${plain.toFixed(0)} ms`);
      const full = await time(() => decodePhoto(f, { scale: 1 }));
      rows.push(`decodePhoto scale 1            ${full.toFixed(0)} ms`);
      for (const s of [2, 4, 8] as const) {
        for (const method of ['linear-box', 'jpeg-shrink'] as const) {
          const opts: DecodeOptions = { scale: s, method };
          const t = await time(() => decodePhoto(f, opts));
          rows.push(`decodePhoto scale ${s} ${method.padEnd(11)} ${t.toFixed(0)} ms`);
        }
      }
      console.log(`\n${mp} MP (${w}×${h}):\n  ${rows.join('\n  ')}`);
    }

    console.log('\njpeg-shrink vs linear-box on flat fields (4000×3000, q92 4:2:0): relative bias of the mean, rms per pixel');
    for (const level of [60, 128, 200]) {
      for (const sigma of [2, 5, 10]) {
        const f = join(dir, `flat-${level}-${sigma}.jpg`);
        await makeJpeg(f, 4000, 3000, level, sigma, level * 31 + sigma);
        const parts: string[] = [];
        for (const s of [2, 4, 8] as const) {
          const a = await decodePhoto(f, { scale: s, method: 'linear-box' });
          const b = await decodePhoto(f, { scale: s, method: 'jpeg-shrink' });
          const ma = mean(a.image.data);
          const bias = (mean(b.image.data) - ma) / ma;
          let ss = 0;
          for (let i = 0; i < a.image.data.length; i++) {
            const d = (b.image.data[i]! - a.image.data[i]!) / ma;
            ss += d * d;
          }
          parts.push(`s${s}: ${(bias * 100).toFixed(3)} % (rms ${(Math.sqrt(ss / a.image.data.length) * 100).toFixed(2)} %)`);
        }
        console.log(`  code ${level}, σ ${sigma}: ${parts.join('  ')}`);
      }
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

await main();
