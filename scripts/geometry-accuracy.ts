// Accuracy and speed of findPanel on generated photos against the generator's true corners.
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/geometry-accuracy.js [--count 40] [--scales 1,2,4]
//       [--size 4000x3000] [--black 0.25] [--glare 0] [--quality 92]
//
// Each photo is a random scene from fixtures/generator (random pose within ±15° yaw/pitch, ±5° roll,
// 24-50 mm equivalent lens, falloff, shifted panel, noise), written as a JPEG, decoded with sharp, turned
// into linear luminance (sRGB decode, IEC 61966-2-1; BT.709 weights) and, for scale s > 1, box-averaged
// by s x s as a reduced-scale decode would be. Corners found at scale s are mapped back to full size
// with x_full = s (x + 0.5) - 0.5. A fraction of the photos show a black field exposed long; with
// --glare f, a fraction f of the photos get a reflection (as bright as the panel's white, 60 mm across)
// centred on a random edge. Times are wall clock and CPU (the machine may be shared: CPU is steadier).
import sharp from 'sharp';
import { randomScene, renderPhoto } from '../fixtures/generator/index.js';
import { findPanel } from '../lib/geometry/index.js';
import type { Corners, Pattern, Plane, Point } from '../lib/types.js';

interface Args {
  count: number;
  scales: number[];
  width: number;
  height: number;
  blackFraction: number;
  glareFraction: number;
  quality: number;
}

function parseArgs(argv: string[]): Args {
  const a: Args = { count: 40, scales: [1, 2, 4], width: 4000, height: 3000, blackFraction: 0.25, glareFraction: 0, quality: 92 };
  for (let i = 0; i < argv.length; i++) {
    const v = argv[i + 1];
    switch (argv[i]) {
      case '--count':
        a.count = Number(v);
        i++;
        break;
      case '--scales':
        a.scales = v.split(',').map(Number);
        i++;
        break;
      case '--size': {
        const [w, h] = v.split('x').map(Number);
        a.width = w;
        a.height = h;
        i++;
        break;
      }
      case '--black':
        a.blackFraction = Number(v);
        i++;
        break;
      case '--glare':
        a.glareFraction = Number(v);
        i++;
        break;
      case '--quality':
        a.quality = Number(v);
        i++;
        break;
      default:
        throw new Error(`unknown argument ${argv[i]}`);
    }
  }
  return a;
}

/** sRGB decode table for 8-bit code values (IEC 61966-2-1). */
const DECODE = new Float32Array(256);
for (let i = 0; i < 256; i++) {
  const v = i / 255;
  DECODE[i] = v <= 0.04045 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4);
}

async function decodeLuminance(buf: Buffer): Promise<{ plane: Plane; ms: number }> {
  const t0 = performance.now();
  const { data, info } = await sharp(buf).raw().toBuffer({ resolveWithObject: true });
  const ms = performance.now() - t0;
  const n = info.width * info.height;
  const out = new Float32Array(n);
  const c = info.channels;
  for (let i = 0; i < n; i++) {
    out[i] = 0.2126 * DECODE[data[i * c]] + 0.7152 * DECODE[data[i * c + 1]] + 0.0722 * DECODE[data[i * c + 2]];
  }
  return { plane: { width: info.width, height: info.height, data: out }, ms };
}

function boxDown(p: Plane, s: number): Plane {
  if (s === 1) return p;
  const w = Math.floor(p.width / s);
  const h = Math.floor(p.height / s);
  const out = new Float32Array(w * h);
  for (let y = 0; y < h * s; y++) {
    const row = ((y / s) | 0) * w;
    for (let x = 0; x < w * s; x++) out[row + ((x / s) | 0)] += p.data[y * p.width + x];
  }
  for (let i = 0; i < out.length; i++) out[i] /= s * s;
  return { width: w, height: h, data: out };
}

const err = (a: Corners, b: Corners) => Math.max(...a.map((p, i) => Math.hypot(p[0] - b[i][0], p[1] - b[i][1])));

function quantile(v: number[], q: number): number {
  const s = [...v].sort((x, y) => x - y);
  if (s.length === 0) return Number.NaN;
  return s[Math.min(s.length - 1, Math.max(0, Math.round(q * (s.length - 1))))];
}

async function main(): Promise<void> {
  const args = parseArgs(process.argv.slice(2));
  const diag = Math.hypot(args.width, args.height);
  const results: Record<number, { err: number[]; ms: number[]; cpu: number[]; fail: string[]; width: number[] }> = {};
  for (const s of args.scales) results[s] = { err: [], ms: [], cpu: [], fail: [], width: [] };
  const glareEvery = args.glareFraction > 0 ? Math.round(1 / args.glareFraction) : 0;
  const decodeMs: number[] = [];
  const blackEvery = args.blackFraction > 0 ? Math.round(1 / args.blackFraction) : 0;
  console.log(`photos ${args.count} at ${args.width}x${args.height}, scales ${args.scales.join(',')}, JPEG q${args.quality}`);
  console.log('seed pattern    yaw  pitch  roll  | ' + args.scales.map((s) => `err@1/${s} px`).join('  '));
  for (let k = 0; k < args.count; k++) {
    const seed = 1000 + k;
    const pattern: Pattern = blackEvery > 0 && k % blackEvery === blackEvery - 1 ? 'black' : 'white';
    const spec = randomScene(seed, { width: args.width, height: args.height, pattern, quality: args.quality });
    // black fields are exposed long: the lit black at about 30 % of the camera's range
    if (pattern === 'black') spec.exposure = { patternCentre: 0.3 };
    const glare = glareEvery > 0 && k % glareEvery === 0;
    if (glare) {
      const side = k % 4;
      const along = 0.2 + 0.6 * ((k * 0.618) % 1);
      const [u, v] = [
        [along, 0],
        [1, along],
        [along, 1],
        [0, along],
      ][side];
      spec.glare = [{ u, v, sizeMm: 60, level: pattern === 'black' ? 0.01 : 1 }];
    }
    const photo = await renderPhoto(spec);
    const { plane, ms } = await decodeLuminance(photo.buffer);
    decodeMs.push(ms);
    const truth = photo.truth.corners;
    const cells: string[] = [];
    for (const s of args.scales) {
      const p = boxDown(plane, s);
      const t0 = performance.now();
      const c0 = process.cpuUsage();
      try {
        const r = findPanel(p, { pattern });
        const dt = performance.now() - t0;
        const cu = process.cpuUsage(c0);
        results[s].cpu.push((cu.user + cu.system) / 1000);
        const full = r.corners.map(([x, y]) => [s * (x + 0.5) - 0.5, s * (y + 0.5) - 0.5] as Point) as Corners;
        const e = err(full, truth);
        results[s].err.push(e);
        results[s].ms.push(dt);
        results[s].width.push(r.edgeWidthPx * s);
        cells.push(`${e.toFixed(3).padStart(8)} (${dt.toFixed(0)} ms)`);
      } catch (e) {
        results[s].fail.push(`${seed}: ${(e as Error).message}`);
        cells.push('   FAILED        ');
      }
    }
    const c = spec.camera;
    console.log(
      `${seed} ${(pattern + (glare ? '+g' : '')).padEnd(8)} ${c.yawDeg!.toFixed(1).padStart(5)} ${c.pitchDeg!.toFixed(1).padStart(5)} ${c.rollDeg!.toFixed(1).padStart(5)} | ${cells.join('  ')}`,
    );
  }
  console.log(`\nJPEG decode (sharp, full size): median ${quantile(decodeMs, 0.5).toFixed(0)} ms`);
  for (const s of args.scales) {
    const r = results[s];
    console.log(
      `scale 1/${s}: corner error (full-size px) median ${quantile(r.err, 0.5).toFixed(3)}, 90th pct ${quantile(r.err, 0.9).toFixed(3)}, ` +
        `max ${Math.max(...r.err).toFixed(3)} (= ${((100 * Math.max(...r.err)) / diag).toFixed(4)} % of the diagonal); ` +
        `findPanel median ${quantile(r.ms, 0.5).toFixed(0)} ms wall, ${quantile(r.cpu, 0.5).toFixed(0)} ms cpu; edge width median ${quantile(r.width, 0.5).toFixed(2)} px; ` +
        `failures ${r.fail.length}`,
    );
    for (const f of r.fail) console.log(`  failed ${f}`);
  }
}

main().catch((e) => {
  console.error(e);
  process.exit(1);
});
