// Reading a criteria file: YAML with source positions, schema validation, and problems reported as
// "file:line: key: problem" so the user can go straight to the line.

import { createHash } from 'node:crypto';
import { existsSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Document, LineCounter, isMap, isScalar, isSeq, parseDocument, visit } from 'yaml';
import type { Node as YamlNode, Pair } from 'yaml';
import type { z } from 'zod';
import { EvenfieldError } from '../errors.js';
import { readTextFile } from '../io/files.js';
import { CriteriaSchema, allowedKeysAt, typeProblem } from './schema.js';
import type { Criteria } from './schema.js';

export interface CriteriaProblem {
  file: string;
  /** 1-based line the problem points at */
  line: number;
  /** dotted key path, e.g. patterns.white.minOverMaxPctMin; '' for the whole file */
  key: string;
  problem: string;
}

/** A criteria file that cannot be used. `message` has one "file:line: key: problem" line per problem. */
export class CriteriaError extends EvenfieldError {
  readonly problems: CriteriaProblem[];
  constructor(problems: CriteriaProblem[]) {
    super('criteria', problems.map(formatProblem).join('\n'));
    this.name = 'CriteriaError';
    this.problems = problems;
  }
}

export function formatProblem(p: CriteriaProblem): string {
  return p.key ? `${p.file}:${p.line}: ${p.key}: ${p.problem}` : `${p.file}:${p.line}: ${p.problem}`;
}

export interface LoadedCriteria {
  criteria: Criteria;
  /** the text that was read (the file as written, comments included) */
  text: string;
  /** sha256 (hex) of the canonical JSON of the effective criteria */
  hash: string;
  /** the path read, or "built-in default (<path>)" */
  source: string;
}

/**
 * Where the shipped default lives. Works from the sources (lib/judge/) and from the compiled
 * output (dist/lib/judge/ → the package's lib/judge/, since the YAML file is not compiled).
 * @param here the folder of this module (a parameter only so tests can stand in for dist/).
 */
export function defaultCriteriaPath(here: string = dirname(fileURLToPath(import.meta.url))): string {
  const beside = join(here, 'default-criteria.yaml');
  if (existsSync(beside)) return beside;
  return resolve(here, '..', '..', '..', 'lib', 'judge', 'default-criteria.yaml');
}

/** Read, parse and validate a criteria file; null loads the shipped default. Throws CriteriaError / EvenfieldError. */
export function loadCriteria(file: string | null): LoadedCriteria {
  const path = file ?? defaultCriteriaPath();
  const text = readTextFile(path, 'criteria file', 'criteria');
  const criteria = parseCriteria(text, path);
  return {
    criteria,
    text,
    hash: criteriaHash(criteria),
    source: file === null ? `built-in default (${path})` : path,
  };
}

/** Parse and validate criteria text; `file` is only used in messages. */
export function parseCriteria(text: string, file: string): Criteria {
  const lineCounter = new LineCounter();
  const doc = parseDocument(text, { lineCounter, uniqueKeys: true });
  const lineOf = (offset: number) => lineCounter.linePos(offset).line;

  if (doc.errors.length > 0) {
    throw new CriteriaError(
      doc.errors.map((e) => ({
        file,
        line: e.linePos?.[0].line ?? lineOf(e.pos[0]),
        key: keyAtOffset(doc.contents, e.pos[0]),
        problem: `YAML syntax error: ${firstLine(e.message)}`,
      })),
    );
  }
  if (doc.contents === null) {
    throw new CriteriaError([{ file, line: 1, key: '', problem: 'the criteria file is empty' }]);
  }

  let data: unknown;
  try {
    data = doc.toJS();
  } catch (e) {
    // the YAML reader refuses aliases that expand into too much data (a resource-exhaustion guard)
    throw new CriteriaError([{ file, line: 1, key: '', problem: `cannot read the YAML: ${firstLine((e as Error).message)}` }]);
  }
  const parsed = CriteriaSchema.safeParse(data);
  if (parsed.success) return parsed.data;

  const problems: CriteriaProblem[] = [];
  for (const issue of parsed.error.issues) {
    const path = issue.path.filter((p): p is string | number => typeof p !== 'symbol');
    if (issue.code === 'unrecognized_keys') {
      for (const k of issue.keys) {
        const at = locate(doc.contents, [...path, k]);
        problems.push({
          file,
          line: at.node ? lineOf(at.node.range?.[0] ?? 0) : 1,
          key: dotted([...path, k]),
          problem: unknownKeyProblem(k, allowedKeysAt(path)),
        });
      }
      continue;
    }
    const at = locate(doc.contents, path);
    const line = at.node ? lineOf(at.node.range?.[0] ?? 0) : 1;
    problems.push({ file, line, key: dotted(path), problem: issueProblem(issue, valueAt(data, path)) });
  }
  problems.sort((a, b) => a.line - b.line);
  throw new CriteriaError(problems);
}

function firstLine(s: string): string {
  return s.split('\n')[0].replace(/ at line \d+, column \d+:?$/, '');
}

function dotted(path: readonly (string | number)[]): string {
  return path.map((p) => (typeof p === 'number' ? `[${p}]` : p)).join('.').replace(/\.\[/g, '[');
}

function valueAt(data: unknown, path: readonly (string | number)[]): unknown {
  let v = data;
  for (const p of path) {
    if (v === null || typeof v !== 'object') return undefined;
    v = (v as Record<string | number, unknown>)[p];
  }
  return v;
}

function issueProblem(issue: z.core.$ZodIssue, value: unknown): string {
  const msg = issue.message;
  if (issue.code === 'invalid_type' && msg.startsWith('Invalid input')) {
    const expected = issue.expected === 'object' ? 'a mapping' : issue.expected === 'array' ? 'a list' : `a ${issue.expected}`;
    return typeProblem(expected, value);
  }
  if (issue.code === 'too_small' || issue.code === 'too_big' || issue.code === 'not_multiple_of') {
    return `${msg} (got ${JSON.stringify(value)})`;
  }
  return msg;
}

/** Edit distance, for "did you mean" hints on misspelt keys. */
function editDistance(a: string, b: string): number {
  const x = a.toLowerCase();
  const y = b.toLowerCase();
  let prev = Array.from({ length: y.length + 1 }, (_, j) => j);
  for (let i = 1; i <= x.length; i++) {
    const cur = [i];
    for (let j = 1; j <= y.length; j++) {
      cur[j] = Math.min(prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (x[i - 1] === y[j - 1] ? 0 : 1));
    }
    prev = cur;
  }
  return prev[y.length];
}

function unknownKeyProblem(key: string, allowed: string[] | null): string {
  if (!allowed || allowed.length === 0) return 'unknown key';
  const ranked = allowed
    .map((k) => ({ k, d: editDistance(key, k) }))
    .sort((a, b) => a.d - b.d);
  const best = ranked[0];
  const hint = best.d <= Math.max(2, Math.floor(key.length / 3)) ? `did you mean ${best.k}? ` : '';
  return `unknown key (${hint}allowed here: ${allowed.join(', ')})`;
}

/**
 * The node a path points at: for a mapping key, the key itself (so the line is the key's line);
 * for a list item, the item. When the path does not exist (a missing key), the deepest node found.
 */
function locate(root: unknown, path: readonly (string | number)[]): { node: YamlNode | null; found: boolean } {
  let node: unknown = root;
  let last: YamlNode | null = isNodeLike(root) ? (root as YamlNode) : null;
  for (const seg of path) {
    if (isMap(node)) {
      const pair = node.items.find((p) => isScalar(p.key) && String(p.key.value) === String(seg));
      if (!pair) return { node: last, found: false };
      last = (isNodeLike(pair.key) ? pair.key : pair.value) as YamlNode;
      node = pair.value;
    } else if (isSeq(node) && typeof seg === 'number') {
      const item = node.items[seg];
      if (!isNodeLike(item)) return { node: last, found: false };
      last = item as YamlNode;
      node = item;
    } else {
      return { node: last, found: false };
    }
  }
  return { node: last, found: true };
}

function isNodeLike(n: unknown): boolean {
  return typeof n === 'object' && n !== null && 'range' in n;
}

/** Dotted key of the innermost mapping pair whose span holds a byte offset (for syntax errors). */
function keyAtOffset(root: unknown, offset: number): string {
  const path: string[] = [];
  let node: unknown = root;
  for (let depth = 0; depth < 20; depth++) {
    if (!isMap(node)) break;
    const pair = (node.items as Pair[]).find((p) => {
      const k = p.key as YamlNode | null;
      const v = p.value as YamlNode | null;
      const start = k?.range?.[0];
      const end = v?.range?.[2] ?? k?.range?.[2];
      return start !== undefined && end !== undefined && offset >= start && offset <= end;
    });
    if (!pair || !isScalar(pair.key)) break;
    path.push(String(pair.key.value));
    node = pair.value;
  }
  return path.join('.');
}

/** JSON with object keys sorted at every level: equal criteria give equal text, whatever the key order. */
export function canonicalJson(value: unknown): string {
  if (Array.isArray(value)) return `[${value.map(canonicalJson).join(',')}]`;
  if (value !== null && typeof value === 'object') {
    const entries = Object.entries(value as Record<string, unknown>)
      .filter(([, v]) => v !== undefined)
      .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
    return `{${entries.map(([k, v]) => `${JSON.stringify(k)}:${canonicalJson(v)}`).join(',')}}`;
  }
  return JSON.stringify(value);
}

/** sha256 (hex) of the canonical JSON of the effective criteria. */
export function criteriaHash(criteria: Criteria): string {
  return createHash('sha256').update(canonicalJson(criteria)).digest('hex');
}

/** One-line help for keys of the printed effective criteria (looked up by dotted path suffix). */
const KEY_HELP: Record<string, string> = {
  panel: 'active area of the panel; needed for blob areas in mm² and SEMU',
  grid: 'sampled-uniformity grid',
  'grid.layout': 'number of points: 5, 9, 13 or 25',
  'grid.placement': 'cells = centres of equal cells; inset = outer points insetPct from the edges',
  'grid.insetPct': 'inset from each edge, % of the panel (placement inset only)',
  'grid.spotRadiusPct': 'radius of each measurement spot, % of the panel diagonal',
  uncertainty: 'measurement allowances: a figure this close to its limit is marked borderline',
  'uncertainty.uniformityPctPoints': '± percentage points of min/max uniformity',
  'uncertainty.maxOverMin': '± on Lmax/Lmin',
  'uncertainty.deviationPctPoints': '± percentage points of deviation from centre',
  'uncertainty.duv': "± on Δu'v'",
  'uncertainty.semu': '± SEMU',
  'uncertainty.contrastPctPoints': '± percentage points of glow contrast',
  'uncertainty.luminancePct': '± % of an absolute luminance limit',
  mura: 'full-field mura search',
  'mura.minFeatureMm': 'smallest feature looked for, mm across',
  'mura.tileGrid': '[columns, rows] of the modules of a tiled wall, for seams at module borders',
  patterns: 'limits per test pattern; an absent pattern is not judged',
  required: 'a missing photo of this pattern makes the panel an error',
  minOverMaxPctMin: 'uniformity, 100·Lmin/Lmax, at least (%)',
  maxOverMinMax: 'Lmax/Lmin at most',
  maxDeviationFromCentrePctMax: 'every point within ± this % of the centre point',
  maxDuvFromCentreMax: "Δu'v' of every point from the centre point at most",
  maxDuvAnyPairMax: "largest Δu'v' between any two points at most",
  maxSemu: 'largest mura index (SEMU) at most',
  blobs: 'blob counts by kind',
  'blobs.countFromSemu': 'count only blobs of at least this SEMU',
  'blobs.maxCount': 'most blobs allowed per kind (any = all kinds together)',
  glow: 'light leaking or glowing at the border (black only)',
  'glow.maxContrastPct': 'largest peak contrast of a glow above the black background (%)',
  'glow.maxSemu': 'largest SEMU of a glow at most',
  'glow.maxAreaMm2': 'largest area of one glow (mm²)',
  luminanceCdM2: 'absolute luminance window; judged only for calibrated photos',
  reportOnly: 'limits that are reported with their margin but never fail the panel',
};

function helpFor(path: string[]): string | undefined {
  for (let i = 0; i < path.length; i++) {
    const h = KEY_HELP[path.slice(i).join('.')];
    if (h) return h;
  }
  return undefined;
}

export interface CarriedComments {
  keyBefore?: string;
  valueBefore?: string;
  value?: string;
}

/** The comments of a criteria text by dotted key path (unparseable text: none), and its header. */
export function commentsByKey(text: string): { comments: Map<string, CarriedComments>; header: string | null } {
  const comments = new Map<string, CarriedComments>();
  const orig = parseDocument(text);
  if (orig.errors.length > 0) return { comments, header: null };
  visit(orig, {
    Pair(_, pair, ancestors) {
      const k = pair.key as { commentBefore?: string | null } | null;
      const v = pair.value as { commentBefore?: string | null; comment?: string | null } | null;
      comments.set(pairPath(pair, ancestors).join('.'), {
        keyBefore: k?.commentBefore ?? undefined,
        valueBefore: v?.commentBefore ?? undefined,
        value: v?.comment ?? undefined,
      });
    },
  });
  return { comments, header: orig.commentBefore ?? null };
}

/** Key path of a pair from the ancestors `visit` hands over. */
function pairPath(pair: { key: unknown }, ancestors: readonly unknown[]): string[] {
  const keys: string[] = [];
  for (const a of ancestors) {
    if (typeof a === 'object' && a !== null && 'key' in a && 'value' in a && isScalar((a as { key: unknown }).key)) {
      keys.push(String(((a as { key: { value: unknown } }).key).value));
    }
  }
  if (isScalar(pair.key)) keys.push(String(pair.key.value));
  return keys;
}

/**
 * The effective criteria (every default filled in) as YAML, for printing and as a starting point.
 * With `from.text` (the file as read), its comments (the stated sources of the values) are kept at
 * the same keys; keys without one get a line of help.
 */
export function effectiveCriteriaYaml(criteria: Criteria, from: { source?: string; text?: string } = {}): string {
  const { comments: carried, header } = from.text ? commentsByKey(from.text) : { comments: new Map<string, CarriedComments>(), header: null };

  const doc = new Document(criteria);
  visit(doc, {
    Pair(_, pair, ancestors) {
      const path = pairPath(pair, ancestors);
      const c = carried.get(path.join('.'));
      const key = pair.key as { commentBefore?: string | null };
      const value = pair.value as { commentBefore?: string | null; comment?: string | null } | null;
      if (isSeq(pair.value)) pair.value.flow = true;
      if (c && (c.keyBefore || c.valueBefore || c.value)) {
        if (c.keyBefore) key.commentBefore = c.keyBefore;
        if (value && c.valueBefore) value.commentBefore = c.valueBefore;
        if (value && c.value) value.comment = c.value;
        return;
      }
      const help = helpFor(path);
      if (!help || !value) return;
      if (isMap(pair.value)) key.commentBefore = ` ${help}`;
      else value.comment = ` ${help}`;
    },
  });
  doc.commentBefore = [
    ' Effective acceptance criteria (every default filled in).',
    from.source ? ` Source: ${from.source}` : null,
    ` sha256 of the canonical JSON: ${criteriaHash(criteria)}`,
    ' Copy this file, edit it, and give the copy to evenfield as its criteria file.',
    header ? ` \n${header}` : null,
  ]
    .filter((l): l is string => l !== null)
    .join('\n');
  return doc.toString({ lineWidth: 0 });
}
