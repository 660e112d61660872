// Criteria files: schema problems point at file, line and key; the shipped default loads and states
// its sources; hashing and printing of the effective criteria.

import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { parse as parseYaml } from 'yaml';
import {
  CriteriaError,
  DEFAULT_GRID,
  DEFAULT_MURA,
  DEFAULT_UNCERTAINTY,
  criteriaHash,
  criteriaSummary,
  criteriaSummaryLines,
  defaultCriteriaPath,
  effectiveCriteriaYaml,
  loadCriteria,
  parseCriteria,
} from '../../lib/judge/index.js';
import { isEvenfieldError } from '../../lib/errors.js';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..', '..');
const tmp = mkdtempSync(join(tmpdir(), 'evenfield-judge-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

/** The problems a text gives, as "file:line: key: problem" lines. */
function problems(text: string, file = 'crit.yaml'): string[] {
  try {
    parseCriteria(text, file);
  } catch (e) {
    expect(e).toBeInstanceOf(CriteriaError);
    expect((e as CriteriaError).code).toBe('criteria');
    return (e as CriteriaError).message.split('\n');
  }
  throw new Error('expected the criteria to be rejected');
}

const MINIMAL = 'name: t\npatterns:\n  white:\n    minOverMaxPctMin: 75\n';

describe('criteria problems name file, line and key', () => {
  it('unknown key: its own line, with the nearest allowed key suggested', () => {
    const text = [
      'name: t', //                   1
      'grid:', //                     2
      '  layout: 9', //               3
      '  spotRadius: 2', //           4  misspelt
      'patterns:', //                 5
      '  white:', //                  6
      '    minOverMaxPctMin: 75', //  7
      '    colour: red', //           8  not a key at all
    ].join('\n');
    expect(problems(text)).toEqual([
      'crit.yaml:4: grid.spotRadius: unknown key (did you mean spotRadiusPct? allowed here: layout, placement, insetPct, spotRadiusPct)',
      expect.stringMatching(/^crit\.yaml:8: patterns\.white\.colour: unknown key \(allowed here: required, minOverMaxPctMin, .*reportOnly\)$/),
    ]);
  });

  it('glow limits belong to black only', () => {
    const text = 'name: t\npatterns:\n  white:\n    glow:\n      maxContrastPct: 50\n';
    expect(problems(text)[0]).toMatch(/^crit\.yaml:4: patterns\.white\.glow: unknown key/);
  });

  it('wrong type: says what was expected and what was found', () => {
    const text = ['name: t', 'grid:', '  layout: "9"', 'patterns:', '  white:', '    maxOverMinMax: "1.3"', '    required: yes please'].join('\n');
    expect(problems(text)).toEqual([
      'crit.yaml:3: grid.layout: "9" is not a layout; use 5, 9, 13 or 25 points',
      'crit.yaml:6: patterns.white.maxOverMinMax: expected a number, got string "1.3"',
      'crit.yaml:7: patterns.white.required: expected true or false, got string "yes please"',
    ]);
  });

  it('an empty value and a missing required key', () => {
    expect(problems('name: t\npatterns:\n  white:\n    maxSemu:\n')).toEqual([
      'crit.yaml:4: patterns.white.maxSemu: has no value; expected a number',
    ]);
    // a missing key points at the mapping that lacks it (here the whole file, line 1)
    expect(problems('patterns:\n  white:\n    maxSemu: 1\n')).toEqual(['crit.yaml:1: name: required key is missing']);
  });

  it('impossible limits: percent outside 0..100, max/min below 1, negative SEMU, min above max', () => {
    const text = [
      'name: t', //                                       1
      'patterns:', //                                     2
      '  white:', //                                      3
      '    minOverMaxPctMin: 120', //                     4
      '    maxOverMinMax: 0.8', //                        5
      '    maxSemu: -1', //                               6
      '    luminanceCdM2: { min: 300, max: 200 }', //     7
      '  black:', //                                      8
      '    glow:', //                                     9
      '      maxContrastPct: -5', //                      10
    ].join('\n');
    expect(problems(text)).toEqual([
      'crit.yaml:4: patterns.white.minOverMaxPctMin: min/max uniformity is a percentage and cannot exceed 100 % (got 120)',
      'crit.yaml:5: patterns.white.maxOverMinMax: a max/min ratio cannot be below 1 (the largest point is never below the smallest) (got 0.8)',
      'crit.yaml:6: patterns.white.maxSemu: a SEMU limit cannot be negative (got -1)',
      'crit.yaml:7: patterns.white.luminanceCdM2.max: impossible window: maximum 200 cd/m² is below minimum 300 cd/m²',
      'crit.yaml:10: patterns.black.glow.maxContrastPct: a glow contrast limit cannot be negative (got -5)',
    ]);
  });

  it('impossible settings: grid inset, spot radius, blob counts, tile grid', () => {
    const text = [
      'name: t',
      'grid:',
      '  insetPct: 60',
      '  spotRadiusPct: 0',
      'mura:',
      '  tileGrid: [0, 3]',
      'patterns:',
      '  white:',
      '    blobs:',
      '      maxCount: { spot: 1.5 }',
    ].join('\n');
    expect(problems(text)).toEqual([
      'crit.yaml:3: grid.insetPct: the inset must be below 50 % of the panel (the points would cross the centre) (got 60)',
      'crit.yaml:4: grid.spotRadiusPct: the measurement spot radius must be greater than 0 (got 0)',
      'crit.yaml:6: mura.tileGrid[0]: a tiled wall has at least 1 column (got 0)',
      'crit.yaml:10: patterns.white.blobs.maxCount.spot: the spot blob count limit is a count and must be a whole number',
    ]);
  });

  it('reportOnly may only name a limit the section sets', () => {
    const text = 'name: t\npatterns:\n  white:\n    maxSemu: 1\n    reportOnly:\n      - maxSemu\n      - maxDuvAnyPairMax\n';
    expect(problems(text)).toEqual([
      'crit.yaml:7: patterns.white.reportOnly[1]: names maxDuvAnyPairMax, which this pattern does not set',
    ]);
  });

  it('YAML syntax errors and duplicate keys give the line', () => {
    const bad = 'name: t\npatterns:\n  white:\n    maxSemu: [1, 2\n    required: true\n';
    const p = problems(bad);
    expect(p.length).toBeGreaterThan(0);
    expect(p[0]).toMatch(/^crit\.yaml:5: patterns\.white(\.maxSemu)?: YAML syntax error: /);

    const dup = 'name: t\npatterns:\n  white:\n    maxSemu: 1\n    maxSemu: 2\n';
    expect(problems(dup)).toEqual([expect.stringMatching(/^crit\.yaml:5: patterns\.white(\.maxSemu)?: YAML syntax error: Map keys must be unique/)]);
  });

  it('an empty file and a file that is not a mapping', () => {
    expect(problems('# only a comment\n')).toEqual(['crit.yaml:1: the criteria file is empty']);
    expect(problems('- a\n- b\n')).toEqual(['crit.yaml:1: expected a mapping, got a list']);
  });

  it('loadCriteria reports the real path; a missing file is not-found', () => {
    const file = join(tmp, 'bad.yaml');
    writeFileSync(file, 'name: t\npatterns:\n  white:\n    maxOverMinMax: 0.5\n');
    expect(() => loadCriteria(file)).toThrow(`${file}:4: patterns.white.maxOverMinMax: a max/min ratio cannot be below 1`);
    try {
      loadCriteria(join(tmp, 'nope.yaml'));
      expect.unreachable();
    } catch (e) {
      expect(isEvenfieldError(e) && e.code).toBe('not-found');
    }
  });
});

describe('the shipped default criteria', () => {
  const loaded = loadCriteria(null);
  const c = loaded.criteria;

  it('loads from lib/judge, and the compiled module finds the same file from dist/lib/judge', () => {
    expect(loaded.source).toContain('default-criteria.yaml');
    expect(defaultCriteriaPath()).toBe(join(root, 'lib', 'judge', 'default-criteria.yaml'));
    expect(defaultCriteriaPath(join(root, 'dist', 'lib', 'judge'))).toBe(join(root, 'lib', 'judge', 'default-criteria.yaml'));
    expect(loaded.text).toBe(readFileSync(join(root, 'lib', 'judge', 'default-criteria.yaml'), 'utf8'));
  });

  it('holds the limits its comments cite', () => {
    const w = c.patterns.white!;
    expect(w.required).toBe(true);
    // Lmin/Lmax >= 75 % and Lmax/Lmin <= 1.33 at 9 points [22-inch monitor service manual §8.9-8.11]
    expect(c.grid.layout).toBe(9);
    expect(w.minOverMaxPctMin).toBe(75);
    expect(w.maxOverMinMax).toBe(1.33);
    // Δu'v' radius 0.01 from the centre [ISO 12646:2013]
    expect(w.maxDuvFromCentreMax).toBe(0.01);
    // 1 SEMU = just noticeable [SEMI D31-1102]
    expect(w.maxSemu).toBe(1);
    // 3 JND = "distinct" [Yoshitake 2002]
    expect(c.patterns.black!.maxSemu).toBe(3);
  });

  it('every value line states where it comes from', () => {
    const lines = loaded.text.split('\n');
    const valueLines = lines.filter((l) => /^\s+[A-Za-z-]+:\s*[^\s#]/.test(l) && !/^\s*#/.test(l));
    expect(valueLines.length).toBeGreaterThan(20);
    const exempt = /^\s+(required: false|reportOnly: )/; // a choice, not a figure
    for (const l of valueLines) {
      if (exempt.test(l)) continue;
      expect(l, l).toMatch(/#.*\[(?:[^\]]*\d{4}|[^\]]*(?:ISO|SEMI|FPDM|IDMS|TCO|manual|datasheet|common practice|from memory|computed|same manual|Yoshitake))[^\]]*\]/);
    }
  });

  it('the schema defaults are the values the default file writes out', () => {
    const raw = parseYaml(loaded.text) as Record<string, Record<string, unknown>>;
    expect(raw.grid).toEqual(DEFAULT_GRID);
    expect(raw.uncertainty).toEqual(DEFAULT_UNCERTAINTY);
    expect(raw.mura).toEqual(DEFAULT_MURA);
  });

  it('summary lines carry the source each value\'s comment gives', () => {
    const sum = criteriaSummary(loaded);
    expect(sum.name).toBe(c.name);
    expect(sum.hash).toBe(loaded.hash);
    const src = (text: string) => sum.lines.find((l) => l.text === text)?.source;
    expect(src('white (required): uniformity (Lmin/Lmax) at least 75 %')).toBe('a 22-inch monitor service manual, §8.9-8.11');
    expect(src("white (required): Δu'v' from the centre at most 0.01")).toBe("ISO 12646:2013; TCO'03 also uses 0.01");
    expect(src('white (required): largest mura at most 1 SEMU')).toBe('SEMI D31-1102: 1 SEMU = one just-noticeable difference');
    expect(sum.lines.every((l) => l.text.length > 0)).toBe(true);
    // a file without comments states no sources
    const bare = criteriaSummary({ criteria: parseCriteria(MINIMAL, 'x'), text: MINIMAL, hash: 'h', source: 'x' });
    expect(bare.lines.find((l) => l.text.startsWith('white'))).toEqual({ text: 'white: uniformity (Lmin/Lmax) at least 75 %', source: null });
  });

  it('summary lines cover every limit', () => {
    const lines = criteriaSummaryLines(c);
    expect(lines).toContain('white (required): uniformity (Lmin/Lmax) at least 75 %');
    expect(lines).toContain("white (required): Δu'v' between any two points at most 0.01 (report only)");
    expect(lines).toContain('black: border glow contrast at most 100 %');
  });
});

describe('hash and effective criteria', () => {
  it('the hash ignores comments, key order and spelt-out defaults, and follows every limit', () => {
    const a = parseCriteria(MINIMAL, 'a');
    const b = parseCriteria('# comment\npatterns:\n  white: { minOverMaxPctMin: 75 }\ngrid: { layout: 9, placement: cells }\nname: t\n', 'b');
    expect(criteriaHash(a)).toBe(criteriaHash(b));
    expect(criteriaHash(a)).toMatch(/^[0-9a-f]{64}$/);
    const c = parseCriteria(MINIMAL.replace('75', '76'), 'c');
    expect(criteriaHash(c)).not.toBe(criteriaHash(a));
  });

  it('loadCriteria hashes the effective criteria', () => {
    const file = join(tmp, 'ok.yaml');
    writeFileSync(file, MINIMAL);
    const l = loadCriteria(file);
    expect(l.source).toBe(file);
    expect(l.text).toBe(MINIMAL);
    expect(l.hash).toBe(criteriaHash(parseCriteria(MINIMAL, 'x')));
  });

  it('the printed effective criteria load back to the same criteria, keeping the sources', () => {
    const l = loadCriteria(null);
    const printed = effectiveCriteriaYaml(l.criteria, { source: l.source, text: l.text });
    expect(parseCriteria(printed, 'printed')).toEqual(l.criteria);
    expect(printed).toContain(`sha256 of the canonical JSON: ${l.hash}`);
    expect(printed).toContain('[SEMI D31-1102: 1 SEMU = one just-noticeable difference]');
    // without the original text every key still gets a line of help
    const bare = effectiveCriteriaYaml(parseCriteria(MINIMAL, 'x'));
    expect(parseCriteria(bare, 'bare')).toEqual(parseCriteria(MINIMAL, 'x'));
    expect(bare).toMatch(/spotRadiusPct: 2 # radius of each measurement spot, % of the panel diagonal/);
    expect(bare).toMatch(/insetPct: 10/);
  });
});
