// Grouping photos into panels: by a manifest (CSV) or by the file naming rule
// <panel>_<pattern>.<ext> (split at the last underscore).

import { readdirSync, statSync } from 'node:fs';
import { basename, dirname, extname, isAbsolute, join, relative, resolve, sep } from 'node:path';
import { parse } from 'csv-parse/sync';
import { EvenfieldError } from '../errors.js';
import { CAMERA_RAW_EXTENSIONS, readTextFile } from '../io/index.js';
import type { Corners, Pattern } from '../types.js';

// HEIF files (.heic from phones, .avif) are listed too: AVIF-coded ones decode, and HEVC-coded ones are
// refused one by one with how to get JPEGs (io/sniff.ts), instead of the folder looking empty
export const IMAGE_EXTENSIONS = new Set(['.jpg', '.jpeg', '.png', '.tif', '.tiff', '.webp', '.heic', '.heif', '.avif']);

export interface PhotoEntry {
  file: string; // path as the user will read it
  pattern: Pattern;
  /** gray level in % (e.g. 50) for gray, else null */
  level: number | null;
  corners: Corners | null;
  note: string | null;
}

export interface PanelGroup {
  panel: string;
  photos: PhotoEntry[];
  /** a photo of the switched-off panel (same camera position and exposure as the black field), whose
   *  light, room light reflected by the screen and the camera's own offset, is taken from the black
   *  field's photo; null when none was given */
  offFrame?: string | null;
  /** problems found while grouping (duplicate pattern, unknown pattern ...): the panel becomes 'error' */
  problems: string[];
}

export interface GroupingResult {
  panels: PanelGroup[];
  /** files that could not be assigned to any panel, each with its reason */
  unassigned: { file: string; reason: string }[];
  manifest: string | null;
}

/** Parse a pattern token: white, black, red, green, blue, gray, gray50, grey25 ... */
export function parsePatternToken(token: string): { pattern: Pattern; level: number | null } | null {
  const t = token.trim().toLowerCase();
  if (t === 'white' || t === 'black' || t === 'red' || t === 'green' || t === 'blue') return { pattern: t, level: null };
  const m = /^gr[ae]y(\d{1,3})?$/.exec(t);
  if (m) {
    const level = m[1] === undefined ? 50 : Number(m[1]);
    if (level <= 0 || level >= 100) return null;
    return { pattern: 'gray', level };
  }
  return null;
}

/** The token of a photo of the switched-off panel (the display-off frame of its black field). */
export function isOffToken(token: string): boolean {
  return token.trim().toLowerCase() === 'off';
}

/** Split a file name by the naming rule (pattern 'off': the panel's display-off frame). */
export function parseFileName(file: string): { panel: string; pattern: Pattern | 'off'; level: number | null } | null {
  const stem = basename(file, extname(file));
  const i = stem.lastIndexOf('_');
  if (i <= 0 || i === stem.length - 1) return null;
  const token = stem.slice(i + 1);
  if (isOffToken(token)) return { panel: stem.slice(0, i), pattern: 'off', level: null };
  const p = parsePatternToken(token);
  if (!p) return null;
  return { panel: stem.slice(0, i), ...p };
}

/** Attach a display-off frame to its panel's group; a second one is a grouping problem. */
function addOffFrame(g: PanelGroup, file: string): void {
  if (g.offFrame) g.problems.push(`two display-off frames for panel ${g.panel}: ${g.offFrame} and ${file}`);
  else g.offFrame = file;
}

/**
 * Walk files and folders (recursively) and return image files in a stable order. Camera raw files in
 * folders are counted, not listed (raw + JPEG pairs are common; the JPEGs are measured).
 */
export function collectImages(inputs: string[]): { files: string[]; missing: string[]; rawSkipped: number } {
  const files: string[] = [];
  const missing: string[] = [];
  let rawSkipped = 0;
  const walk = (p: string) => {
    let st;
    try {
      st = statSync(p);
    } catch {
      missing.push(p);
      return;
    }
    if (st.isDirectory()) {
      const names = readdirSync(p).sort();
      for (const n of names) {
        if (n.startsWith('.')) continue;
        const full = join(p, n);
        let s2;
        try {
          s2 = statSync(full);
        } catch {
          continue;
        }
        if (s2.isDirectory()) {
          // flat-field frames and truth files live beside photos in some lots; skip them by name
          if (n === 'flats' || n === 'truth') continue;
          walk(full);
        } else if (IMAGE_EXTENSIONS.has(extname(n).toLowerCase())) files.push(full);
        else if (CAMERA_RAW_EXTENSIONS.has(extname(n).toLowerCase())) rawSkipped++;
      }
    } else files.push(p);
  };
  for (const i of inputs) walk(i);
  return { files: [...new Set(files)], missing, rawSkipped };
}

const PATTERN_ORDER: Record<Pattern, number> = { white: 0, gray: 1, red: 2, green: 3, blue: 4, black: 5 };

function finishGroups(map: Map<string, PanelGroup>, unassigned: GroupingResult['unassigned']): PanelGroup[] {
  for (const [id, g] of map) {
    // a display-off frame serves the black field of its panel only
    if (g.offFrame && !g.photos.some((p) => p.pattern === 'black')) {
      unassigned.push({ file: g.offFrame, reason: `display-off frame without a black-field photo of panel ${g.panel} to take it from` });
      g.offFrame = null;
    }
    if (g.photos.length === 0) map.delete(id);
  }
  const panels = [...map.values()].sort((a, b) => (a.panel < b.panel ? -1 : a.panel > b.panel ? 1 : 0));
  for (const g of panels) {
    // brighter photos first: their outlines serve the darker photos of the same panel
    g.photos.sort((a, b) => PATTERN_ORDER[a.pattern] - PATTERN_ORDER[b.pattern] || (b.level ?? 0) - (a.level ?? 0) || (a.file < b.file ? -1 : 1));
    const seen = new Map<string, string>();
    for (const p of g.photos) {
      const key = `${p.pattern}${p.level ?? ''}`;
      const prev = seen.get(key);
      if (prev) g.problems.push(`two ${key} photos for panel ${g.panel}: ${prev} and ${p.file}`);
      else seen.set(key, p.file);
    }
  }
  return panels;
}

/** Group by the naming rule. */
export function groupByName(files: string[]): GroupingResult {
  const map = new Map<string, PanelGroup>();
  const unassigned: GroupingResult['unassigned'] = [];
  for (const f of files) {
    const p = parseFileName(f);
    if (!p) {
      unassigned.push({ file: f, reason: 'file name does not follow <panel>_<pattern>.<ext> (pattern: white, black, red, green, blue, gray, grayNN, or off for the switched-off panel)' });
      continue;
    }
    let g = map.get(p.panel);
    if (!g) map.set(p.panel, (g = { panel: p.panel, photos: [], problems: [], offFrame: null }));
    if (p.pattern === 'off') addOffFrame(g, f);
    else g.photos.push({ file: f, pattern: p.pattern, level: p.level, corners: null, note: null });
  }
  return { panels: finishGroups(map, unassigned), unassigned, manifest: null };
}

/** Corners written as "x,y x,y x,y x,y" or "x y; x y; ..." (TL TR BR BL, full-size pixels). */
export function parseCornersText(text: string): Corners | null {
  const nums = text
    .trim()
    .split(/[\s,;]+/)
    .filter((s) => s.length > 0)
    .map(Number);
  if (nums.length !== 8 || nums.some((n) => !Number.isFinite(n))) return null;
  return [
    [nums[0], nums[1]],
    [nums[2], nums[3]],
    [nums[4], nums[5]],
    [nums[6], nums[7]],
  ];
}

/**
 * Group by a manifest CSV with a header row: file, panel, pattern (required), corners, note (optional).
 * File paths are relative to the manifest's folder and may not climb out of it.
 */
export function groupByManifest(manifestPath: string): GroupingResult {
  const text = readTextFile(manifestPath, 'manifest', 'manifest');
  let rows: string[][];
  try {
    rows = parse(text, { skip_empty_lines: true, trim: true, relax_column_count: true, bom: true }) as string[][];
  } catch (e) {
    throw new EvenfieldError('manifest', `not valid CSV: ${(e as Error).message.split('\n')[0]}`, manifestPath);
  }
  if (rows.length === 0) throw new EvenfieldError('manifest', 'the manifest is empty', manifestPath);
  const header = rows[0].map((h) => h.toLowerCase());
  const col = (name: string) => header.indexOf(name);
  for (const required of ['file', 'panel', 'pattern']) {
    if (col(required) < 0) throw new EvenfieldError('manifest', `missing column "${required}" in the header row (need file, panel, pattern; optional corners, note)`, manifestPath);
  }
  const known = new Set(['file', 'panel', 'pattern', 'corners', 'note']);
  const unknownCols = header.filter((h) => !known.has(h));
  if (unknownCols.length > 0) throw new EvenfieldError('manifest', `unknown column "${unknownCols[0]}" (columns: file, panel, pattern, corners, note)`, manifestPath);
  const base = dirname(resolve(manifestPath));
  const map = new Map<string, PanelGroup>();
  const unassigned: GroupingResult['unassigned'] = [];
  const seenFiles = new Map<string, number>();
  for (let r = 1; r < rows.length; r++) {
    const line = r + 1;
    const row = rows[r];
    const get = (name: string) => (col(name) >= 0 ? (row[col(name)] ?? '').trim() : '');
    const fileField = get('file');
    if (!fileField) throw new EvenfieldError('manifest', `line ${line}: empty file name`, manifestPath);
    if (isAbsolute(fileField)) throw new EvenfieldError('manifest', `line ${line}: file "${fileField}" must be relative to the manifest's folder`, manifestPath);
    const full = resolve(base, fileField);
    const rel = relative(base, full);
    if (rel.startsWith('..') || rel.split(sep).includes('..')) {
      throw new EvenfieldError('manifest', `line ${line}: file "${fileField}" lies outside the manifest's folder`, manifestPath);
    }
    const prevLine = seenFiles.get(full);
    if (prevLine !== undefined) throw new EvenfieldError('manifest', `line ${line}: file "${fileField}" is listed twice (also on line ${prevLine})`, manifestPath);
    seenFiles.set(full, line);
    const panel = get('panel');
    if (!panel) throw new EvenfieldError('manifest', `line ${line}: empty panel id`, manifestPath);
    if (!/^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$/.test(panel)) {
      throw new EvenfieldError('manifest', `line ${line}: panel id "${panel}" may contain only letters, digits, '.', '_' and '-' (at most 80)`, manifestPath);
    }
    const off = isOffToken(get('pattern'));
    const pat = off ? null : parsePatternToken(get('pattern'));
    if (!pat && !off) throw new EvenfieldError('manifest', `line ${line}: unknown pattern "${get('pattern')}" (white, black, red, green, blue, gray, grayNN or off)`, manifestPath);
    let corners: Corners | null = null;
    const ct = get('corners');
    if (ct) {
      corners = parseCornersText(ct);
      if (!corners) throw new EvenfieldError('manifest', `line ${line}: corners must be 8 numbers "x,y x,y x,y x,y" (top-left, top-right, bottom-right, bottom-left)`, manifestPath);
    }
    let g = map.get(panel);
    if (!g) map.set(panel, (g = { panel, photos: [], problems: [], offFrame: null }));
    const shown = relative(process.cwd(), full) || full;
    if (!pat) addOffFrame(g, shown);
    else g.photos.push({ file: shown, pattern: pat.pattern, level: pat.level, corners, note: get('note') || null });
  }
  return { panels: finishGroups(map, unassigned), unassigned, manifest: manifestPath };
}
