// Speed and memory benchmark: `npm run bench` (builds, then runs node --expose-gc dist/scripts/bench.js).
//
//   npm run bench -- [--runs N] [--sizes 12MP,24MP] [--lot-panels N] [--memory 20,200]
//                    [--skip-lot] [--skip-memory] [--default-allocator] [--json FILE]
//
// On Linux `inspect` runs its work in a child process with glibc's allocator set for large arrays
// (lib/cli/relaunch.ts); --default-allocator runs the lots (d, e) with EVENFIELD_ALLOCATOR=default, in one
// process with the C library's defaults, for comparison.
//
// On generated 12- and 24-megapixel JPEGs (cached under .cache/bench), in one run:
//  (a) sharp alone decoding each photo to raw 8-bit RGB at full size (the lower bound of any per-photo work);
//  (b) evenfield's full measurement of the same photo, as `inspect --no-pdf` does it: decode, falloff
//      profile, panel, rectification, grid, mura (in this process, after one warm-up per size); beside it
//      the decode alone and the measurement without the mura analysis, to show where the time goes;
//  (c) writing the panel's PDF (report rendering and the atomic write), per panel of three photos;
//  (d) lot throughput of the command (`inspect`, PDFs included) with --jobs 1 and --jobs 2: over the whole
//      run, and after start-up (from the time the command's progress lines arrive: the panels after each
//      worker's first, whose photos run on code V8 has not yet optimised, over the time they took);
//  (e) peak resident memory of the command (all threads; the launcher's and its child's peaks added) for
//      lots of 20 and 200 photos.
// (a) and (b) alternate photo by photo so that both see the same machine load. Wall time and CPU time
// (process.cpuUsage: every thread of the process, libvips included) are both recorded; medians over
// `runs` runs of every photo of a size. The load average is recorded with every figure: on a machine
// busy with other work, wall times stretch and the CPU-time figures are the steadier ones.

import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { availableParallelism, cpus, loadavg } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { execFileSync } from 'node:child_process';
import sharp from 'sharp';
import { ensureBenchPhotos, type BenchSet, type BenchSize } from './bench-photos.js';
import { benchMeasureOptions } from './bench-measure-one.js';
import { makeLot, runInspect, type CommandRun } from './bench-lot.js';
import { decodePhotoBuffer, readInputFile, writeFileAtomic } from '../lib/io/index.js';
import { measurePhoto } from '../lib/pipeline/index.js';
import type { PhotoArtifacts } from '../lib/pipeline/index.js';
import { criteriaSummary, judgePanel, loadCriteria } from '../lib/judge/index.js';
import { renderPanelPdf } from '../lib/report/index.js';
import type { PanelResult, PhotoResult } from '../lib/types.js';

const here = dirname(fileURLToPath(import.meta.url));
const root = resolve(here, '..', '..'); // dist/scripts -> package root

interface Args {
  runs: number;
  sizes: string[] | null;
  lotPanels: number;
  memory: number[];
  skipLot: boolean;
  skipMemory: boolean;
  defaultAllocator: boolean;
  json: string;
  cache: string;
}

const USAGE = `npm run bench -- [options]   (speed and memory figures; see README "Speed")
  --runs N              runs of each photo for (a) and (b), medians reported (default 3)
  --sizes 12MP,24MP     photo sizes (default both)
  --lot-panels N        panels of three photos in the throughput lot (d) (default 20)
  --memory 20,200       photo counts of the memory lots (e) (default 20,200)
  --skip-lot            leave out (d)
  --skip-memory         leave out (e)
  --default-allocator   run the lots in one process with the C library's allocator defaults
  --json FILE           where the figures are written (default .cache/bench/results.json)
`;

function parseArgs(argv: string[]): Args {
  const a: Args = {
    runs: 3,
    sizes: null,
    // 60 photos: each worker compiles V8's optimised code over its first photos (its first three-photo
    // panel took 19 s of CPU, a later one about 9 s), a start-up that a lot of 18 photos hardly outlasts
    lotPanels: 20,
    memory: [20, 200],
    skipLot: false,
    skipMemory: false,
    defaultAllocator: false,
    json: join(root, '.cache', 'bench', 'results.json'),
    cache: join(root, '.cache', 'bench'),
  };
  for (let i = 0; i < argv.length; i++) {
    const k = argv[i]!;
    const v = () => {
      const x = argv[++i];
      if (x === undefined) throw new Error(`${k} needs a value`);
      return x;
    };
    if (k === '--runs') a.runs = Math.max(1, Number(v()));
    else if (k === '--sizes') a.sizes = v().split(',');
    else if (k === '--lot-panels') a.lotPanels = Math.max(2, Number(v()));
    else if (k === '--memory') a.memory = v().split(',').map(Number);
    else if (k === '--skip-lot') a.skipLot = true;
    else if (k === '--skip-memory') a.skipMemory = true;
    else if (k === '--default-allocator') a.defaultAllocator = true;
    else if (k === '--json') a.json = resolve(v());
    else if (k === '--help' || k === '-h') {
      process.stdout.write(USAGE);
      process.exit(0);
    } else throw new Error(`unknown option ${k}`);
  }
  return a;
}

const median = (xs: number[]): number => {
  const s = [...xs].sort((x, y) => x - y);
  const n = s.length;
  return n === 0 ? NaN : n % 2 ? s[(n - 1) / 2]! : (s[n / 2 - 1]! + s[n / 2]!) / 2;
};
const load1 = () => Number(loadavg()[0]!.toFixed(2));
const log = (s: string) => process.stderr.write(`${s}\n`);

interface Timed {
  wallMs: number;
  cpuMs: number;
}
/**
 * Starts every timing from a collected heap when the run has --expose-gc (npm run bench passes it), so a
 * figure does not carry the previous measurement's garbage collection (process CPU time counts V8's
 * background threads too).
 */
const collect = (globalThis as { gc?: () => void }).gc;
async function settle(): Promise<void> {
  if (!collect) return;
  collect();
  await new Promise((r) => setTimeout(r, 25));
}

async function timed<T>(fn: () => Promise<T>): Promise<Timed & { value: T }> {
  await settle();
  const c0 = process.cpuUsage();
  const t0 = performance.now();
  const value = await fn();
  const c = process.cpuUsage(c0);
  return { wallMs: performance.now() - t0, cpuMs: (c.user + c.system) / 1000, value };
}

interface PhotoRun {
  photo: string;
  run: number;
  load1: number;
  a: Timed;
  decode: Timed;
  /** (b) without the mura analysis (--no-mura), to tell its share */
  bNoMura: Timed;
  b: Timed;
  status: string;
}

interface SizeFigures {
  size: string;
  width: number;
  height: number;
  fileMB: number[];
  runs: PhotoRun[];
  medians: {
    aWallMs: number;
    aCpuMs: number;
    decodeWallMs: number;
    decodeCpuMs: number;
    bWallMs: number;
    bCpuMs: number;
    bNoMuraWallMs: number;
    bNoMuraCpuMs: number;
    /** median over photos and runs of (b)/(a), each pair measured back to back */
    ratioWall: number;
    ratioCpu: number;
    decodeRatioWall: number;
    decodeRatioCpu: number;
    noMuraRatioWall: number;
    noMuraRatioCpu: number;
  };
  pdf: { panelPhotos: number; runs: Timed[]; medianWallMs: number; medianCpuMs: number; bytes: number; load1: number } | null;
}

async function perPhoto(set: BenchSet, size: BenchSize, runs: number): Promise<SizeFigures> {
  const opts = (file: string, artifacts = false) => benchMeasureOptions(file, { profile: size.profile, mura: true, panelSizeMm: set.panelSizeMm, artifacts });
  const prepared = new Map(size.photos.map((p) => [p.file, opts(p.file)]));
  const preparedNoMura = new Map(size.photos.map((p) => [p.file, { ...opts(p.file), mura: false }]));
  // warm-up: loads the modules, compiles the hot loops, fills the falloff model's cache
  await measurePhoto(size.photos[0]!.file, prepared.get(size.photos[0]!.file)!);
  const out: PhotoRun[] = [];
  for (let r = 0; r < runs; r++) {
    for (const p of size.photos) {
      const o = prepared.get(p.file)!;
      const l = load1();
      const a = await timed(() => sharp(p.file).raw().toBuffer());
      const decode = await timed(async () => decodePhotoBuffer(await readInputFile(p.file), p.file, { targetLongSide: o.workLongSide, transfer: o.transfer, maxPixels: o.maxPixels }));
      const b0 = await timed(() => measurePhoto(p.file, preparedNoMura.get(p.file)!));
      const b = await timed(() => measurePhoto(p.file, o));
      const res = b.value.result;
      const status = res.status === 'ok' ? 'ok' : `${res.errorCode}: ${res.error}`;
      out.push({ photo: p.file, run: r + 1, load1: l, a: { wallMs: a.wallMs, cpuMs: a.cpuMs }, decode: { wallMs: decode.wallMs, cpuMs: decode.cpuMs }, bNoMura: { wallMs: b0.wallMs, cpuMs: b0.cpuMs }, b: { wallMs: b.wallMs, cpuMs: b.cpuMs }, status });
      log(
        `  ${size.label} ${p.token.padEnd(6)} run ${r + 1}: (a) ${a.wallMs.toFixed(0)} ms [${a.cpuMs.toFixed(0)} CPU]  decode ${decode.wallMs.toFixed(0)} [${decode.cpuMs.toFixed(0)}]  no mura ${b0.wallMs.toFixed(0)} [${b0.cpuMs.toFixed(0)}]  (b) ${b.wallMs.toFixed(0)} [${b.cpuMs.toFixed(0)}]  load ${l}  ${status}`,
      );
    }
  }
  const m = (f: (r: PhotoRun) => number) => median(out.map(f));

  // (c) the panel's PDF: measure its photos once with the report's images, judge, then render and write
  let pdf: SizeFigures['pdf'] = null;
  {
    const photos: PhotoResult[] = [];
    const artifacts: (PhotoArtifacts | null)[] = [];
    for (const p of size.photos) {
      const mm = await measurePhoto(p.file, opts(p.file, true));
      photos.push(mm.result);
      artifacts.push(mm.artifacts);
    }
    const crit = loadCriteria(null);
    const judged = judgePanel(photos, crit.criteria);
    const panel: PanelResult = { panel: size.photos[0]!.panel, verdict: judged.verdict, reasons: judged.reasons, reasonDetails: judged.reasonDetails, photos };
    const outDir = join(set.dir, '..', 'pdf');
    mkdirSync(outDir, { recursive: true });
    const summary = criteriaSummary(crit);
    const timings: Timed[] = [];
    let bytes = 0;
    const l = load1();
    for (let r = 0; r < runs; r++) {
      const t = await timed(async () => {
        const buf = await renderPanelPdf({ panel, artifacts, criteria: summary, toolVersion: 'bench', generated: '2026-01-01T00:00:00Z', lot: null });
        await writeFileAtomic(join(outDir, `${panel.panel}.pdf`), buf);
        return buf.length;
      });
      bytes = t.value;
      timings.push({ wallMs: t.wallMs, cpuMs: t.cpuMs });
      log(`  ${size.label} PDF of ${panel.panel} (${photos.length} photos) run ${r + 1}: ${t.wallMs.toFixed(0)} ms [${t.cpuMs.toFixed(0)} CPU], ${(bytes / 1e6).toFixed(2)} MB`);
    }
    pdf = {
      panelPhotos: photos.length,
      runs: timings,
      medianWallMs: median(timings.map((t) => t.wallMs)),
      medianCpuMs: median(timings.map((t) => t.cpuMs)),
      bytes,
      load1: l,
    };
  }

  return {
    size: size.label,
    width: size.width,
    height: size.height,
    fileMB: size.photos.map((p) => Number((readFileSync(p.file).length / 1e6).toFixed(2))),
    runs: out,
    medians: {
      aWallMs: m((r) => r.a.wallMs),
      aCpuMs: m((r) => r.a.cpuMs),
      decodeWallMs: m((r) => r.decode.wallMs),
      decodeCpuMs: m((r) => r.decode.cpuMs),
      bWallMs: m((r) => r.b.wallMs),
      bCpuMs: m((r) => r.b.cpuMs),
      bNoMuraWallMs: m((r) => r.bNoMura.wallMs),
      bNoMuraCpuMs: m((r) => r.bNoMura.cpuMs),
      ratioWall: m((r) => r.b.wallMs / r.a.wallMs),
      ratioCpu: m((r) => r.b.cpuMs / r.a.cpuMs),
      decodeRatioWall: m((r) => r.decode.wallMs / r.a.wallMs),
      decodeRatioCpu: m((r) => r.decode.cpuMs / r.a.cpuMs),
      noMuraRatioWall: m((r) => r.bNoMura.wallMs / r.a.wallMs),
      noMuraRatioCpu: m((r) => r.bNoMura.cpuMs / r.a.cpuMs),
    },
    pdf,
  };
}

function inspectArgs(size: BenchSize, set: BenchSet, jobs: number, pdf: boolean): string[] {
  return ['--jobs', String(jobs), '--falloff', size.profile, '--panel-size', `${set.panelSizeMm.width}x${set.panelSizeMm.height}`, ...(pdf ? [] : ['--no-pdf'])];
}

function describeRun(label: string, r: CommandRun, steady: SteadyRate | null = null): string {
  const rate = (r.photos / r.wallMs) * 60000;
  return (
    `  ${label}: ${r.photos} photos (${r.photoErrors} unmeasurable) in ${(r.wallMs / 1000).toFixed(1)} s = ${rate.toFixed(1)} photos/min; ` +
    `CPU ${r.cpuMs === null ? '?' : (r.cpuMs / 1000).toFixed(1)} s; peak RSS ${r.maxRssMb === null ? '?' : r.maxRssMb.toFixed(0)} MB; load ${r.loadBefore[0]!.toFixed(2)} → ${r.loadAfter[0]!.toFixed(2)}` +
    (steady
      ? `\n    after start-up: panels ${steady.fromPanel}–${steady.toPanel} in ${(steady.ms / 1000).toFixed(1)} s = ${steady.photosPerMin.toFixed(1)} photos/min (first ${steady.fromPanel - 1} done at ${(steady.startUpMs / 1000).toFixed(1)} s)`
      : '')
  );
}

/** Throughput after start-up: the panels finished after each worker's first one, over the time they took. */
interface SteadyRate {
  fromPanel: number;
  toPanel: number;
  ms: number;
  startUpMs: number;
  photosPerMin: number;
}

function steadyRate(r: CommandRun, jobs: number): SteadyRate | null {
  const t = r.panelDoneMs;
  // every panel must have reported, and some must be left after the first one of each worker
  if (r.panels === 0 || t.length !== r.panels || t.length < jobs + 2) return null;
  const photosPerPanel = r.photos / r.panels;
  const ms = t[t.length - 1]! - t[jobs - 1]!;
  return { fromPanel: jobs + 1, toPanel: t.length, ms, startUpMs: t[jobs - 1]!, photosPerMin: ((t.length - jobs) * photosPerPanel * 60000) / ms };
}

function gitCommit(): string | null {
  try {
    return execFileSync('git', ['rev-parse', '--short', 'HEAD'], { cwd: root, stdio: ['ignore', 'pipe', 'ignore'] }).toString().trim();
  } catch {
    return null;
  }
}

async function main(): Promise<void> {
  const args = parseArgs(process.argv.slice(2));
  const started = performance.now();
  sharp.cache(false);
  const env = {
    date: new Date().toISOString(),
    commit: gitCommit(),
    node: process.version,
    sharp: sharp.versions.sharp ?? null,
    libvips: sharp.versions.vips,
    sharpConcurrency: sharp.concurrency(),
    cores: availableParallelism(),
    cpu: cpus()[0]?.model ?? null,
    loadAtStart: loadavg(),
    exposeGc: collect !== undefined,
  };
  log(`evenfield benchmark: node ${env.node}, sharp ${env.sharp}, libvips ${env.libvips}, ${env.cores} cores (${env.cpu}), load ${env.loadAtStart.map((x) => x.toFixed(2)).join(' ')}`);
  if (!collect) log('note: run with node --expose-gc (as npm run bench does) so each timing starts from a collected heap');

  const set = await ensureBenchPhotos(args.cache, (s) => log(`  ${s}`));
  const sizes = set.sizes.filter((s) => !args.sizes || args.sizes.includes(s.label));

  const photoFigures: SizeFigures[] = [];
  for (const size of sizes) {
    log(`\n(a) sharp full-size decode, (b) evenfield measurement (inspect --no-pdf), (c) PDF: ${size.label} ${size.width}×${size.height}`);
    photoFigures.push(await perPhoto(set, size, args.runs));
  }

  const hook = join(root, 'dist', 'scripts', 'bench-usage-hook.js');
  const lotSize = sizes[0]!;
  {
    // what the lot runs will take at the measured rate (one photo per core at a time)
    const b = photoFigures[0]!.medians.bWallMs / 1000;
    const photos = (args.skipLot ? 0 : 1.5 * args.lotPanels * lotSize.photos.length) + (args.skipMemory ? 0 : args.memory.reduce((x, y) => x + y, 0) / 2);
    log(`\nlot runs to come: about ${((photos * b) / 60).toFixed(0)} min at ${b.toFixed(1)} s per photo`);
  }
  const lotEnv: NodeJS.ProcessEnv = args.defaultAllocator ? { ...process.env, EVENFIELD_ALLOCATOR: 'default' } : process.env;
  if (args.defaultAllocator) log("lots run in one process with the C library's allocator defaults (--default-allocator)");
  const lots: Record<string, CommandRun> = {};
  const steady: Record<string, SteadyRate | null> = {};
  if (!args.skipLot) {
    const n = args.lotPanels * lotSize.photos.length;
    log(`\n(d) lot throughput: inspect of ${args.lotPanels} panels × ${lotSize.photos.length} photos (${lotSize.label}), PDFs included`);
    const dir = makeLot(join(args.cache, 'lots', `${lotSize.label}-${n}`), lotSize.photos, n);
    for (const jobs of [1, 2]) {
      const r = await runInspect(root, hook, dir, join(args.cache, 'out', `lot-jobs${jobs}`), inspectArgs(lotSize, set, jobs, true), lotEnv, false);
      lots[`jobs${jobs}`] = r;
      steady[`jobs${jobs}`] = steadyRate(r, jobs);
      log(describeRun(`--jobs ${jobs}`, r, steady[`jobs${jobs}`]));
    }
  }
  const memory: Record<string, CommandRun> = {};
  if (!args.skipMemory) {
    log(`\n(e) peak resident memory: inspect (--jobs 2, PDFs included) of lots of ${args.memory.join(' and ')} ${lotSize.label} photos`);
    for (const n of args.memory) {
      const dir = makeLot(join(args.cache, 'lots', `${lotSize.label}-${n}`), lotSize.photos, n);
      const r = await runInspect(root, hook, dir, join(args.cache, 'out', `memory-${n}`), inspectArgs(lotSize, set, 2, true), lotEnv);
      memory[`photos${n}`] = r;
      log(describeRun(`${n} photos`, r));
    }
  }

  // summary
  log('\nsummary (medians; CPU time in brackets):');
  for (const f of photoFigures) {
    const m = f.medians;
    log(
      `  ${f.size}: (a) ${m.aWallMs.toFixed(0)} ms [${m.aCpuMs.toFixed(0)}]  evenfield decode ${m.decodeWallMs.toFixed(0)} ms [${m.decodeCpuMs.toFixed(0)}]  ` +
        `without mura ${m.bNoMuraWallMs.toFixed(0)} ms [${m.bNoMuraCpuMs.toFixed(0)}]  (b) ${m.bWallMs.toFixed(0)} ms [${m.bCpuMs.toFixed(0)}]  (b)/(a) ${m.ratioWall.toFixed(2)} [${m.ratioCpu.toFixed(2)}]  decode/(a) ${m.decodeRatioWall.toFixed(2)} [${m.decodeRatioCpu.toFixed(2)}]  without mura/(a) ${m.noMuraRatioWall.toFixed(2)} [${m.noMuraRatioCpu.toFixed(2)}]` +
        (f.pdf ? `  (c) PDF per panel ${f.pdf.medianWallMs.toFixed(0)} ms [${f.pdf.medianCpuMs.toFixed(0)}]` : ''),
    );
  }
  const j1 = lots.jobs1;
  const j2 = lots.jobs2;
  const speedup = j1 && j2 ? j1.wallMs / j2.wallMs : null;
  const s1 = steady.jobs1;
  const s2 = steady.jobs2;
  const steadySpeedup = s1 && s2 ? s2.photosPerMin / s1.photosPerMin : null;
  if (speedup !== null)
    log(`  (d) --jobs 2 throughput / --jobs 1: ${speedup.toFixed(2)}× over the whole lot${steadySpeedup !== null ? `, ${steadySpeedup.toFixed(2)}× after start-up` : ''}`);
  const memKeys = Object.keys(memory);
  let memoryGrowth: number | null = null;
  if (memKeys.length >= 2) {
    const first = memory[memKeys[0]!]!;
    const last = memory[memKeys[memKeys.length - 1]!]!;
    if (first.maxRssMb && last.maxRssMb) memoryGrowth = last.maxRssMb / first.maxRssMb - 1;
    log(`  (e) peak RSS ${memKeys.map((k) => `${k.slice(6)} photos ${memory[k]!.maxRssMb?.toFixed(0)} MB`).join(', ')}${memoryGrowth !== null ? ` (${(100 * memoryGrowth).toFixed(1)} % growth)` : ''}`);
  }
  const totalS = (performance.now() - started) / 1000;
  log(`  bench time ${totalS.toFixed(0)} s, load at end ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);

  const doc = { env, args, photos: photoFigures, lots, lotSpeedup: speedup, lotSteady: steady, lotSpeedupAfterStartUp: steadySpeedup, memory, memoryGrowth, benchSeconds: totalS, loadAtEnd: loadavg() };
  mkdirSync(dirname(args.json), { recursive: true });
  writeFileSync(args.json, JSON.stringify(doc, null, 2) + '\n');
  log(`figures written to ${args.json}`);
}

await main();
