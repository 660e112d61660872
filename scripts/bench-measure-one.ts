// Measure photos the way `inspect --no-pdf` does (grid, falloff profile, mura), in this thread, and
// print wall and CPU time per run. Used under `node --cpu-prof` to find where the time goes.
//
//   node dist/scripts/bench-measure-one.js [--runs N] [--profile falloff.json] [--no-mura] PHOTO...
//
// The pattern is taken from the file name (<panel>_<pattern>.<ext>).

import { basename } from 'node:path';
import { loadFalloffProfile } from '../lib/cli/falloff-commands.js';
import { DEFAULT_MEASURE_OPTIONS, measurePhoto } from '../lib/pipeline/index.js';
import type { MeasureOptions } from '../lib/pipeline/index.js';
import type { GridLayout, GridPlacement, Pattern } from '../lib/types.js';
import { loadCriteria } from '../lib/judge/index.js';
import { DEFAULT_SPOT_RADIUS_PCT } from '../lib/measure/index.js';

export function patternOf(file: string): { pattern: Pattern; level: number | null } {
  const tok = basename(file).replace(/\.[^.]+$/, '').split('_').pop() ?? '';
  const m = /^gray(\d+)$/.exec(tok);
  if (m) return { pattern: 'gray', level: Number(m[1]) };
  if (['white', 'black', 'red', 'green', 'blue', 'gray'].includes(tok)) return { pattern: tok as Pattern, level: null };
  throw new Error(`cannot tell the pattern of ${file}`);
}

/**
 * The measurement options `evenfield inspect` uses with the built-in criteria (grid layout, placement
 * and spot, mura settings), the given panel size and falloff profile; `artifacts` is what --no-pdf
 * turns off. Mirrors lib/cli/main.ts.
 */
export function benchMeasureOptions(
  file: string,
  o: { profile: string | null; mura: boolean; panelSizeMm: { width: number; height: number } | null; artifacts?: boolean },
): MeasureOptions {
  const { pattern, level } = patternOf(file);
  const c = loadCriteria(null).criteria;
  return {
    ...DEFAULT_MEASURE_OPTIONS,
    pattern,
    patternLevel: level,
    panelSizeMm: o.panelSizeMm,
    grid: {
      layout: (c.grid?.layout ?? 9) as GridLayout,
      placement: (c.grid?.placement ?? 'cells') as GridPlacement,
      insetFraction: (c.grid?.insetPct ?? 10) / 100,
      spotRadiusPct: c.grid?.spotRadiusPct ?? DEFAULT_SPOT_RADIUS_PCT,
    },
    falloff: o.profile ? { kind: 'profile', profile: loadFalloffProfile(o.profile), source: o.profile } : { kind: 'none' },
    mura: o.mura,
    muraOptions: {
      ...(c.mura?.tileGrid ? { tileGrid: c.mura.tileGrid } : {}),
      ...(c.mura?.minFeatureMm ? { minFeatureMm: c.mura.minFeatureMm } : {}),
    },
    artifacts: o.artifacts ?? false,
  };
}

async function main(): Promise<void> {
  const args = process.argv.slice(2);
  let runs = 3;
  let profile: string | null = null;
  let mura = true;
  const files: string[] = [];
  for (let i = 0; i < args.length; i++) {
    const a = args[i]!;
    if (a === '--runs') runs = Number(args[++i]);
    else if (a === '--profile') profile = args[++i]!;
    else if (a === '--no-mura') mura = false;
    else files.push(a);
  }
  for (const f of files) {
    const opts = benchMeasureOptions(f, { profile, mura, panelSizeMm: { width: 597.9, height: 336.3 } });
    for (let r = 0; r < runs; r++) {
      const c0 = process.cpuUsage();
      const t0 = performance.now();
      const m = await measurePhoto(f, opts);
      const c = process.cpuUsage(c0);
      const status = m.result.status === 'ok' ? 'ok' : `${m.result.errorCode}: ${m.result.error}`;
      process.stdout.write(`${f} run ${r + 1}: ${(performance.now() - t0).toFixed(0)} ms wall, ${((c.user + c.system) / 1000).toFixed(0)} ms CPU, ${status}\n`);
    }
  }
}

if (process.argv[1] && process.argv[1].endsWith('bench-measure-one.js')) await main();
