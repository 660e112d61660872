// The bad-input corpus (fixtures/bad/, made by scripts/make-bad-corpus.ts) through the command as a
// user runs it: every bad file named on its own line with its reason and code, the documented exit
// status, the good photos judged exactly as when they are inspected alone, odd-but-valid files
// measured, and nothing written where it should not be.
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parse } from 'csv-parse/sync';
import { beforeAll, describe, expect, it } from 'vitest';
import { groupByManifest } from '../../lib/batch/grouping.js';
import { loadCriteria } from '../../lib/judge/index.js';
import { isEvenfieldError } from '../../lib/errors.js';
import type { PanelResult, PhotoResult } from '../../lib/types.js';

const ROOT = join(__dirname, '..', '..');
const BIN = join(ROOT, 'bin', 'evenfield.js');
const BAD = 'fixtures/bad';
const PHOTOS = `${BAD}/photos`;

interface Expected {
  bad: { file: string; kind: 'photo' | 'grouping' | 'manifest' | 'criteria'; what: string; errorCode: string | null; message: string }[];
  good: string[];
  valid: { file: string; what: string; csvPanelCell?: string; warning?: string; strictViewAngle?: number }[];
}
const expected = JSON.parse(readFileSync(join(ROOT, BAD, 'expected.json'), 'utf8')) as Expected;

interface Run {
  status: number | null;
  stderr: string;
  out: string;
}

function run(args: string[], out: string): Promise<Run> {
  return new Promise((resolve) => {
    const p = spawn(process.execPath, [BIN, ...args, '--out', out], { cwd: ROOT });
    let stderr = '';
    p.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    p.stdout.resume();
    p.on('close', (status) => resolve({ status, stderr, out }));
  });
}

// the same settings for every measuring run: no mura (slow, and not what is tested here), so criteria
// with grid limits only; a fixed date and panel size so two runs can be compared byte for byte
const COMMON = ['--no-mura', '--criteria', `${BAD}/grid-only.yaml`, '--panel-size', '597.9x336.3', '--quiet', '--date', '2025-03-01T12:00:00Z'];

const results = (r: Run) => JSON.parse(readFileSync(join(r.out, 'results.json'), 'utf8')) as { panels: PanelResult[]; unassigned: { file: string; reason: string }[] };
const photosOf = (r: Run) => new Map(results(r).panels.flatMap((p) => p.photos.map((ph) => [ph.file, ph] as [string, PhotoResult])));
const errorLines = (r: Run) => r.stderr.split('\n').filter((l) => l.startsWith('error: '));

function hashes(dir: string): Record<string, string> {
  const out: Record<string, string> = {};
  const walk = (d: string) => {
    for (const n of readdirSync(d).sort()) {
      const p = join(d, n);
      if (statSync(p).isDirectory()) walk(p);
      else out[p.slice(dir.length)] = createHash('sha256').update(readFileSync(p)).digest('hex');
    }
  };
  walk(dir);
  return out;
}

let tmp: string;
let all: Run;
let alone: Run;
let strict: Run;
let pdfs: Run;
let whole: Run;

beforeAll(async () => {
  tmp = mkdtempSync(join(tmpdir(), 'ef-robust-'));
  const strictFiles = expected.valid.filter((v) => v.strictViewAngle !== undefined);
  [all, alone, strict, pdfs, whole] = await Promise.all([
    run(['inspect', PHOTOS, ...COMMON, '--no-pdf', '--jobs', '2'], join(tmp, 'all')),
    run(['inspect', ...expected.good.map((f) => `${BAD}/${f}`), ...COMMON, '--no-pdf', '--jobs', '1'], join(tmp, 'alone')),
    run(['inspect', ...strictFiles.map((v) => `${BAD}/${v.file}`), ...COMMON, '--no-pdf', '--jobs', '1', '--max-view-angle', String(strictFiles[0].strictViewAngle)], join(tmp, 'strict')),
    run(['inspect', `${PHOTOS}/lot-summary_white.jpg`, `${PHOTOS}/GOOD03_white.jpg`, ...COMMON, '--jobs', '1'], join(tmp, 'pdfs')),
    run(['inspect', `${PHOTOS}/GOOD03_white.jpg`, `${PHOTOS}/ODD16_white.png`, ...COMMON, '--no-pdf', '--jobs', '1', '--jpeg-samples', '8bit'], join(tmp, 'whole')),
  ]);
}, 300_000);

describe('the corpus', () => {
  it('holds at least 30 bad inputs, each with a code or message, and 10 good photos', () => {
    expect(expected.bad.length).toBeGreaterThanOrEqual(30);
    expect(expected.good).toHaveLength(10);
    for (const b of expected.bad) {
      expect(existsSync(join(ROOT, BAD, b.file)), b.file).toBe(true);
      expect(b.message.length).toBeGreaterThan(0);
    }
  });
});

describe('a batch of bad photos with good ones', () => {
  it('exits with status 2 (unusable input), as documented', () => {
    expect(all.status).toBe(2);
  });

  it('names every bad photo on its own line with its reason, and records its code', () => {
    const lines = errorLines(all);
    const photos = photosOf(all);
    for (const b of expected.bad.filter((x) => x.kind === 'photo')) {
      const path = `${BAD}/${b.file}`;
      const line = lines.find((l) => l.startsWith(`error: ${path}: `));
      expect(line, `no error line for ${path}`).toBeDefined();
      expect(line, path).toContain(b.message);
      const ph = photos.get(path);
      expect(ph?.status, path).toBe('error');
      expect(ph?.errorCode, path).toBe(b.errorCode);
    }
  });

  it('names every file refused before measurement: bad names and a pattern shot twice', () => {
    const lines = errorLines(all);
    const doc = results(all);
    for (const b of expected.bad.filter((x) => x.kind === 'grouping')) {
      const path = `${BAD}/${b.file}`;
      const line = lines.find((l) => l.includes(path) && l.includes(b.message));
      expect(line, `no error line for ${path}`).toBeDefined();
    }
    expect(doc.unassigned.map((u) => u.file).sort()).toEqual(
      expected.bad.filter((b) => b.kind === 'grouping' && b.message === 'does not follow').map((b) => `${BAD}/${b.file}`).sort(),
    );
    expect(doc.panels.find((p) => p.panel === 'DUP')?.verdict).toBe('error');
  });

  it('prints no error line that is not about a corpus file', () => {
    const named = [...expected.bad.filter((b) => b.kind === 'photo' || b.kind === 'grouping').map((b) => `${BAD}/${b.file}`)];
    for (const l of errorLines(all)) expect(named.some((f) => l.includes(f)), l).toBe(true);
  });

  it('measures and judges the 10 good photos exactly as when they are inspected alone', () => {
    expect([0, 1]).toContain(alone.status);
    const judged = results(alone).panels;
    // 1 exactly when a panel failed (documented exit statuses)
    expect(alone.status).toBe(judged.some((p) => p.verdict === 'fail') ? 1 : 0);
    expect(judged.flatMap((p) => p.photos.map((ph) => ph.file)).sort()).toEqual(expected.good.map((f) => `${BAD}/${f}`).sort());
    const inBatch = new Map(results(all).panels.map((p) => [p.panel, p]));
    for (const p of judged) {
      expect(p.verdict).not.toBe('error');
      expect(inBatch.get(p.panel), p.panel).toEqual(p);
    }
  });
});

describe('odd but valid files', () => {
  it('are measured, with the warnings they call for', () => {
    const photos = photosOf(all);
    for (const v of expected.valid) {
      const ph = photos.get(`${BAD}/${v.file}`);
      expect(ph?.status, v.file).toBe('ok');
      if (v.warning) expect(ph!.warnings.join(' '), v.file).toContain(v.warning);
    }
  });

  it('a 16-bit PNG of the same code values measures exactly as the 8-bit JPEG decoded to whole codes', () => {
    const photos = photosOf(whole);
    const a = photos.get(`${PHOTOS}/GOOD03_white.jpg`)!;
    const b = photos.get(`${PHOTOS}/ODD16_white.png`)!;
    expect(a.decode?.jpegSamples).toBe('8bit');
    expect(b.decode?.bitDepth).toBe(16);
    expect(b.grid).toEqual(a.grid);
    expect(b.uniformity).toEqual(a.uniformity);
    // decoded in float (the default), the JPEG differs from its whole codes by a fraction of a code:
    // on this white field a code value is about 0.9 % of linear light, so each point within 0.5 %
    const f = photosOf(all).get(`${PHOTOS}/GOOD03_white.jpg`)!;
    expect(f.decode?.jpegSamples).toBe('float');
    f.grid!.points.forEach((p, i) => expect(Math.abs(p.relative / a.grid!.points[i]!.relative - 1), `point ${i}`).toBeLessThan(0.005));
  });

  it('a CMYK JPEG is converted and measured close to its RGB original', () => {
    const photos = photosOf(all);
    const a = photos.get(`${PHOTOS}/GOOD03_white.jpg`)!;
    const c = photos.get(`${PHOTOS}/ODDCMYK_white.jpg`)!;
    // through a generic CMYK profile and back the tone curve moves a little: within 1 percentage point
    expect(Math.abs(c.uniformity!.minOverMaxPct - a.uniformity!.minOverMaxPct)).toBeLessThan(1);
  });

  it('a stricter viewing-angle limit refuses the oblique ones', () => {
    expect(strict.status).toBe(2);
    const photos = photosOf(strict);
    for (const v of expected.valid.filter((x) => x.strictViewAngle !== undefined)) {
      const ph = photos.get(`${BAD}/${v.file}`)!;
      expect(ph.errorCode, v.file).toBe('too-oblique');
      expect(ph.error).toContain(`(limit ${v.strictViewAngle}°)`);
    }
  });

  it('formula-looking panel ids are escaped in results.csv, and no text cell there starts like a formula', () => {
    const rows = parse(readFileSync(join(all.out, 'results.csv'), 'utf8')) as string[][];
    const firstCells = rows.map((r) => r[0]);
    for (const v of expected.valid.filter((x) => x.csvPanelCell)) expect(firstCells).toContain(v.csvPanelCell);
    // spreadsheet formula injection: = + - @ tab or CR first (common practice); plain numbers may be negative
    for (const cell of rows.flat()) if (!/^-?\d+(\.\d+)?(e-?\d+)?$/.test(cell)) expect(cell, cell).not.toMatch(/^[=+\-@\t\r]/);
  });

  it("a panel named like the lot summary keeps its own report and does not replace the summary's", () => {
    expect(pdfs.status).not.toBe(2);
    const names = readdirSync(pdfs.out);
    expect(names).toContain('lot-summary.pdf');
    expect(names).toContain('lot-summary.panel.pdf');
    expect(names).toContain('GOOD03.pdf');
    const summary = readFileSync(join(pdfs.out, 'lot-summary.pdf'));
    const panel = readFileSync(join(pdfs.out, 'lot-summary.panel.pdf'));
    expect(summary.subarray(0, 5).toString()).toBe('%PDF-');
    expect(panel.subarray(0, 5).toString()).toBe('%PDF-');
    expect(summary.equals(panel)).toBe(false);
  });
});

describe('manifests and criteria files', () => {
  it('each bad manifest is refused with its line and reason, before anything is measured', () => {
    for (const b of expected.bad.filter((x) => x.kind === 'manifest')) {
      let thrown: unknown = null;
      try {
        groupByManifest(join(BAD, b.file));
      } catch (e) {
        thrown = e;
      }
      expect(isEvenfieldError(thrown), b.file).toBe(true);
      const e = thrown as { code: string; message: string; file: string };
      expect(e.code, b.file).toBe(b.errorCode);
      expect(e.message, b.file).toContain(b.message);
      expect(e.file, b.file).toBe(join(BAD, b.file));
    }
  });

  it('each bad criteria file is refused with file:line and the key', () => {
    for (const b of expected.bad.filter((x) => x.kind === 'criteria')) {
      let thrown: unknown = null;
      try {
        loadCriteria(join(BAD, b.file));
      } catch (e) {
        thrown = e;
      }
      expect(isEvenfieldError(thrown), b.file).toBe(true);
      const e = thrown as { code: string; message: string };
      expect(e.code, b.file).toBe(b.errorCode);
      expect(e.message, b.file).toContain(b.message);
      expect(e.message, b.file).toMatch(new RegExp(`${b.file.split('/').pop()!.replace('.', '\\.')}:\\d+`));
    }
  });

  it('the command refuses them with one line and status 2, and writes nothing', async () => {
    const [m, c] = await Promise.all([
      run(['inspect', '--manifest', `${PHOTOS}/manifest-climb.csv`, ...COMMON], join(tmp, 'manifest')),
      run(['inspect', `${PHOTOS}/GOOD01_white.jpg`, ...COMMON.filter((a) => !a.endsWith('grid-only.yaml') && a !== '--criteria'), '--criteria', `${BAD}/criteria/wrong-type.yaml`], join(tmp, 'criteria')),
    ]);
    expect(m.status).toBe(2);
    expect(m.stderr.trim().split('\n')).toEqual([`evenfield: ${PHOTOS}/manifest-climb.csv: line 2: file "../criteria/wrong-type.yaml" lies outside the manifest's folder`]);
    expect(existsSync(m.out)).toBe(false);
    expect(c.status).toBe(2);
    expect(c.stderr.trim()).toMatch(/^evenfield: fixtures\/bad\/criteria\/wrong-type\.yaml:4: patterns\.white\.minOverMaxPctMin: /);
    expect(existsSync(c.out)).toBe(false);
  });
});

describe('output folders', () => {
  it('never overwrites a previous run without --force, and leaves it byte for byte as it was', async () => {
    const first = await run(['inspect', `${PHOTOS}/GOOD05_white.jpg`, ...COMMON, '--no-pdf'], join(tmp, 'prev'));
    expect(first.status).not.toBe(2);
    const before = hashes(first.out);
    const again = await run(['inspect', `${PHOTOS}/GOOD06_white.jpg`, ...COMMON, '--no-pdf'], first.out);
    expect(again.status).toBe(2);
    expect(again.stderr.trim()).toMatch(/holds a previous run: add --resume to finish it or --force to replace it$/);
    expect(hashes(first.out)).toEqual(before);
  });

  it('refuses an output path that is a file, leaving the file alone', async () => {
    const file = join(tmp, 'not-a-folder.txt');
    writeFileSync(file, 'keep me\n');
    const r = await run(['inspect', `${PHOTOS}/GOOD05_white.jpg`, ...COMMON, '--no-pdf'], file);
    expect(r.status).toBe(2);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toMatch(/^evenfield: /);
    expect(readFileSync(file, 'utf8')).toBe('keep me\n');
  });

  it('leaves no half-written or temporary files behind', () => {
    for (const r of [all, alone, strict, pdfs]) {
      const names = Object.keys(hashes(r.out));
      expect(names.filter((n) => /\.tmp$/.test(n)), r.out).toEqual([]);
      expect(names).toContain('/results.json');
      expect(names).toContain('/results.csv');
    }
  });
});
