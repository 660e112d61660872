// Criteria files as the user meets them on the command line: every problem on its own line naming the
// file, the line and the key; exit status 2 (README, "Exit status"); nothing measured or written; and
// the effective criteria printed by `evenfield criteria` load back unchanged.
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parse as parseYaml } from 'yaml';
import { beforeAll, describe, expect, it } from 'vitest';
import { loadCriteria } from '../../lib/judge/index.js';

const BIN = join(__dirname, '..', '..', 'bin', 'evenfield.js');

function run(args: string[]) {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8' });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

/** 1-based line of the first line of `text` that contains `needle`. */
function lineOf(text: string, needle: string): number {
  const i = text.split('\n').findIndex((l) => l.includes(needle));
  if (i < 0) throw new Error(`"${needle}" not in the text`);
  return i + 1;
}

let dir: string;
let photo: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ef-crit-'));
  // criteria are read before any photo: this file is never opened when they are bad
  photo = join(dir, 'P1_white.jpg');
  writeFileSync(photo, 'criteria are checked first\n');
});

const BAD = `name: incoming inspection, bad copy
grid:
  layout: 9
patterns:
  white:
    required: true
    minOverMaxPctMin: 120
    maxOverMinMax: 0.8
    maxSemu: "one"
    maxSemuu: 1
    luminanceCdM2: { min: 300, max: 250 }
  black:
    glow:
      maxContrastPct: -5
`;

/** [needle on the line, dotted key, words of the problem] in file order */
const EXPECTED: [string, string, RegExp][] = [
  ['minOverMaxPctMin', 'patterns.white.minOverMaxPctMin', /is a percentage and cannot exceed 100 %/],
  ['maxOverMinMax', 'patterns.white.maxOverMinMax', /cannot be below 1/],
  ['maxSemu: "one"', 'patterns.white.maxSemu', /expected a number, got string "one"/],
  ['maxSemuu', 'patterns.white.maxSemuu', /unknown key \(did you mean maxSemu\?/],
  ['luminanceCdM2', 'patterns.white.luminanceCdM2.max', /impossible window: maximum 250 cd\/m² is below minimum 300 cd\/m²/],
  ['maxContrastPct', 'patterns.black.glow.maxContrastPct', /cannot be negative/],
];

function checkLines(stderr: string, file: string, text: string, expected: [string, string, RegExp][]): void {
  const lines = stderr.trim().split('\n');
  expect(lines, stderr).toHaveLength(expected.length);
  expected.forEach(([needle, key, words], i) => {
    const prefix = `evenfield: ${file}:${lineOf(text, needle)}: ${key}: `;
    expect(lines[i].startsWith(prefix), `line ${i + 1}: ${lines[i]}\nexpected to start with: ${prefix}`).toBe(true);
    expect(lines[i]).toMatch(words);
  });
}

describe('criteria problems on the command line', () => {
  it('evenfield criteria: one line per problem, naming file, line and key; exit status 2; nothing printed', () => {
    const file = join(dir, 'bad.yaml');
    writeFileSync(file, BAD);
    const r = run(['criteria', '--criteria', file]);
    expect(r.status).toBe(2);
    expect(r.stdout).toBe('');
    checkLines(r.stderr, file, BAD, EXPECTED);
  });

  it('evenfield inspect: the same lines, exit status 2, no photo read and no output folder made', () => {
    const file = join(dir, 'bad.yaml');
    writeFileSync(file, BAD);
    const out = join(dir, 'out-bad');
    const r = run(['inspect', photo, '--out', out, '--criteria', file, '--no-pdf']);
    expect(r.status).toBe(2);
    checkLines(r.stderr, file, BAD, EXPECTED);
    expect(existsSync(out)).toBe(false);
  });

  it('each kind of problem alone: unknown key, wrong type, impossible limit, YAML syntax', () => {
    const cases: { text: string; expected: [string, string, RegExp][] }[] = [
      {
        text: 'name: x\npatterns:\n  gray:\n    minOverMaxPctMin: 70\n    maxDuvFromCenterMax: 0.01\n',
        expected: [['maxDuvFromCenterMax', 'patterns.gray.maxDuvFromCenterMax', /unknown key \(did you mean maxDuvFromCentreMax\?/]],
      },
      {
        text: 'name: x\ngrid:\n  layout: 9\n  spotRadiusPct: [2]\npatterns:\n  white: {}\n',
        expected: [['spotRadiusPct', 'grid.spotRadiusPct', /expected a number, got a list/]],
      },
      {
        text: 'name: x\nuncertainty:\n  semu: -0.2\npatterns:\n  white:\n    maxSemu: 1\n',
        expected: [['semu: -0.2', 'uncertainty.semu', /cannot be negative/]],
      },
      {
        text: 'name: x\ngrid:\n  layout: 7\npatterns:\n  white: {}\n',
        expected: [['layout: 7', 'grid.layout', /7 is not a layout; use 5, 9, 13 or 25 points/]],
      },
    ];
    cases.forEach(({ text, expected }, k) => {
      const file = join(dir, `one-${k}.yaml`);
      writeFileSync(file, text);
      // both commands read criteria the same way (shown with the combined file above): the first case goes
      // through inspect too, the rest through criteria only, to keep the test short
      const commands = [['criteria', '--criteria', file], ...(k === 0 ? [['inspect', photo, '--out', join(dir, `out-${k}`), '--criteria', file]] : [])];
      for (const args of commands) {
        const r = run(args);
        expect(r.status, `${args[0]} ${text}`).toBe(2);
        checkLines(r.stderr, file, text, expected);
      }
    });
    // a YAML syntax error names the file and the line (the key where one can be told)
    const broken = join(dir, 'broken.yaml');
    const text = 'name: x\npatterns:\n  white:\n    maxSemu: 1\n   minOverMaxPctMin: 75\n';
    writeFileSync(broken, text);
    const r = run(['criteria', '--criteria', broken]);
    expect(r.status).toBe(2);
    const lines = r.stderr.trim().split('\n');
    expect(lines.length).toBeGreaterThanOrEqual(1);
    for (const l of lines) expect(l).toMatch(new RegExp(`^evenfield: ${broken.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}:[45]: .*YAML syntax error: `));
  });

  it('a missing criteria file is one line naming it', () => {
    const file = join(dir, 'nope.yaml');
    const r = run(['criteria', '--criteria', file]);
    expect(r.status).toBe(2);
    expect(r.stderr.trim().split('\n')).toEqual([`evenfield: ${file}: criteria file not found`]);
  });
});

describe('evenfield criteria prints YAML that loads back', () => {
  it('the built-in criteria: printed, read back by the command and by lib/judge, same criteria and hash', () => {
    const r = run(['criteria']);
    expect(r.status).toBe(0);
    const hash = /^# sha256 ([0-9a-f]{64}) /.exec(r.stderr)?.[1];
    expect(hash).toMatch(/^[0-9a-f]{64}$/);
    const file = join(dir, 'printed.yaml');
    writeFileSync(file, r.stdout);
    // plain YAML (any reader), and the same effective criteria for evenfield
    expect(() => parseYaml(r.stdout)).not.toThrow();
    const back = loadCriteria(file);
    const builtIn = loadCriteria(null);
    expect(back.criteria).toEqual(builtIn.criteria);
    expect(back.hash).toBe(hash);
    const again = run(['criteria', '--criteria', file]);
    expect(again.status).toBe(0);
    expect(again.stderr).toContain(`# sha256 ${hash} (${file})`);
  });

  it('a criteria file of the user: every value survives the round trip', () => {
    const text = `name: buyer spec 7
panel: { widthMm: 527.04, heightMm: 296.46 }
grid: { layout: 25, placement: inset, insetPct: 8 }
uncertainty: { semu: 0.3 }
patterns:
  white:
    required: true
    minOverMaxPctMin: 80
    maxDuvFromCentreMax: 0.008
    luminanceCdM2: { min: 250, max: 400, at: every-point }
    blobs: { countFromSemu: 0.5, maxCount: { any: 2, line: 0 } }
  black:
    glow: { maxContrastPct: 80, maxAreaMm2: 400 }
    reportOnly: [glow.maxAreaMm2]
`;
    const src = join(dir, 'buyer.yaml');
    writeFileSync(src, text);
    const r = run(['criteria', '--criteria', src]);
    expect(r.status).toBe(0);
    const printed = join(dir, 'buyer-printed.yaml');
    writeFileSync(printed, r.stdout);
    const a = loadCriteria(src);
    const b = loadCriteria(printed);
    expect(b.criteria).toEqual(a.criteria);
    expect(b.hash).toBe(a.hash);
    expect(b.criteria.grid).toEqual({ layout: 25, placement: 'inset', insetPct: 8, spotRadiusPct: 2 });
    expect(b.criteria.patterns.white?.luminanceCdM2).toEqual({ min: 250, max: 400, at: 'every-point' });
  });
});
