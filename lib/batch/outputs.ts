// results.json and results.csv writers. Both are written atomically (temporary file, then rename).

import { stringify } from 'csv-stringify/sync';
import type { PanelResult, Pattern, PhotoResult } from '../types.js';

export interface ResultsDocument {
  tool: { name: 'evenfield'; version: string };
  /** when the run started (ISO 8601); settable with --date for reproducible output */
  date: string;
  lot: { id: string | null; station: string | null; operator: string | null };
  criteria: { source: string; sha256: string; effective: unknown };
  options: Record<string, unknown>;
  summary: { panels: number; passed: number; failed: number; errors: number; yieldPct: number | null };
  panels: PanelResult[];
  /** files found but not assigned to a panel, with the reason */
  unassigned: { file: string; reason: string }[];
}

export function summarise(panels: PanelResult[]): ResultsDocument['summary'] {
  const passed = panels.filter((p) => p.verdict === 'pass').length;
  const failed = panels.filter((p) => p.verdict === 'fail').length;
  const errors = panels.filter((p) => p.verdict === 'error').length;
  const judged = passed + failed;
  return { panels: panels.length, passed, failed, errors, yieldPct: judged > 0 ? (100 * passed) / judged : null };
}

/** Spreadsheet formula injection guard: a text cell that starts with = + - @ or a control character
 *  is prefixed with an apostrophe (common practice for CSV exported to spreadsheets). */
export function safeCell(v: string): string {
  return /^[=+\-@\t\r]/.test(v) ? `'${v}` : v;
}

const CSV_PATTERNS: Pattern[] = ['white', 'gray', 'black', 'red', 'green', 'blue'];

function photoFor(p: PanelResult, pattern: Pattern): PhotoResult | undefined {
  return p.photos.find((ph) => ph.pattern === pattern);
}

const num = (x: number | null | undefined, digits: number): string | number =>
  x === null || x === undefined || !Number.isFinite(x) ? '' : Number(x.toFixed(digits));

export function resultsCsv(panels: PanelResult[]): string {
  const present = CSV_PATTERNS.filter((pat) => panels.some((p) => photoFor(p, pat)));
  const header = ['panel', 'verdict', 'photos', 'reasons'];
  for (const pat of present) {
    header.push(
      `${pat}_status`,
      `${pat}_min_over_max_pct`,
      `${pat}_nonuniformity_pct`,
      `${pat}_max_over_min`,
      `${pat}_max_duv_from_centre`,
      `${pat}_max_semu`,
      `${pat}_blobs`,
    );
  }
  const rows: (string | number)[][] = [header];
  for (const p of panels) {
    const row: (string | number)[] = [safeCell(p.panel), p.verdict, p.photos.length, safeCell(p.reasons.join(' | '))];
    for (const pat of present) {
      const ph = photoFor(p, pat);
      if (!ph) {
        row.push('', '', '', '', '', '', '');
        continue;
      }
      const u = ph.uniformity;
      row.push(
        ph.status,
        num(u?.minOverMaxPct, 2),
        num(u?.nonuniformityPct, 2),
        num(u?.maxOverMin, 4),
        num(u?.maxDuvFromCentre, 5),
        num(ph.mura?.maxSemu, 2),
        ph.mura ? ph.blobs.length : '',
      );
    }
    rows.push(row);
  }
  return stringify(rows);
}

/** Stable JSON: 2-space indent, numbers as numbers, NaN/Infinity as null. */
export function resultsJson(doc: ResultsDocument): string {
  return JSON.stringify(doc, (_k, v) => (typeof v === 'number' && !Number.isFinite(v) ? null : v), 2) + '\n';
}
