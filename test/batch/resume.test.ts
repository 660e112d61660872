// An interrupted run finished with --resume gives the same files as an uninterrupted run, and no
// half-written file is ever left behind: the command is killed (SIGKILL, nothing can clean up) at
// seeded random moments of a small lot and resumed.
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, statSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { randomScene, renderPhoto } from '../../fixtures/generator/index.js';

const BIN = join(__dirname, '..', '..', 'bin', 'evenfield.js');
const PANELS = 5;
/** writeFileAtomic's temporary names: `.<target name>.<pid>.<12 hex digits>.tmp` (lib/io/files.ts) */
const TEMP_NAME = /^\..+\.\d+\.[0-9a-f]{12}\.tmp$/;

let dir: string;
let photos: string;
let common: string[];
type Run = { out: string; stderr: string; status: number | null; ms: number };
/** uninterrupted runs with one worker and with two */
let ref: Run;
let ref2: Run;

/** Every file below a folder, as paths relative to it, sorted. */
function tree(root: string): string[] {
  const out: string[] = [];
  if (!existsSync(root)) return out;
  const walk = (d: string) => {
    for (const n of readdirSync(d)) {
      const p = join(d, n);
      if (statSync(p).isDirectory()) walk(p);
      else out.push(relative(root, p));
    }
  };
  walk(root);
  return out.sort();
}

function runSync(args: string[]) {
  const t0 = performance.now();
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8' });
  return { status: r.status, stderr: r.stderr, ms: performance.now() - t0 };
}

/** mulberry32: a small seeded generator, so a failing trial can be replayed */
function seeded(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** A file under its final name must be whole: JSON parses, a PDF ends with its end-of-file marker, CSV ends a line. */
function wholeFileProblem(path: string): string | null {
  const buf = readFileSync(path);
  if (path.endsWith('.json')) {
    try {
      JSON.parse(buf.toString('utf8'));
      return null;
    } catch {
      return 'JSON does not parse';
    }
  }
  if (path.endsWith('.pdf')) {
    const head = buf.subarray(0, 5).toString('latin1');
    const tail = buf.subarray(Math.max(0, buf.length - 16)).toString('latin1');
    return head === '%PDF-' && /%%EOF\s*$/.test(tail) ? null : 'PDF without its end-of-file marker';
  }
  if (path.endsWith('.csv')) return buf.length > 0 && buf[buf.length - 1] === 0x0a ? null : 'CSV does not end with a complete line';
  return null;
}

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ef-resume-'));
  photos = join(dir, 'photos');
  mkdirSync(photos);
  for (let i = 0; i < PANELS; i++) {
    const spec = randomScene(900 + i, { width: 640, height: 480, features: [0, 0], focal35: [50, 50], yawDeg: [-5, 5], pitchDeg: [-5, 5], fill: [0.6, 0.7], cornerLoss: [0.05, 0.4] });
    const { buffer, ext } = await renderPhoto(spec);
    writeFileSync(join(photos, `R${i + 1}_white.${ext}`), buffer);
  }
  // uniformity and colour only: mura is not measured here (--no-mura keeps each run short)
  const criteria = join(dir, 'criteria.yaml');
  writeFileSync(criteria, 'name: resume test\npatterns:\n  white:\n    required: true\n    minOverMaxPctMin: 80\n    maxDuvFromCentreMax: 0.01\n');
  common = [photos, '--criteria', criteria, '--panel-size', '597.9x336.3', '--no-mura', '--date', '2025-03-17T09:00:00Z', '--lot', 'R-1'];
  ref = { out: join(dir, 'ref'), ...runSync(['inspect', ...common, '--out', join(dir, 'ref'), '--jobs', '1']) };
  ref2 = { out: join(dir, 'ref2'), ...runSync(['inspect', ...common, '--out', join(dir, 'ref2'), '--jobs', '2']) };
});

describe('interrupted runs', () => {
  it('the uninterrupted run judges every panel and writes plain progress lines (stderr is not a terminal)', () => {
    expect([0, 1]).toContain(ref.status);
    const lines = ref.stderr.trim().split('\n');
    // one "[k/N] panel: verdict" line per panel, counting up, then the closing summary line
    const progress = lines.filter((l) => /^\[\d+\/\d+\] /.test(l));
    expect(progress.map((l) => l.match(/^\[(\d+)\/(\d+)\]/)!.slice(1).map(Number))).toEqual(Array.from({ length: PANELS }, (_, k) => [k + 1, PANELS]));
    for (const l of progress) expect(l).toMatch(new RegExp(`^\\[\\d+/${PANELS}\\] R[1-${PANELS}]: (pass|fail)$`));
    const doc = JSON.parse(readFileSync(join(ref.out, 'results.json'), 'utf8'));
    const s = doc.summary;
    expect(s.panels).toBe(PANELS);
    expect(s.passed + s.failed).toBe(PANELS);
    expect(lines[lines.length - 1]).toMatch(new RegExp(`^${PANELS} panels: ${s.passed} passed, ${s.failed} failed, 0 errors in \\d+\\.\\d s → .*ref$`));
    expect(lines).toHaveLength(PANELS + 1);
    expect(ref.status).toBe(s.failed > 0 ? 1 : 0);
  });

  it('two workers write the same files as one, byte for byte', () => {
    expect(ref2.status).toBe(ref.status);
    const files = tree(ref.out);
    expect(tree(ref2.out)).toEqual(files);
    for (const f of files) expect(readFileSync(join(ref2.out, f)).equals(readFileSync(join(ref.out, f))), f).toBe(true);
  });

  it('a temporary file of a run still alive at the start is removed at the end once that run is gone', async () => {
    // The case of a launcher killed with kill -9 just before a --resume: its command's process lives a
    // fraction of a second longer (lib/cli/relaunch.ts). Stood in for by a process that is ended once the
    // new run has started (its run.json is written after the start's clean-up).
    const out = join(dir, 'late-temp');
    mkdirSync(out);
    const other = spawn('sleep', ['600'], { stdio: 'ignore' });
    const otherEnded = new Promise((r) => other.on('exit', r));
    writeFileSync(join(out, `.results.json.${other.pid}.0123456789ab.tmp`), '{"half": ');
    // started without blocking this process, so that it can end and reap the other one meanwhile
    const run = spawn(process.execPath, [BIN, 'inspect', ...common, '--out', out, '--jobs', '1'], { stdio: ['ignore', 'ignore', 'pipe'] });
    let stderr = '';
    run.stderr!.setEncoding('utf8').on('data', (d: string) => (stderr += d));
    const status = new Promise<number | null>((res) => run.on('exit', (code) => res(code)));
    while (!existsSync(join(out, '.evenfield-work', 'run.json'))) await new Promise((r) => setTimeout(r, 20));
    // the run has started with the temporary file still belonging to a live process
    expect(readdirSync(out).filter((f) => TEMP_NAME.test(f))).toHaveLength(1);
    other.kill('SIGKILL');
    await otherEnded;
    expect(await status, stderr).toBe(ref.status);
    expect(tree(out).filter((f) => TEMP_NAME.test(f.split('/').pop()!))).toEqual([]);
    expect(tree(out)).toEqual(tree(ref.out));
  }, 120_000);

  it('killed at 5 random moments and resumed, the output equals the uninterrupted run byte for byte', async () => {
    const refFiles = tree(ref.out);
    expect(refFiles).toContain('results.json');
    expect(refFiles.filter((f) => f.endsWith('.pdf'))).toHaveLength(PANELS + 1);
    const rand = seeded(20250317);
    let interrupted = 0;
    for (let trial = 0; trial < 5; trial++) {
      const out = join(dir, `trial-${trial}`);
      // one worker and two in turn; the delays spread over the uninterrupted run's time with as many
      // workers: some kills land before any panel is done, some between panels, some while the
      // results and the lot summary are written
      const jobs = trial % 2 === 0 ? 1 : 2;
      const delay = (0.05 + (0.9 * (trial + rand())) / 5) * (jobs === 1 ? ref.ms : ref2.ms);
      const child = spawn(process.execPath, [BIN, 'inspect', ...common, '--out', out, '--jobs', String(jobs), '--quiet'], { stdio: 'ignore' });
      const exited = new Promise<NodeJS.Signals | null>((res) => child.on('exit', (_code, signal) => res(signal)));
      const timer = setTimeout(() => child.kill('SIGKILL'), delay);
      const signal = await exited;
      clearTimeout(timer);
      if (signal === 'SIGKILL') interrupted++;

      // after the kill: every file under its final name is whole; anything else is a temporary file
      const left = tree(out);
      const problems = left.filter((f) => !TEMP_NAME.test(f.split('/').pop()!)).map((f) => [f, wholeFileProblem(join(out, f))]).filter(([, p]) => p !== null);
      expect(problems, `trial ${trial} (killed after ${delay.toFixed(0)} ms)`).toEqual([]);
      const kept = left.filter((f) => /^\.evenfield-work\/R\d\.json$/.test(f)).length;
      const temps = left.filter((f) => TEMP_NAME.test(f.split('/').pop()!));
      console.log(`trial ${trial} (${jobs} worker${jobs > 1 ? 's' : ''}): ${signal === 'SIGKILL' ? `killed after ${delay.toFixed(0)} ms` : 'finished before the kill'}, ${kept} panels kept, ${left.length} files, temporary: ${temps.join(', ') || 'none'}`);

      const r = runSync(['inspect', ...common, '--out', out, '--jobs', String(jobs), '--resume']);
      expect(r.status, r.stderr).toBe(ref.status);
      if (kept > 0) expect(r.stderr).toContain(`resuming: ${kept} of ${PANELS} panels kept from the earlier run`);
      const files = tree(out);
      expect(files.filter((f) => TEMP_NAME.test(f.split('/').pop()!)), `temporary files left after resuming trial ${trial}`).toEqual([]);
      expect(files).toEqual(refFiles);
      for (const f of refFiles) {
        const same = readFileSync(join(out, f)).equals(readFileSync(join(ref.out, f)));
        expect(same, `${f} differs from the uninterrupted run (trial ${trial}, killed after ${delay.toFixed(0)} ms, ${kept} panels kept)`).toBe(true);
      }
    }
    // the delays are fractions of the reference run's time: most kills land before the end
    expect(interrupted).toBeGreaterThanOrEqual(3);
    // 10 starts of the command after the two references: about 40 s on an idle 2-core machine,
    // several minutes when it is shared
  }, 600_000);
});
