// The batch job: group photos into panels, measure and judge each panel (in parallel worker
// threads), keep each finished panel on disk so an interrupted run can resume, then write
// results.json, results.csv and the lot summary PDF. Every file is written atomically.

import { createHash } from 'node:crypto';
import { existsSync, readFileSync, readdirSync, rmSync, statSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { availableParallelism } from 'node:os';
import { makeFolder, setDecoderThreads, writeFileAtomic } from '../io/index.js';
import { EvenfieldError } from '../errors.js';
import { renderLotPdf } from '../report/index.js';
import type { PanelResult } from '../types.js';
import type { GroupingResult, PanelGroup } from './grouping.js';
import { runPanel, pdfNameFor } from './panel-task.js';
import type { PanelOutcome, RunContext } from './panel-task.js';
import { resultsCsv, resultsJson, summarise } from './outputs.js';
import type { ResultsDocument } from './outputs.js';
import { Progress } from './progress.js';

export const WORK_DIR = '.evenfield-work';
export const RESULTS_JSON = 'results.json';
export const RESULTS_CSV = 'results.csv';
export const SUMMARY_PDF = 'lot-summary.pdf';

/**
 * Heap limits of each pool worker: a young generation of 12 MB instead of V8's 48 MB.
 * A photo's work allocates little on the JavaScript heap but many large typed arrays whose memory lies
 * outside it and is freed only when a collection finds their small wrapper objects dead. With the
 * default young generation each worker grows a new space of up to 48 MB that is rarely full, so
 * collections are rare, the dead arrays of a finished stage wait for them, and the new space itself
 * stays resident. A smaller one is collected more often (a scavenge costs in proportion to what
 * survives, which here is little), and the arrays that die young go with it. Measured on an 18-photo
 * lot of 12 MP photos, --jobs 2, PDFs (DEVELOPERS.md "Study log", Speed): peak resident memory
 * 521-543 MB with 48 MB, 466-476 MB with 12, 465-489 MB with 6; CPU time the same within the
 * machine's scatter. Only the young generation is limited: the old one keeps V8's default, so no
 * photo can run a worker out of memory through this setting.
 */
export const WORKER_RESOURCE_LIMITS = { maxYoungGenerationSizeMb: 12 } as const;

export interface BatchOptions {
  grouping: GroupingResult;
  ctx: RunContext;
  jobs: number;
  resume: boolean;
  force: boolean;
  options: Record<string, unknown>;
  effectiveCriteria: unknown;
  /** write a progress bar or lines to stderr */
  progress: boolean;
}

export interface BatchOutcome {
  doc: ResultsDocument;
  exitStatus: 0 | 1 | 2;
  outcomes: PanelOutcome[];
  ms: number;
  skipped: number;
}

export function packageRoot(): string {
  // lib/batch/run.ts or dist/lib/batch/run.js → the folder holding package.json
  let d = dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 5; i++) {
    if (existsSync(join(d, 'package.json'))) return d;
    d = dirname(d);
  }
  throw new Error('cannot find the package root');
}

function sha(text: string): string {
  return createHash('sha256').update(text).digest('hex');
}

/** What a panel's stored result depends on: its photos (size and time), its grouping and the run settings. */
function panelSignature(group: PanelGroup, ctx: RunContext): string {
  const files = [...group.photos, ...(group.offFrame ? [{ file: group.offFrame, pattern: 'off' }] : [])].map((p) => {
    let st: { size: number; mtimeMs: number } | null = null;
    try {
      const s = statSync(p.file);
      st = { size: s.size, mtimeMs: s.mtimeMs };
    } catch {
      st = null;
    }
    return { ...p, st };
  });
  return sha(JSON.stringify({ files, problems: group.problems, measure: ctx.measure, criteria: ctx.criteriaHash, pdf: ctx.pdf, version: ctx.toolVersion, lot: ctx.lot, date: ctx.date }));
}

/** writeFileAtomic's temporary names (lib/io/files.ts): `.<target name>.<pid>.<12 hex digits>.tmp`. */
const TEMP_NAME = /^\..+\.(\d+)\.[0-9a-f]{12}\.tmp$/;

function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
  } catch (e) {
    return (e as NodeJS.ErrnoException).code === 'EPERM';
  }
  // On Linux an ended process not yet reaped by its parent (a zombie) still answers signal 0
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    const close = stat.lastIndexOf(')');
    return stat.charAt(close + 2) !== 'Z';
  } catch {
    return true;
  }
}

/**
 * Remove the temporary files a killed run left behind (a kill between creating a temporary file and
 * renaming it leaves one; nothing can clean up after SIGKILL). Only names of writeFileAtomic's form,
 * and only those of processes that are gone: a live writer's file is left alone.
 */
function removeStaleTemporaries(dir: string): void {
  if (!existsSync(dir)) return;
  for (const name of readdirSync(dir)) {
    const m = TEMP_NAME.exec(name);
    if (!m) continue;
    const pid = Number(m[1]);
    if (pid !== process.pid && processAlive(pid)) continue;
    rmSync(join(dir, name), { force: true });
  }
}

interface RunState {
  date: string;
  startedBy: string;
}

/** Check the output folder; returns the run's date (kept from the first attempt when resuming). */
function prepareOutDir(outDir: string, opts: BatchOptions): string {
  const work = join(outDir, WORK_DIR);
  const statePath = join(work, 'run.json');
  const hasPrevious = existsSync(join(outDir, RESULTS_JSON)) || existsSync(work);
  if (hasPrevious && !opts.resume && !opts.force) {
    throw new EvenfieldError('output', `holds a previous run: add --resume to finish it or --force to replace it`, outDir);
  }
  if (opts.force && !opts.resume) {
    // remove only what an earlier run of this tool wrote
    const prevJson = join(outDir, RESULTS_JSON);
    if (existsSync(prevJson)) {
      try {
        const prev = JSON.parse(readFileSync(prevJson, 'utf8')) as ResultsDocument;
        for (const p of prev.panels ?? []) rmSync(join(outDir, pdfNameFor(p.panel)), { force: true });
      } catch {
        /* an unreadable previous results.json is replaced below */
      }
    }
    rmSync(work, { recursive: true, force: true });
    for (const f of [RESULTS_JSON, RESULTS_CSV, SUMMARY_PDF]) rmSync(join(outDir, f), { force: true });
  }
  makeFolder(work);
  removeStaleTemporaries(outDir);
  removeStaleTemporaries(work);
  if (opts.resume && existsSync(statePath)) {
    try {
      const st = JSON.parse(readFileSync(statePath, 'utf8')) as RunState;
      if (typeof st.date === 'string') return st.date;
    } catch {
      /* fall through: start a fresh state */
    }
  }
  return opts.ctx.date;
}

function storedOutcome(outDir: string, group: PanelGroup, signature: string, pdf: boolean): PanelResult | null {
  const p = join(outDir, WORK_DIR, `${group.panel}.json`);
  if (!existsSync(p)) return null;
  try {
    const rec = JSON.parse(readFileSync(p, 'utf8')) as { signature: string; result: PanelResult };
    if (rec.signature !== signature) return null;
    if (pdf && !existsSync(join(outDir, pdfNameFor(group.panel)))) return null;
    return rec.result;
  } catch {
    return null;
  }
}

export async function runBatch(opts: BatchOptions): Promise<BatchOutcome> {
  const t0 = performance.now();
  const outDir = resolve(opts.ctx.outDir);
  makeFolder(outDir);
  const date = prepareOutDir(outDir, opts);
  const ctx: RunContext = { ...opts.ctx, outDir, date };
  await writeFileAtomic(join(outDir, WORK_DIR, 'run.json'), JSON.stringify({ date, startedBy: `evenfield ${ctx.toolVersion}` } satisfies RunState) + '\n');

  const groups = opts.grouping.panels;
  const results = new Map<string, PanelResult>();
  const todo: { group: PanelGroup; signature: string }[] = [];
  for (const g of groups) {
    const signature = panelSignature(g, ctx);
    const stored = opts.resume ? storedOutcome(outDir, g, signature, ctx.pdf) : null;
    if (stored) results.set(g.panel, stored);
    else todo.push({ group: g, signature });
  }
  const skipped = groups.length - todo.length;

  const progress = new Progress(opts.progress, groups.length, skipped);
  const outcomes: PanelOutcome[] = [];
  const finish = async (group: PanelGroup, signature: string, outcome: PanelOutcome) => {
    await writeFileAtomic(join(outDir, WORK_DIR, `${group.panel}.json`), JSON.stringify({ signature, result: outcome.result }));
    results.set(group.panel, outcome.result);
    outcomes.push(outcome);
    // one line per unusable file: grouping problems (they name their files) and photos that could not be measured
    const errors = [...group.problems, ...outcome.result.photos.filter((p) => p.status === 'error').map((p) => p.error ?? '')];
    progress.tick(group.panel, outcome.result.verdict, errors);
  };

  const jobs = Math.max(1, Math.min(opts.jobs, todo.length || 1));
  if (jobs === 1) {
    for (const t of todo) await finish(t.group, t.signature, await runPanel({ group: t.group, ctx }));
  } else {
    const { Piscina } = await import('piscina');
    const workerFile = join(packageRoot(), 'dist', 'lib', 'batch', 'panel-task.js');
    if (!existsSync(workerFile)) throw new EvenfieldError('internal', 'compiled worker missing: run "npm run build"', workerFile);
    // one photo per worker at a time already fills the cores: libvips' own threads would only compete
    const decoderThreads = setDecoderThreads(1);
    const pool = new Piscina({ filename: pathToFileURL(workerFile).href, minThreads: jobs, maxThreads: jobs, idleTimeout: 1000, resourceLimits: WORKER_RESOURCE_LIMITS });
    try {
      await Promise.all(
        todo.map(async (t) => {
          const outcome = (await pool.run({ group: t.group, ctx })) as PanelOutcome;
          await finish(t.group, t.signature, outcome);
        }),
      );
    } finally {
      await pool.destroy();
      setDecoderThreads(decoderThreads);
    }
  }
  progress.done();

  // keep the grouping's order (sorted by panel id)
  const panels = groups.map((g) => results.get(g.panel)!).filter(Boolean);
  const doc: ResultsDocument = {
    tool: { name: 'evenfield', version: ctx.toolVersion },
    date,
    lot: ctx.lot,
    criteria: { source: ctx.criteriaSource, sha256: ctx.criteriaHash, effective: opts.effectiveCriteria },
    options: opts.options,
    summary: summarise(panels),
    panels,
    unassigned: opts.grouping.unassigned,
  };
  await writeFileAtomic(join(outDir, RESULTS_JSON), resultsJson(doc));
  await writeFileAtomic(join(outDir, RESULTS_CSV), resultsCsv(panels));
  if (ctx.pdf) {
    const bytes = await renderLotPdf({
      panels,
      lot: { lot: ctx.lot.id, date: date.slice(0, 10), station: ctx.lot.station, operator: ctx.lot.operator },
      criteria: ctx.criteriaSummary,
      toolVersion: ctx.toolVersion,
      generated: date,
      unassigned: opts.grouping.unassigned,
    });
    await writeFileAtomic(join(outDir, SUMMARY_PDF), bytes);
  }
  // Once more at the end: a run killed just before this one started may have been still alive then (a
  // launcher killed with kill -9 takes its command's process with it within a fraction of a second, see
  // lib/cli/relaunch.ts) and have left a temporary file since.
  removeStaleTemporaries(outDir);
  removeStaleTemporaries(join(outDir, WORK_DIR));
  // a photo that could not be measured is unusable input even when its panel failed on another photo
  const anyError =
    panels.some((p) => p.verdict === 'error' || p.photos.some((ph) => ph.status === 'error')) || opts.grouping.unassigned.length > 0;
  const anyFail = panels.some((p) => p.verdict === 'fail');
  const exitStatus = anyError ? 2 : anyFail ? 1 : 0;
  return { doc, exitStatus, outcomes, ms: performance.now() - t0, skipped };
}

/** Files in the output folder that belong to this tool (for tests and --force). */
export function listOutputs(outDir: string): string[] {
  if (!existsSync(outDir)) return [];
  return readdirSync(outDir).sort();
}

export function defaultJobs(): number {
  return availableParallelism();
}
