// Lots for the benchmark: folders of hard links to the generated photos under fresh panel names
// (the decoder and the pipeline see the same bytes, memory and time behave as for distinct photos),
// and a run of the real command on such a folder with its time, CPU and peak memory.

import { spawn } from 'node:child_process';
import { copyFileSync, existsSync, linkSync, mkdirSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { loadavg } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import type { BenchPhoto } from './bench-photos.js';

/**
 * A folder holding `photos` photos: panels LOT-0001, LOT-0002 ... each with the source panel's patterns
 * in turn (the last panel may have fewer). Rebuilt when the count differs.
 */
export function makeLot(dir: string, sources: BenchPhoto[], photos: number): string {
  const have = existsSync(dir) ? readdirSync(dir).filter((f) => f.endsWith('.jpg')).length : -1;
  if (have === photos) return dir;
  rmSync(dir, { recursive: true, force: true });
  mkdirSync(dir, { recursive: true });
  const per = sources.length;
  for (let k = 0; k < photos; k++) {
    const src = sources[k % per]!;
    const panel = `LOT-${String(Math.floor(k / per) + 1).padStart(4, '0')}`;
    const dest = join(dir, `${panel}_${src.token}.jpg`);
    try {
      linkSync(src.file, dest);
    } catch {
      copyFileSync(src.file, dest);
    }
  }
  return dir;
}

export interface CommandRun {
  args: string[];
  wallMs: number;
  cpuMs: number | null;
  maxRssMb: number | null;
  exitStatus: number | null;
  photos: number;
  photoErrors: number;
  panels: number;
  loadBefore: number[];
  loadAfter: number[];
  /** when each panel was finished, ms from the spawn (from the command's progress lines; empty with `quiet`) */
  panelDoneMs: number[];
}

/**
 * Run `evenfield inspect` in a child process with the usage hook; wall time from spawn to exit; memory and
 * CPU of the launcher and its child added. Unless `quiet`, the command prints a line per finished panel on
 * its standard error (not a terminal: plain lines), and the time each arrives is kept.
 */
export async function runInspect(
  root: string,
  hook: string,
  lotDir: string,
  outDir: string,
  extra: string[],
  env: NodeJS.ProcessEnv = process.env,
  quiet = true,
): Promise<CommandRun> {
  const args = [
    '--import',
    pathToFileURL(hook).href,
    join(root, 'bin', 'evenfield.js'),
    'inspect',
    lotDir,
    '--out',
    outDir,
    '--force',
    ...(quiet ? ['--quiet'] : []),
    '--date',
    '2026-01-01T00:00:00Z',
    ...extra,
  ];
  const panelDoneMs: number[] = [];
  const loadBefore = loadavg();
  const t0 = performance.now();
  const { status, stderr } = await new Promise<{ status: number | null; stderr: string }>((resolveRun, reject) => {
    const child = spawn(process.execPath, args, { cwd: root, stdio: ['ignore', 'ignore', 'pipe'], env });
    let err = '';
    let seen = 0; // characters of err already looked through for whole lines
    child.stderr.setEncoding('utf8');
    child.stderr.on('data', (s: string) => {
      const now = performance.now() - t0;
      err += s;
      const end = err.lastIndexOf('\n');
      if (end < seen) return;
      // progress lines as lib/batch/progress.ts writes them off a terminal: "[k/N] PANEL: verdict"
      for (const line of err.slice(seen, end).split('\n')) if (/^\[\d+\/\d+\] /.test(line)) panelDoneMs.push(now);
      seen = end + 1;
    });
    child.on('error', reject);
    child.on('close', (code) => resolveRun({ status: code, stderr: err }));
  });
  const wallMs = performance.now() - t0;
  const loadAfter = loadavg();
  // one line per process (the launcher and the child it runs the command in): CPU times add up, and so
  // do the peaks, an upper bound of the pair's peak (the launcher holds about 44 MB throughout)
  const lines = stderr.split('\n').filter((l) => l.startsWith('evenfield-bench-usage '));
  const usage =
    lines.length === 0
      ? null
      : lines
          .map((l) => JSON.parse(l.slice('evenfield-bench-usage '.length)) as { maxRssKb: number; userMs: number; systemMs: number })
          .reduce((x, y) => ({ maxRssKb: x.maxRssKb + y.maxRssKb, userMs: x.userMs + y.userMs, systemMs: x.systemMs + y.systemMs }));
  let photos = 0;
  let photoErrors = 0;
  let panels = 0;
  try {
    const doc = JSON.parse(readFileSync(join(outDir, 'results.json'), 'utf8')) as { panels: { photos: { status: string }[] }[] };
    panels = doc.panels.length;
    for (const p of doc.panels) for (const ph of p.photos) (photos++, ph.status === 'ok' || photoErrors++);
  } catch {
    /* no results: reported as 0 photos */
  }
  if (status !== 0 && status !== 1) {
    const msg = stderr.split('\n').filter((l) => l && !l.startsWith('evenfield-bench-usage') && !/^\[\d+\/\d+\] /.test(l)).slice(0, 5).join('\n');
    process.stderr.write(`warning: inspect exited with status ${status}${msg ? `:\n${msg}` : ''}\n`);
  }
  return {
    args: args.slice(2),
    wallMs,
    cpuMs: usage ? usage.userMs + usage.systemMs : null,
    maxRssMb: usage ? usage.maxRssKb / 1024 : null,
    exitStatus: status,
    photos,
    photoErrors,
    panels,
    loadBefore,
    loadAfter,
    panelDoneMs,
  };
}
