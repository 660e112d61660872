// The effective criteria in plain sentences, one per setting or limit, for reports; with the
// source each value's comment in the criteria file gives.

import { commentsByKey } from './load.js';
import type { LoadedCriteria } from './load.js';
import { PATTERNS } from './schema.js';
import type { Criteria, LimitKey } from './schema.js';

export interface CriteriaSummaryLine {
  /** e.g. "white (required): uniformity (Lmin/Lmax) at least 75 %" */
  text: string;
  /** where the value comes from, as the criteria file's comment on it says; null when it says nothing */
  source: string | null;
}

export interface CriteriaSummaryRecord {
  name: string;
  /** sha256 (hex) of the canonical JSON of the effective criteria */
  hash: string;
  lines: CriteriaSummaryLine[];
}

interface Entry {
  text: string;
  /** dotted key path of the value the line states */
  key: string;
}

function n(x: number): string {
  return String(Number(x.toPrecision(12)));
}

function entries(c: Criteria): Entry[] {
  const out: Entry[] = [];
  const g = c.grid;
  const where = g.placement === 'cells' ? 'at the centres of equal cells' : `inset ${n(g.insetPct)} % from the edges`;
  out.push({ key: 'grid.layout', text: `grid: ${g.layout} points ${where}, spot radius ${n(g.spotRadiusPct)} % of the diagonal` });
  if (c.panel) out.push({ key: 'panel', text: `panel: active area ${n(c.panel.widthMm)} × ${n(c.panel.heightMm)} mm` });
  else out.push({ key: 'panel', text: 'panel: size not given (blob areas and SEMU rest on an assumed size unless given on the command line)' });
  out.push({
    key: 'mura.minFeatureMm',
    text:
      `mura: features from ${n(c.mura.minFeatureMm)} mm across` +
      (c.mura.tileGrid ? `; tiled wall of ${c.mura.tileGrid[0]} × ${c.mura.tileGrid[1]} modules` : ''),
  });

  for (const pattern of PATTERNS) {
    const s = c.patterns[pattern];
    if (!s) continue;
    const head = s.required ? `${pattern} (required)` : pattern;
    const at = (k: string) => `patterns.${pattern}.${k}`;
    const ro = (k: LimitKey) => (s.reportOnly.includes(k) ? ' (report only)' : '');
    const before = out.length;
    const add = (key: string, text: string) => out.push({ key: at(key), text: `${head}: ${text}` });
    if (s.minOverMaxPctMin !== undefined) add('minOverMaxPctMin', `uniformity (Lmin/Lmax) at least ${n(s.minOverMaxPctMin)} %${ro('minOverMaxPctMin')}`);
    if (s.maxOverMinMax !== undefined) add('maxOverMinMax', `max/min ratio at most ${n(s.maxOverMinMax)}${ro('maxOverMinMax')}`);
    if (s.maxDeviationFromCentrePctMax !== undefined) {
      add('maxDeviationFromCentrePctMax', `every point within ±${n(s.maxDeviationFromCentrePctMax)} % of the centre${ro('maxDeviationFromCentrePctMax')}`);
    }
    if (s.maxDuvFromCentreMax !== undefined) add('maxDuvFromCentreMax', `Δu'v' from the centre at most ${n(s.maxDuvFromCentreMax)}${ro('maxDuvFromCentreMax')}`);
    if (s.maxDuvAnyPairMax !== undefined) add('maxDuvAnyPairMax', `Δu'v' between any two points at most ${n(s.maxDuvAnyPairMax)}${ro('maxDuvAnyPairMax')}`);
    if (s.maxSemu !== undefined) add('maxSemu', `largest mura at most ${n(s.maxSemu)} SEMU${ro('maxSemu')}`);
    if (s.blobs) {
      const from = s.blobs.countFromSemu > 0 ? ` of ${n(s.blobs.countFromSemu)} SEMU or more` : '';
      for (const [kind, limit] of Object.entries(s.blobs.maxCount)) {
        if (limit === undefined) continue;
        const what = kind === 'any' ? 'blobs of any kind' : `${kind} blobs`;
        add(`blobs.maxCount.${kind}`, `${what}${from}: at most ${limit}${ro('blobs')}`);
      }
    }
    if ('glow' in s && s.glow) {
      const gl = s.glow;
      if (gl.maxContrastPct !== undefined) add('glow.maxContrastPct', `border glow contrast at most ${n(gl.maxContrastPct)} %${ro('glow.maxContrastPct')}`);
      if (gl.maxSemu !== undefined) add('glow.maxSemu', `border glow at most ${n(gl.maxSemu)} SEMU${ro('glow.maxSemu')}`);
      if (gl.maxAreaMm2 !== undefined) add('glow.maxAreaMm2', `border glow area at most ${n(gl.maxAreaMm2)} mm²${ro('glow.maxAreaMm2')}`);
    }
    if (s.luminanceCdM2) {
      const w = s.luminanceCdM2;
      const where = w.at === 'centre' ? 'centre luminance' : 'luminance at every point';
      const range =
        w.min !== undefined && w.max !== undefined
          ? `from ${n(w.min)} to ${n(w.max)} cd/m²`
          : w.min !== undefined
            ? `at least ${n(w.min)} cd/m²`
            : `at most ${n(w.max as number)} cd/m²`;
      add('luminanceCdM2', `${where} ${range}, calibrated photos only${ro('luminanceCdM2')}`);
    }
    if (out.length === before) add('required', 'photo taken, no limits');
  }

  const u = c.uncertainty;
  const pts = (x: number) => `±${n(x)} ${x === 1 ? 'point' : 'points'}`;
  out.push({
    key: 'uncertainty',
    text:
      `borderline within: uniformity ${pts(u.uniformityPctPoints)}, max/min ±${n(u.maxOverMin)}, ` +
      `deviation ${pts(u.deviationPctPoints)}, Δu'v' ±${n(u.duv)}, SEMU ±${n(u.semu)}, ` +
      `glow contrast ${pts(u.contrastPctPoints)}, luminance ±${n(u.luminancePct)} %`,
  });
  return out;
}

/** One plain-English line per setting and limit of the criteria, in a stable order. */
export function criteriaSummaryLines(c: Criteria): string[] {
  return entries(c).map((e) => e.text);
}

/** The source a comment states: its last [bracketed] part, else the whole comment; null when none. */
function sourceOf(comment: string | undefined): string | null {
  if (!comment) return null;
  const first = comment.split('\n')[0].trim();
  const brackets = [...first.matchAll(/\[([^\]]+)\]/g)];
  if (brackets.length > 0) return brackets[brackets.length - 1][1].trim();
  return first.length > 0 ? first : null;
}

/** Name, hash and summary lines, each with the source its value's comment gives in the file as read. */
export function criteriaSummary(loaded: LoadedCriteria): CriteriaSummaryRecord {
  const { comments } = commentsByKey(loaded.text);
  return {
    name: loaded.criteria.name,
    hash: loaded.hash,
    lines: entries(loaded.criteria).map((e) => {
      const c = comments.get(e.key);
      return { text: e.text, source: sourceOf(c?.value ?? c?.keyBefore) };
    }),
  };
}
