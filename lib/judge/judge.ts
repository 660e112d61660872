// Verdicts: every photo of a panel against the criteria, every limit a sentence with its margin.
//
// Rules:
//  - a figure at its limit passes (limits are inclusive);
//  - a photo that could not be measured, a figure the criteria need but the photo lacks, or a missing
//    required pattern is an `error` reason; a panel never passes on a figure it did not measure;
//  - verdict: `fail` when any judged figure is outside its limit (a measured failure stands whatever
//    else went wrong), else `error` when anything could not be measured, else `pass` — and a panel on
//    which nothing at all was judged is an `error`, never a `pass`;
//  - a figure within its measurement allowance of the limit (either side) also gets a borderline note;
//  - limits listed in `reportOnly` give a note with the margin and never fail the panel.

import type { Blob, BlobKind, GridPoint, Pattern, PhotoResult, Reason, Verdict } from '../types.js';
import { GLOW_KINDS, PATTERNS } from './schema.js';
import type { BlackPatternCriteria, Criteria, LimitKey, PatternCriteria } from './schema.js';

/**
 * A photo as the judge reads it. `luminanceCdM2PerUnit`, when a photo has an absolute luminance
 * reference, converts the photo's relative Y to cd/m²; without it the absolute window is not judged.
 */
export type JudgeablePhoto = PhotoResult & { luminanceCdM2PerUnit?: number | null };

/** A Reason with the extra facts the report needs. */
export interface JudgedReason extends Reason {
  /** the photo the reason is about, when there is one */
  file: string | null;
  /** unit of value and limit: '%', '', "Δu'v'", 'SEMU', 'blobs', 'cd/m²', 'mm²' */
  unit: string;
  /** listed in the pattern's reportOnly: reported, never fails the panel */
  reportOnly: boolean;
  /** a note that the figure is within its measurement allowance of the limit */
  borderline: boolean;
}

export interface PanelJudgement {
  verdict: Verdict;
  /** one sentence per error, failure and borderline figure, in that order */
  reasons: string[];
  /** every figure judged (failures and passes with their margins), errors and notes */
  reasonDetails: JudgedReason[];
}

type Unit = 'pct' | 'ratio' | 'duv' | 'semu' | 'count' | 'cdm2' | 'mm2';

const UNIT_TEXT: Record<Unit, string> = {
  pct: '%',
  ratio: '',
  duv: "Δu'v'",
  semu: 'SEMU',
  count: 'blobs',
  cdm2: 'cd/m²',
  mm2: 'mm²',
};

/** Decimals shown for values and margins. */
const DECIMALS: Record<Unit, number> = { pct: 1, ratio: 2, duv: 4, semu: 2, count: 0, cdm2: 1, mm2: 1 };

/** Label of a pattern in sentences: "white", "gray 50 %", "black", "red" ... */
export function patternLabel(pattern: Pattern, level: number | null = null): string {
  if (pattern === 'gray' && level !== null && Number.isFinite(level)) return `gray ${trimNumber(level)} %`;
  return pattern;
}

/** A limit as written: 75 → "75", 1.33 → "1.33", 0.01 → "0.01". */
function trimNumber(x: number): string {
  return String(Number(x.toPrecision(12)));
}

function fixed(x: number, d: number): string {
  const s = x.toFixed(d);
  return /^-0\.?0*$/.test(s) ? s.slice(1) : s;
}

/**
 * Decimals for a value next to a limit: the unit's usual number, more when rounding would make a
 * value that differs from its limit print the same as the limit (74.96 vs 75 → "74.96").
 */
function decimalsFor(value: number, limit: number, unit: Unit, cdm2Small: boolean): number {
  let d = unit === 'cdm2' && cdm2Small ? 3 : DECIMALS[unit];
  if (unit === 'count') return 0;
  while (d < DECIMALS[unit] + 4 && value !== limit && Number(value.toFixed(d)) === Number(limit.toFixed(d))) d++;
  return d;
}

interface Check {
  pattern: Pattern;
  label: string;
  file: string;
  figure: string;
  /** words for the figure in the sentence, e.g. "uniformity" */
  name: string;
  value: number;
  /** the value as shown, when it differs from `value` (signed deviation) */
  shownValue?: number;
  limit: number;
  kind: 'min' | 'max';
  unit: Unit;
  /** ±, in the value's units; null = none */
  allowance: number | null;
  reportOnly: boolean;
  /** words after the value, e.g. "(blob 2, cloud)" */
  context?: string;
  /** "±" before the limit (deviation from centre) */
  symmetric?: boolean;
  /** count checks: "spot blobs (≥ 0.5 SEMU)" */
  countWords?: string;
}

function marginOf(c: Check): number {
  return c.kind === 'min' ? c.value - c.limit : c.limit - c.value;
}

function judgeCheck(c: Check, out: JudgedReason[]): void {
  if (!Number.isFinite(c.value)) {
    out.push(errorReason(c.pattern, c.label, c.file, c.figure, `${c.countWords ?? c.name} could not be computed (${c.value}), so it cannot be judged`));
    return;
  }
  const margin = marginOf(c);
  const inside = margin >= 0;
  const small = c.unit === 'cdm2' && Math.abs(c.limit) < 10;
  const d = decimalsFor(c.value, c.limit, c.unit, small);
  const sym = c.symmetric ? '±' : '';
  const u = c.unit === 'pct' ? ' %' : c.unit === 'cdm2' ? ' cd/m²' : c.unit === 'mm2' ? ' mm²' : '';
  const shown = c.shownValue ?? c.value;
  const valueText = `${c.symmetric && shown > 0 ? '+' : ''}${fixed(shown, d)}${u}`;
  const limitText = `${sym}${trimNumber(c.limit)}${u}`;
  const marginUnit = c.unit === 'pct' ? ' points' : c.unit === 'cdm2' ? ' cd/m²' : c.unit === 'mm2' ? ' mm²' : '';
  const marginText = `${fixed(Math.abs(margin), d)}${marginUnit}`;
  const ctx = c.context ? ` ${c.context}` : '';
  const tail = c.reportOnly ? '; report only, not judged' : '';

  let text: string;
  if (c.unit === 'count') {
    const rel = inside ? '≤' : '>';
    const paren = inside ? `margin ${marginText}` : `over by ${marginText}`;
    text = `${c.label}: ${c.countWords}: ${c.value} ${rel} ${trimNumber(c.limit)} allowed (${paren}${tail})`;
  } else {
    const which = c.kind === 'min' ? 'minimum' : 'maximum';
    let rel: string;
    if (c.symmetric) rel = inside ? 'within' : 'outside';
    else if (c.kind === 'min') rel = inside ? '≥' : '<';
    else rel = inside ? '≤' : '>';
    const paren = inside ? `margin ${marginText}` : c.kind === 'min' ? `short by ${marginText}` : `over by ${marginText}`;
    text = `${c.label}: ${c.name} ${valueText}${ctx} ${rel} ${limitText} ${which} (${paren}${tail})`;
  }

  const base = {
    pattern: c.pattern,
    figure: c.figure,
    value: c.value,
    limit: c.limit,
    margin,
    file: c.file,
    unit: UNIT_TEXT[c.unit],
    reportOnly: c.reportOnly,
  };
  out.push({ ...base, text, severity: inside || c.reportOnly ? 'note' : 'fail', borderline: false });

  if (!c.reportOnly && c.allowance !== null && c.allowance > 0 && Math.abs(margin) <= c.allowance) {
    const allowUnit =
      c.unit === 'pct' ? (c.allowance === 1 ? ' point' : ' points') : c.unit === 'semu' ? ' SEMU' : marginUnit;
    const which = c.kind === 'min' ? 'minimum' : 'maximum';
    const subject = c.unit === 'count' ? (c.countWords ?? c.name) : c.name;
    out.push({
      ...base,
      severity: 'note',
      borderline: true,
      text:
        `${c.label}: ${subject} ${valueText} is borderline: within the ±${trimNumber(Number(c.allowance.toPrecision(6)))}${allowUnit} ` +
        `measurement allowance of the ${limitText} ${which}`,
    });
  }
}

function basename(file: string): string {
  const parts = file.split(/[\\/]/);
  return parts[parts.length - 1] || file;
}

function errorReason(pattern: Pattern | null, label: string, file: string | null, figure: string, message: string): JudgedReason {
  return {
    pattern,
    figure,
    value: null,
    limit: null,
    margin: null,
    text: `${label}: ${message}`,
    severity: 'error',
    file,
    unit: '',
    reportOnly: false,
    borderline: false,
  };
}

function noteReason(pattern: Pattern | null, label: string, file: string | null, figure: string, message: string): JudgedReason {
  return { ...errorReason(pattern, label, file, figure, message), severity: 'note' };
}

function centrePoint(points: GridPoint[]): GridPoint | null {
  let best: GridPoint | null = null;
  let bestD = Infinity;
  for (const p of points) {
    const d = Math.hypot(p.u - 0.5, p.v - 0.5);
    if (d < bestD) {
      bestD = d;
      best = p;
    }
  }
  return best;
}

function largestBy(blobs: Blob[], f: (b: Blob) => number): Blob | null {
  let best: Blob | null = null;
  for (const b of blobs) if (best === null || f(b) > f(best)) best = b;
  return best;
}

function blobContext(b: Blob | null): string | undefined {
  return b ? `(blob ${b.id}, ${b.kind})` : undefined;
}

/** Judge one measured photo against its pattern's section. */
function judgePhoto(
  photo: JudgeablePhoto,
  label: string,
  section: PatternCriteria | BlackPatternCriteria,
  criteria: Criteria,
  out: JudgedReason[],
): void {
  const pattern = photo.pattern;
  const file = photo.file;
  const unc = criteria.uncertainty;
  const ro = (k: LimitKey) => section.reportOnly.includes(k);
  const common = { pattern, label, file };

  // A grid chosen on the command line over the criteria's: judged, but said plainly.
  if (photo.grid && photo.grid.layout !== criteria.grid.layout) {
    out.push(
      noteReason(pattern, label, file, 'grid', `measured on a ${photo.grid.layout}-point grid, but the criteria were written for ${criteria.grid.layout} points`),
    );
  }

  // Sampled uniformity.
  const needsUniformity =
    section.minOverMaxPctMin !== undefined ||
    section.maxOverMinMax !== undefined ||
    section.maxDeviationFromCentrePctMax !== undefined ||
    section.maxDuvFromCentreMax !== undefined ||
    section.maxDuvAnyPairMax !== undefined;
  const uf = photo.uniformity;
  if (needsUniformity && !uf) {
    out.push(errorReason(pattern, label, file, 'uniformity', 'grid uniformity was not measured, so its limits cannot be judged'));
  } else if (uf) {
    if (section.minOverMaxPctMin !== undefined) {
      judgeCheck(
        { ...common, figure: 'minOverMaxPct', name: 'uniformity', value: uf.minOverMaxPct, limit: section.minOverMaxPctMin, kind: 'min', unit: 'pct', allowance: unc.uniformityPctPoints, reportOnly: ro('minOverMaxPctMin') },
        out,
      );
    }
    if (section.maxOverMinMax !== undefined) {
      judgeCheck(
        { ...common, figure: 'maxOverMin', name: 'max/min ratio', value: uf.maxOverMin, limit: section.maxOverMinMax, kind: 'max', unit: 'ratio', allowance: unc.maxOverMin, reportOnly: ro('maxOverMinMax') },
        out,
      );
    }
    if (section.maxDeviationFromCentrePctMax !== undefined) {
      judgeCheck(
        {
          ...common,
          figure: 'maxDeviationFromCentrePct',
          name: 'largest deviation from centre',
          value: Math.abs(uf.maxDeviationFromCentrePct),
          shownValue: uf.maxDeviationFromCentrePct,
          limit: section.maxDeviationFromCentrePctMax,
          kind: 'max',
          unit: 'pct',
          allowance: unc.deviationPctPoints,
          reportOnly: ro('maxDeviationFromCentrePctMax'),
          symmetric: true,
        },
        out,
      );
    }
    if (section.maxDuvFromCentreMax !== undefined) {
      judgeCheck(
        { ...common, figure: 'maxDuvFromCentre', name: "largest Δu'v' from centre", value: uf.maxDuvFromCentre, limit: section.maxDuvFromCentreMax, kind: 'max', unit: 'duv', allowance: unc.duv, reportOnly: ro('maxDuvFromCentreMax') },
        out,
      );
    }
    if (section.maxDuvAnyPairMax !== undefined) {
      judgeCheck(
        { ...common, figure: 'maxDuvAnyPair', name: "largest Δu'v' between points", value: uf.maxDuvAnyPair, limit: section.maxDuvAnyPairMax, kind: 'max', unit: 'duv', allowance: unc.duv, reportOnly: ro('maxDuvAnyPairMax') },
        out,
      );
    }
  }

  // Mura.
  const glow = 'glow' in section ? section.glow : undefined;
  const glowSet = glow !== undefined && (glow.maxContrastPct !== undefined || glow.maxSemu !== undefined || glow.maxAreaMm2 !== undefined);
  const needsMura = section.maxSemu !== undefined || section.blobs !== undefined || glowSet;
  const mura = photo.mura;
  if (needsMura && !mura) {
    out.push(errorReason(pattern, label, file, 'mura', 'mura was not measured, so its limits cannot be judged'));
  } else if (mura && needsMura) {
    const blobs = mura.blobs;
    const isGlow = (b: Blob) => GLOW_KINDS.includes(b.kind);
    // With glow limits, glow is judged by them and maxSemu covers the other kinds.
    const semuBlobs = glowSet ? blobs.filter((b) => !isGlow(b)) : blobs;
    if (section.maxSemu !== undefined) {
      const worst = largestBy(semuBlobs, (b) => b.semu);
      judgeCheck(
        {
          ...common,
          figure: 'maxSemu',
          name: glowSet ? 'largest SEMU (glow aside)' : 'largest SEMU',
          value: worst ? worst.semu : 0,
          limit: section.maxSemu,
          kind: 'max',
          unit: 'semu',
          allowance: unc.semu,
          reportOnly: ro('maxSemu'),
          context: blobContext(worst),
        },
        out,
      );
      // A finding narrower (or smaller) than the photo resolves has a SEMU that is a lower bound: within
      // the limit as measured, it may still be beyond it (common practice: a lower bound under a maximum
      // does not show compliance). Marked borderline, so that it is confirmed before the panel is passed.
      if (!ro('maxSemu')) {
        for (const b of semuBlobs) {
          if (b.detail.belowResolution === undefined || !(b.semu <= section.maxSemu)) continue;
          out.push({
            pattern,
            figure: 'maxSemu',
            value: b.semu,
            limit: section.maxSemu,
            margin: section.maxSemu - b.semu,
            file,
            unit: UNIT_TEXT.semu,
            reportOnly: false,
            severity: 'note',
            borderline: true,
            text:
              `${label}: blob ${b.id} (${b.kind}) is ${b.detail.belowResolution === 'size' ? 'smaller' : 'narrower'} than the photo resolves, ` +
              `so its SEMU ${fixed(b.semu, DECIMALS.semu)} is a lower bound on the ${trimNumber(section.maxSemu)} maximum: confirm it with a closer photo`,
          });
        }
      }
    }
    if (section.blobs) {
      const from = section.blobs.countFromSemu;
      const counted = blobs.filter((b) => b.semu >= from);
      const fromWords = from > 0 ? ` of ${trimNumber(from)} SEMU or more` : '';
      for (const [kind, limit] of Object.entries(section.blobs.maxCount) as [BlobKind | 'any', number | undefined][]) {
        if (limit === undefined) continue;
        const n = kind === 'any' ? counted.length : counted.filter((b) => b.kind === kind).length;
        judgeCheck(
          {
            ...common,
            figure: `blobCount.${kind}`,
            name: `${kind} blobs`,
            value: n,
            limit,
            kind: 'max',
            unit: 'count',
            allowance: null,
            reportOnly: ro('blobs'),
            countWords: kind === 'any' ? `blobs of any kind${fromWords}` : `${kind} blobs${fromWords}`,
          },
          out,
        );
      }
    }
    if (glow && glowSet) {
      const glowBlobs = blobs.filter(isGlow);
      if (glow.maxContrastPct !== undefined) {
        const worst = largestBy(glowBlobs, (b) => b.peakContrastPct);
        judgeCheck(
          {
            ...common,
            figure: 'glowContrastPct',
            name: 'largest glow contrast',
            value: worst ? Math.max(0, worst.peakContrastPct) : 0,
            limit: glow.maxContrastPct,
            kind: 'max',
            unit: 'pct',
            allowance: unc.contrastPctPoints,
            reportOnly: ro('glow.maxContrastPct'),
            context: blobContext(worst),
          },
          out,
        );
      }
      if (glow.maxSemu !== undefined) {
        const worst = largestBy(glowBlobs, (b) => b.semu);
        judgeCheck(
          { ...common, figure: 'glowSemu', name: 'largest glow SEMU', value: worst ? worst.semu : 0, limit: glow.maxSemu, kind: 'max', unit: 'semu', allowance: unc.semu, reportOnly: ro('glow.maxSemu'), context: blobContext(worst) },
          out,
        );
      }
      if (glow.maxAreaMm2 !== undefined) {
        const worst = largestBy(glowBlobs, (b) => b.areaMm2);
        judgeCheck(
          { ...common, figure: 'glowAreaMm2', name: 'largest glow area', value: worst ? worst.areaMm2 : 0, limit: glow.maxAreaMm2, kind: 'max', unit: 'mm2', allowance: null, reportOnly: ro('glow.maxAreaMm2'), context: blobContext(worst) },
          out,
        );
      }
    }
    const sizeKnown = criteria.panel !== undefined || (photo.grid?.points[0]?.xMm ?? null) !== null;
    if (!sizeKnown) {
      out.push(noteReason(pattern, label, file, 'panelSize', 'blob areas and SEMU rest on an assumed panel size; give the panel size in the criteria'));
    }
  }

  // Absolute luminance.
  const win = section.luminanceCdM2;
  if (win) {
    const scale = photo.luminanceCdM2PerUnit;
    const points = photo.grid?.points ?? [];
    if (scale === undefined || scale === null || !(scale > 0)) {
      out.push(noteReason(pattern, label, file, 'luminanceCdM2', 'absolute luminance not judged: the photo has no luminance reference'));
    } else if (points.length === 0) {
      out.push(errorReason(pattern, label, file, 'luminanceCdM2', 'grid points were not measured, so the luminance window cannot be judged'));
    } else {
      const cd = (p: GridPoint) => p.Y * scale;
      const centre = centrePoint(points) as GridPoint;
      const lowest = points.reduce((a, b) => (cd(b) < cd(a) ? b : a));
      const highest = points.reduce((a, b) => (cd(b) > cd(a) ? b : a));
      const each = win.at === 'every-point';
      const allowance = (limit: number) => (unc.luminancePct / 100) * limit;
      if (win.min !== undefined) {
        const p = each ? lowest : centre;
        judgeCheck(
          { ...common, figure: 'luminanceCdM2', name: each ? `lowest point luminance (point ${p.index})` : 'centre luminance', value: cd(p), limit: win.min, kind: 'min', unit: 'cdm2', allowance: allowance(win.min), reportOnly: ro('luminanceCdM2') },
          out,
        );
      }
      if (win.max !== undefined) {
        const p = each ? highest : centre;
        judgeCheck(
          { ...common, figure: 'luminanceCdM2', name: each ? `highest point luminance (point ${p.index})` : 'centre luminance', value: cd(p), limit: win.max, kind: 'max', unit: 'cdm2', allowance: allowance(win.max), reportOnly: ro('luminanceCdM2') },
          out,
        );
      }
    }
  }
}

/** Judge all photos of one panel against the criteria. */
export function judgePanel(photos: readonly JudgeablePhoto[], criteria: Criteria): PanelJudgement {
  const details: JudgedReason[] = [];

  // Labels, made unique with the file name when a pattern (and level) was shot more than once.
  const baseLabels = photos.map((p) => patternLabel(p.pattern, p.patternLevel));
  const labels = baseLabels.map((l, i) =>
    baseLabels.filter((x) => x === l).length > 1 ? `${l} (${basename(photos[i].file)})` : l,
  );

  for (const pattern of PATTERNS) {
    const section = criteria.patterns[pattern];
    const shots = photos.map((p, i) => ({ p, label: labels[i] })).filter((x) => x.p.pattern === pattern);
    if (!section) {
      for (const { p, label } of shots) {
        if (p.status === 'error') {
          details.push(errorReason(pattern, label, p.file, 'photo', `cannot be measured: ${photoError(p)}`));
        } else {
          details.push(noteReason(pattern, label, p.file, 'notJudged', `not judged: the criteria set no limits for ${pattern}`));
        }
      }
      continue;
    }
    if (shots.length === 0) {
      if (section.required) details.push(errorReason(pattern, pattern, null, 'missing', 'required photo is missing'));
      else details.push(noteReason(pattern, pattern, null, 'missing', 'no photo, not judged'));
      continue;
    }
    for (const { p, label } of shots) {
      if (p.status === 'error') {
        details.push(errorReason(pattern, label, p.file, 'photo', `cannot be measured: ${photoError(p)}`));
        continue;
      }
      judgePhoto(p, label, section, criteria, details);
    }
  }

  const judged = details.some((r) => r.limit !== null && r.margin !== null && !r.reportOnly);
  if (!judged && !details.some((r) => r.severity === 'error')) {
    details.push(errorReason(null, 'panel', null, 'nothing-judged', 'nothing was judged: no photo of a pattern the criteria set limits for'));
  }

  const fails = details.filter((r) => r.severity === 'fail');
  const errors = details.filter((r) => r.severity === 'error');
  const borderline = details.filter((r) => r.borderline);
  const verdict: Verdict = fails.length > 0 ? 'fail' : errors.length > 0 ? 'error' : 'pass';
  return {
    verdict,
    reasons: [...errors, ...fails, ...borderline].map((r) => r.text),
    reasonDetails: details,
  };
}

function photoError(p: PhotoResult): string {
  const msg = p.error ?? (p.errorCode ? `error ${p.errorCode}` : 'unknown problem');
  const name = basename(p.file);
  return msg.includes(name) ? msg : `${name}: ${msg}`;
}

/**
 * The judged figure closest to (or furthest past) its limit, comparing margins relative to their
 * limits (a margin over a limit of 0, as for blob counts, counts as is). Errors, notes without a
 * limit, report-only figures, borderline duplicates and blob counts of zero are left out. Null when
 * nothing was judged.
 */
export function worstMargin(reasons: readonly Reason[]): { reason: Reason; relative: number } | null {
  let best: { reason: Reason; relative: number } | null = null;
  for (const r of reasons) {
    const extra = r as Partial<JudgedReason>;
    if (r.severity === 'error' || r.margin === null || r.limit === null || extra.reportOnly || extra.borderline) continue;
    // no blobs of a kind is never the worst case, even where none are allowed
    if (r.figure.startsWith('blobCount.') && r.value === 0) continue;
    const relative = r.limit !== 0 ? r.margin / Math.abs(r.limit) : r.margin;
    if (best === null || relative < best.relative) best = { reason: r, relative };
  }
  return best;
}
