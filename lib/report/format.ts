// How numbers are written in the reports. Exported so that a check of a report's text against
// results.json can format the expected values the same way.

import type { Pattern, Verdict } from '../types.js';

const DASH = '–';

function fixed(x: number | null | undefined, digits: number): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return DASH;
  const s = x.toFixed(digits);
  // no "-0.000"
  return /^-0\.?0*$/.test(s) ? s.slice(1) : s;
}

/** Relative luminance (centre = 1): 3 decimals, e.g. 0.953 */
export const fmtRel = (x: number | null | undefined): string => fixed(x, 3);
/** Percent: 1 decimal by default, e.g. 12.3 */
export const fmtPct = (x: number | null | undefined, digits = 1): string => fixed(x, digits);
/** Contrast in %: 2 decimals, e.g. -1.37 */
export const fmtContrast = (x: number | null | undefined): string => fixed(x, 2);
/** SEMU: 2 decimals, e.g. 1.74 */
export const fmtSemu = (x: number | null | undefined): string => fixed(x, 2);
/** u', v' and Δu'v': 4 decimals */
export const fmtUv = (x: number | null | undefined): string => fixed(x, 4);
/** mm and mm²: 1 decimal */
export const fmtMm = (x: number | null | undefined): string => fixed(x, 1);

/** Luminance in cd/m²: 3 significant figures up to 1000, then whole numbers. */
export function fmtCd(x: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return DASH;
  const a = Math.abs(x);
  if (a >= 100) return fixed(x, 0);
  if (a >= 10) return fixed(x, 1);
  if (a >= 1) return fixed(x, 2);
  return fixed(x, 3);
}

/** A generic number with about 4 significant figures. */
export function fmtNum(x: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return DASH;
  const a = Math.abs(x);
  if (a === 0) return '0';
  if (a >= 1000) return fixed(x, 0);
  if (a >= 100) return fixed(x, 1);
  if (a >= 10) return fixed(x, 2);
  if (a >= 0.01) return fixed(x, 3);
  return x.toExponential(2);
}

/** At most `digits` decimals, trailing zeros dropped: trim(4, 2) = "4", trim(0.625, 2) = "0.63". */
export function trim(x: number | null | undefined, digits: number): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return DASH;
  return String(Number(x.toFixed(digits)));
}

/** A limit as written in criteria: up to 6 significant figures, no trailing zeros (25, 1.5, 0.004). */
export function fmtLimit(x: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return DASH;
  return String(Number(x.toPrecision(6)));
}

export function fmtExposureTime(t: number | null): string {
  if (t === null || !(t > 0)) return DASH;
  if (t >= 0.5) return `${trim(t, 3)} s`;
  const inv = 1 / t;
  const r = Math.round(inv);
  return Math.abs(inv - r) / inv < 0.02 ? `1/${r} s` : `${trim(t, 4)} s`;
}

/** UTC date-time, minute resolution: 2025-03-14 09:05 UTC */
export function fmtDate(d: Date): string {
  return `${d.toISOString().slice(0, 16).replace('T', ' ')} UTC`;
}

export function verdictWord(v: Verdict): string {
  return v === 'pass' ? 'PASS' : v === 'fail' ? 'FAIL' : 'NOT JUDGED';
}

export function patternName(p: Pattern | null, level: number | null = null): string {
  if (p === null) return 'All patterns';
  const name = p === 'gray' ? 'Grey' : p.charAt(0).toUpperCase() + p.slice(1);
  return level !== null && level !== undefined ? `${name} ${level} %` : name;
}

/** Where on the panel a point is, in words (thirds of width and height). */
export function placeWords(u: number, v: number): string {
  const col = u < 1 / 3 ? 'left' : u > 2 / 3 ? 'right' : 'centre';
  const row = v < 1 / 3 ? 'upper' : v > 2 / 3 ? 'lower' : 'middle';
  if (row === 'middle' && col === 'centre') return 'centre';
  if (row === 'middle') return `middle ${col}`;
  if (col === 'centre') return `${row} centre`;
  return `${row} ${col}`;
}

export function shortHash(h: string, n = 12): string {
  return h.slice(0, n);
}

/** Short names of the judge's figure keys, for tables. */
const FIGURE_NAMES: Record<string, string> = {
  nonuniformityPct: 'non-uniformity %',
  minOverMaxPct: 'Lmin/Lmax %',
  maxOverMin: 'Lmax/Lmin',
  maxDeviationFromCentrePct: 'deviation from centre %',
  maxDuvFromCentre: "\u0394u'v' from centre",
  maxDuvAnyPair: "\u0394u'v' between points",
  maxSemu: 'largest SEMU',
  glowContrastPct: 'glow contrast %',
  glowSemu: 'glow SEMU',
  glowAreaMm2: 'glow area mm\u00b2',
  luminanceCdM2: 'luminance cd/m\u00b2',
};

export function figureName(key: string): string {
  if (FIGURE_NAMES[key]) return FIGURE_NAMES[key]!;
  if (key.startsWith('blobCount.')) return `${key.slice('blobCount.'.length)} blobs`;
  return key;
}

/** Decimals for a figure's values and margins (as the judge writes them). */
export function figureDecimals(key: string): number {
  if (/Duv/.test(key)) return 4;
  if (/Semu|maxOverMin/.test(key)) return 2;
  if (key.startsWith('blobCount.')) return 0;
  return 1;
}
