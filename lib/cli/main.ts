// Command-line entry: parse arguments, call lib, set the exit status. Thin on purpose.

import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import yargs from 'yargs';
import { hideBin } from 'yargs/helpers';
import { EvenfieldError, EXIT, exitStatusOf, isEvenfieldError } from '../errors.js';
import { collectImages, groupByManifest, groupByName, parseCornersText } from '../batch/grouping.js';
import { CAMERA_RAW_ADVICE } from '../io/index.js';
import type { GroupingResult } from '../batch/grouping.js';
import { defaultJobs, packageRoot, runBatch } from '../batch/run.js';
import type { RunContext } from '../batch/panel-task.js';
import { DEFAULT_MEASURE_OPTIONS } from '../pipeline/index.js';
import type { FalloffChoice, MeasureOptions } from '../pipeline/index.js';
import { DEFAULT_SPOT_RADIUS_PCT } from '../measure/index.js';
import { criteriaSummary, effectiveCriteriaYaml, loadCriteria } from '../judge/index.js';
import { calibrateCommand, loadFalloffProfile, flatFramesToProfile } from './falloff-commands.js';
import { bracketCommand, loadResponse } from './response-commands.js';
import type { GridLayout, GridPlacement } from '../types.js';

function toolVersion(): string {
  const pkg = JSON.parse(readFileSync(join(packageRoot(), 'package.json'), 'utf8')) as { version: string };
  return pkg.version;
}

function parsePanelSize(s: string): { width: number; height: number } {
  const m = /^\s*([0-9]*\.?[0-9]+)\s*[xX×]\s*([0-9]*\.?[0-9]+)\s*$/.exec(s);
  if (!m) throw new EvenfieldError('usage', `--panel-size must be WIDTHxHEIGHT in mm, e.g. 597.9x336.3 (got "${s}")`);
  const width = Number(m[1]);
  const height = Number(m[2]);
  if (!(width > 0 && height > 0 && width < 20000 && height < 20000)) throw new EvenfieldError('usage', `--panel-size out of range: "${s}"`);
  return { width, height };
}

function parseTileGrid(s: string): [number, number] {
  const m = /^\s*(\d+)\s*[xX×]\s*(\d+)\s*$/.exec(s);
  if (!m || Number(m[1]) < 1 || Number(m[2]) < 1) throw new EvenfieldError('usage', `--tile-grid must be COLUMNSxROWS, e.g. 4x3 (got "${s}")`);
  return [Number(m[1]), Number(m[2])];
}

interface InspectArgs {
  paths: string[];
  out: string;
  manifest?: string;
  criteria?: string;
  grid?: number;
  placement?: string;
  inset?: number;
  'spot-radius'?: number;
  'panel-size'?: string;
  corners?: string;
  jobs?: number;
  falloff?: string;
  flat?: string[];
  'cos4-model'?: boolean;
  'focal-35mm'?: number;
  linear?: boolean;
  response?: string;
  pdf: boolean;
  mura: boolean;
  resume: boolean;
  force: boolean;
  date?: string;
  lot?: string;
  station?: string;
  operator?: string;
  'tile-grid'?: string;
  'map-resolution'?: number;
  'work-size'?: number;
  'jpeg-samples'?: 'float' | '8bit';
  quiet?: boolean;
  'max-view-angle'?: number;
  'max-flicker'?: number;
}

async function inspect(a: InspectArgs): Promise<number> {
  const crit = loadCriteria(a.criteria ?? null);
  const c = crit.criteria;
  const layout = (a.grid ?? c.grid?.layout ?? 9) as GridLayout;
  if (![5, 9, 13, 25].includes(layout)) throw new EvenfieldError('usage', `--grid must be 5, 9, 13 or 25 (got ${a.grid})`);
  const placement = (a.placement ?? c.grid?.placement ?? 'cells') as GridPlacement;
  if (placement !== 'cells' && placement !== 'inset') throw new EvenfieldError('usage', `--placement must be cells or inset (got ${a.placement})`);
  const insetPct = a.inset ?? c.grid?.insetPct ?? 10;
  if (!(insetPct > 0 && insetPct < 50)) throw new EvenfieldError('usage', `--inset must be between 0 and 50 % (got ${insetPct})`);
  const spotRadiusPct = a['spot-radius'] ?? c.grid?.spotRadiusPct ?? DEFAULT_SPOT_RADIUS_PCT;
  if (!(spotRadiusPct > 0 && spotRadiusPct <= 10)) throw new EvenfieldError('usage', `--spot-radius must be between 0 and 10 % of the diagonal (got ${spotRadiusPct})`);
  const panelSizeMm = a['panel-size'] ? parsePanelSize(a['panel-size']) : c.panel ? { width: c.panel.widthMm, height: c.panel.heightMm } : null;
  const corners = a.corners ? parseCornersText(a.corners) : null;
  if (a.corners && !corners) throw new EvenfieldError('usage', '--corners must be 8 numbers "x,y x,y x,y x,y" (top-left, top-right, bottom-right, bottom-left, image pixels)');
  const jobs = a.jobs ?? defaultJobs();
  if (!(Number.isInteger(jobs) && jobs >= 1 && jobs <= 64)) throw new EvenfieldError('usage', `--jobs must be a whole number from 1 to 64 (got ${Number.isNaN(a.jobs) ? 'something that is not a number' : a.jobs})`);

  if (a.linear && a.response) throw new EvenfieldError('usage', 'choose one of --linear and --response');
  const transfer: MeasureOptions['transfer'] = a.response ? loadResponse(a.response) : a.linear ? 'linear' : 'auto';

  let falloff: FalloffChoice = { kind: 'none' };
  const falloffChoices = [a.falloff, a.flat && a.flat.length > 0 ? 'flat' : undefined, a['cos4-model'] ? 'cos4' : undefined].filter(Boolean);
  if (falloffChoices.length > 1) throw new EvenfieldError('usage', 'choose one of --falloff, --flat and --cos4-model');
  if (a.falloff) falloff = { kind: 'profile', profile: loadFalloffProfile(a.falloff), source: a.falloff };
  else if (a.flat && a.flat.length > 0) {
    const profile = await flatFramesToProfile(a.flat, transfer);
    falloff = { kind: 'profile', profile, source: `flat frames: ${a.flat.join(', ')}` };
  } else if (a['cos4-model']) falloff = { kind: 'cos4', focal35mm: a['focal-35mm'] ?? null };

  // grouping
  let grouping: GroupingResult;
  if (a.manifest) {
    grouping = groupByManifest(a.manifest);
  } else {
    if (a.paths.length === 0) throw new EvenfieldError('usage', 'give photos or folders to inspect (or --manifest FILE)');
    const { files, missing, rawSkipped } = collectImages(a.paths);
    if (missing.length > 0) throw new EvenfieldError('not-found', 'no such file or folder', missing[0]);
    if (files.length === 0) {
      const raws = rawSkipped > 0 ? ` (only ${rawSkipped} camera raw file${rawSkipped > 1 ? 's' : ''}: ${CAMERA_RAW_ADVICE})` : '';
      throw new EvenfieldError('usage', `no photos (.jpg, .png, .tif, .webp, .heic, .avif) found in ${a.paths.join(', ')}${raws}`);
    }
    grouping = groupByName(files);
  }
  if (corners) for (const g of grouping.panels) for (const p of g.photos) p.corners ??= corners;
  for (const u of grouping.unassigned) process.stderr.write(`error: ${u.file}: ${u.reason}\n`);
  if (grouping.panels.length === 0) throw new EvenfieldError('usage', 'no photo could be assigned to a panel');

  const date = a.date ?? new Date().toISOString();
  if (Number.isNaN(Date.parse(date))) throw new EvenfieldError('usage', `--date must be an ISO 8601 date (got "${a.date}")`);
  const measure: RunContext['measure'] = {
    ...DEFAULT_MEASURE_OPTIONS,
    panelSizeMm,
    grid: { layout, placement, insetFraction: insetPct / 100, spotRadiusPct },
    falloff,
    transfer,
    mura: a.mura,
    muraOptions: {
      ...(a['tile-grid'] ? { tileGrid: parseTileGrid(a['tile-grid']) } : c.mura?.tileGrid ? { tileGrid: c.mura.tileGrid } : {}),
      ...(c.mura?.minFeatureMm ? { minFeatureMm: c.mura.minFeatureMm } : {}),
    },
    mapPxPerMm: a['map-resolution'] ?? DEFAULT_MEASURE_OPTIONS.mapPxPerMm,
    workLongSide: a['work-size'] ?? DEFAULT_MEASURE_OPTIONS.workLongSide,
    jpegSamples: a['jpeg-samples'] ?? DEFAULT_MEASURE_OPTIONS.jpegSamples,
    artifacts: a.pdf,
    quality: {
      ...DEFAULT_MEASURE_OPTIONS.quality,
      ...(a['max-view-angle'] !== undefined ? { maxViewAngleDeg: a['max-view-angle'] } : {}),
      ...(a['max-flicker'] !== undefined ? { maxFlickerPct: a['max-flicker'] } : {}),
    },
  };
  if (a['max-view-angle'] !== undefined && !(a['max-view-angle'] > 0 && a['max-view-angle'] < 90)) {
    throw new EvenfieldError('usage', `--max-view-angle must be between 0 and 90 degrees (got ${a['max-view-angle']})`);
  }
  if (a['max-flicker'] !== undefined && !(a['max-flicker'] >= 0 && Number.isFinite(a['max-flicker']))) {
    throw new EvenfieldError('usage', `--max-flicker must be a percentage, 0 or more (got ${a['max-flicker']})`);
  }
  const ctx: RunContext = {
    measure,
    criteria: c,
    criteriaHash: crit.hash,
    criteriaSource: crit.source,
    criteriaSummary: criteriaSummary(crit),
    outDir: a.out,
    pdf: a.pdf,
    toolVersion: toolVersion(),
    date,
    lot: { id: a.lot ?? null, station: a.station ?? null, operator: a.operator ?? null },
  };
  const optionsRecord: Record<string, unknown> = {
    grid: { layout, placement, insetPct: placement === 'inset' ? insetPct : null, spotRadiusPct },
    panelSizeMm,
    falloff: falloff.kind === 'profile' ? { kind: 'profile', source: falloff.source } : falloff,
    transfer: typeof transfer === 'object' ? { kind: 'response', source: a.response, id: transfer.id } : transfer,
    mura: measure.mura,
    mapPxPerMm: measure.mapPxPerMm,
    workLongSide: measure.workLongSide,
    jpegSamples: measure.jpegSamples,
    manifest: grouping.manifest,
  };
  const out = await runBatch({
    grouping,
    ctx,
    jobs,
    resume: a.resume,
    force: a.force,
    options: optionsRecord,
    effectiveCriteria: c,
    progress: !a.quiet,
  });
  const s = out.doc.summary;
  if (!a.quiet) {
    // files that could not be used, also those in panels that failed on another photo (exit status 2)
    const unusable = out.doc.panels.reduce((n, p) => n + p.photos.filter((ph) => ph.status === 'error').length, 0) + out.doc.unassigned.length;
    process.stderr.write(
      `${s.panels} ${s.panels === 1 ? 'panel' : 'panels'}: ${s.passed} passed, ${s.failed} failed, ${s.errors} ${s.errors === 1 ? 'error' : 'errors'}` +
        (unusable ? `, ${unusable} unusable ${unusable === 1 ? 'file' : 'files'}` : '') +
        (out.skipped ? ` (${out.skipped} kept from the earlier run)` : '') +
        ` in ${(out.ms / 1000).toFixed(1)} s → ${a.out}\n`,
    );
  }
  return out.exitStatus;
}

export async function main(argv: string[]): Promise<number> {
  let status: number = EXIT.allPass;
  const parser = yargs(argv)
    .scriptName('evenfield')
    .usage('$0 <command> [options]')
    .parserConfiguration({ 'camel-case-expansion': false })
    .strict()
    .exitProcess(false)
    .fail((msg, err) => {
      throw err ?? new EvenfieldError('usage', msg ?? 'bad usage');
    })
    .command(
      'inspect [paths..]',
      'measure and judge photos of panels (files or folders, walked recursively)',
      (y) =>
        y
          .positional('paths', { type: 'string', array: true, default: [] as string[], describe: 'photos or folders' })
          .option('out', { type: 'string', default: 'reports/latest', describe: 'output folder' })
          .option('manifest', { type: 'string', describe: 'CSV with columns file, panel, pattern[, corners, note]' })
          .option('criteria', { type: 'string', describe: 'acceptance criteria YAML (default: the built-in criteria)' })
          .option('grid', { type: 'number', describe: 'grid layout: 5, 9, 13 or 25 points (default 9)' })
          .option('placement', { type: 'string', describe: 'cells (centres of equal cells, default) or inset' })
          .option('inset', { type: 'number', describe: 'inset from the edges in % for --placement inset (default 10)' })
          .option('spot-radius', { type: 'number', describe: `measurement spot radius, % of the panel diagonal (default ${DEFAULT_SPOT_RADIUS_PCT})` })
          .option('panel-size', { type: 'string', describe: 'active area WIDTHxHEIGHT in mm, e.g. 597.9x336.3' })
          .option('corners', { type: 'string', describe: 'manual active-area corners "x,y x,y x,y x,y" (TL TR BR BL, image pixels)' })
          .option('jobs', { type: 'number', describe: 'worker threads (default: the number of cores)' })
          .option('falloff', { type: 'string', describe: 'lens falloff profile JSON made by "evenfield calibrate"' })
          .option('flat', { type: 'string', array: true, describe: 'flat-field frames to calibrate the falloff on the fly' })
          .option('cos4-model', { type: 'boolean', describe: 'correct falloff with the cos⁴ law (linear input only)' })
          .option('focal-35mm', { type: 'number', describe: '35 mm-equivalent focal length when EXIF lacks it' })
          .option('linear', { type: 'boolean', describe: 'the files hold linear values (no sRGB curve)' })
          .option('response', { type: 'string', describe: 'camera response JSON made by "evenfield calibrate --bracket": read code values through it instead of the sRGB curve' })
          .option('pdf', { type: 'boolean', default: true, describe: 'write PDF reports (--no-pdf to skip)' })
          .option('mura', { type: 'boolean', default: true, describe: 'full-field mura analysis (--no-mura to skip)' })
          .option('resume', { type: 'boolean', default: false, describe: 'finish an interrupted run in the same output folder' })
          .option('force', { type: 'boolean', default: false, describe: 'replace a previous run in the output folder' })
          .option('date', { type: 'string', describe: 'date written into the outputs (ISO 8601), for reproducible reports' })
          .option('lot', { type: 'string', describe: 'lot id for the summary' })
          .option('station', { type: 'string', describe: 'inspection station for the summary' })
          .option('operator', { type: 'string', describe: 'operator for the summary' })
          .option('tile-grid', { type: 'string', describe: 'tiled displays: tiles COLUMNSxROWS, for seam and tile-step findings' })
          .option('map-resolution', { type: 'number', describe: 'rectified map pixels per mm (default 2)' })
          .option('work-size', { type: 'number', describe: 'decode photos down to about this long side in pixels (default 1800)' })
          .option('jpeg-samples', {
            choices: ['float', '8bit'] as const,
            describe: 'JPEG decoding: float keeps the fraction of a code value an 8-bit decoder rounds away (default float; see README)',
          })
          .option('max-view-angle', { type: 'number', describe: 'refuse photos that see part of the panel more than this many degrees off its normal (default 60)' })
          .option('max-flicker', {
            type: 'number',
            describe:
              "refuse photos with periodic bands along the camera's rows (a pulsed display caught by a rolling shutter) above this peak-to-peak percent (default 1; 0 turns the check off)",
          })
          .option('quiet', { type: 'boolean', describe: 'no progress output' }),
      async (a) => {
        status = await inspect(a as unknown as InspectArgs);
      },
    )
    .command(
      'calibrate <photos..>',
      "make a lens falloff profile from flat-field frames (or shifted photos of one panel), or the camera's response from an exposure bracket",
      (y) =>
        y
          .positional('photos', { type: 'string', array: true, demandOption: true })
          .option('out', { type: 'string', demandOption: true, describe: 'falloff profile (or, with --bracket, camera response) JSON to write' })
          .option('shifted', { type: 'boolean', default: false, describe: 'the photos show one panel with the camera shifted between shots' })
          .option('bracket', { type: 'boolean', default: false, describe: "the photos show one still scene at different exposures: measure the camera's response" })
          .option('times', { type: 'string', array: true, describe: 'with --bracket: exposure times in the order of the photos (e.g. 1/250 1/125), when EXIF lacks them' })
          .option('response', { type: 'string', describe: 'camera response JSON to read the flat frames or shifted photos through' })
          .option('linear', { type: 'boolean', describe: 'the flat frames or shifted photos hold linear values' })
          .option('force', { type: 'boolean', default: false, describe: 'replace an existing file at --out' }),
      async (a) => {
        const photos = a.photos as string[];
        if (a.bracket) {
          if (a.shifted) throw new EvenfieldError('usage', 'choose one of --bracket and --shifted');
          if (a.response || a.linear) throw new EvenfieldError('usage', '--bracket measures the response: --response and --linear do not apply');
          status = await bracketCommand(photos, a.out, { force: a.force, times: a.times ?? null, madeBy: `evenfield ${toolVersion()}`, createdAt: new Date().toISOString() });
          return;
        }
        if (a.times) throw new EvenfieldError('usage', '--times goes with --bracket');
        if (a.linear && a.response) throw new EvenfieldError('usage', 'choose one of --linear and --response');
        const transfer = a.response ? loadResponse(a.response) : a.linear ? 'linear' : 'auto';
        status = await calibrateCommand(photos, a.out, { shifted: a.shifted, force: a.force, transfer });
      },
    )
    .command(
      'criteria',
      'print the effective acceptance criteria as YAML (a starting point for your own)',
      (y) => y.option('criteria', { type: 'string', describe: 'criteria YAML to check and print' }),
      (a) => {
        const crit = loadCriteria(a.criteria ?? null);
        process.stdout.write(effectiveCriteriaYaml(crit.criteria, { source: crit.source, text: crit.text }));
        process.stderr.write(`# sha256 ${crit.hash} (${crit.source})\n`);
      },
    )
    .demandCommand(1, 'give a command: inspect, calibrate or criteria')
    .help()
    .version(toolVersion());
  try {
    await parser.parseAsync(argv);
  } catch (e) {
    if (isEvenfieldError(e)) {
      // one line per problem (a criteria file can have several), each a whole message on its own
      for (const line of e.message.split('\n')) process.stderr.write(`evenfield: ${line}\n`);
      return exitStatusOf(e);
    }
    process.stderr.write(`evenfield: ${e instanceof Error ? e.message.split('\n')[0] : String(e)} (a fault in evenfield: please report it with the command line)\n`);
    return exitStatusOf(e);
  }
  return status;
}

export async function run(): Promise<void> {
  const code = await main(hideBin(process.argv));
  process.exitCode = code;
}
