import { mkdtempSync, mkdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { collectImages, groupByManifest, groupByName, parseCornersText, parseFileName, parsePatternToken } from '../../lib/batch/grouping.js';
import { resultsCsv, safeCell } from '../../lib/batch/outputs.js';
import type { PanelResult } from '../../lib/types.js';

describe('file naming rule <panel>_<pattern>.<ext>', () => {
  it('splits at the last underscore and reads gray levels', () => {
    expect(parseFileName('lot7/KX27_0412_gray50.jpg')).toEqual({ panel: 'KX27_0412', pattern: 'gray', level: 50 });
    expect(parseFileName('A-1_white.PNG')).toEqual({ panel: 'A-1', pattern: 'white', level: null });
    expect(parseFileName('A-1_grey.jpg')).toEqual({ panel: 'A-1', pattern: 'gray', level: 50 });
    expect(parseFileName('A-1_purple.jpg')).toBeNull();
    expect(parseFileName('white.jpg')).toBeNull();
    expect(parsePatternToken('gray100')).toBeNull();
  });

  it('groups photos into panels, bright photos first, and flags a pattern photographed twice', () => {
    const g = groupByName(['x/P2_black.jpg', 'x/P2_white.jpg', 'x/P1_gray25.jpg', 'x/P1_gray75.jpg', 'y/P1_gray75.jpg', 'x/notes.jpg']);
    expect(g.panels.map((p) => p.panel)).toEqual(['P1', 'P2']);
    expect(g.panels[1].photos.map((p) => p.pattern)).toEqual(['white', 'black']);
    expect(g.panels[0].photos.map((p) => p.level)).toEqual([75, 75, 25]);
    expect(g.panels[0].problems[0]).toMatch(/two gray75 photos for panel P1/);
    expect(g.unassigned).toEqual([{ file: 'x/notes.jpg', reason: expect.stringContaining('<panel>_<pattern>') }]);
  });

  it('walks folders recursively, skipping flats/ and truth/ folders', () => {
    const d = mkdtempSync(join(tmpdir(), 'ef-walk-'));
    mkdirSync(join(d, 'a', 'b'), { recursive: true });
    mkdirSync(join(d, 'flats'));
    for (const f of ['a/P1_white.jpg', 'a/b/P1_black.png', 'flats/f1.jpg', 'a/readme.txt']) writeFileSync(join(d, f), 'x');
    const { files, missing } = collectImages([d, join(d, 'nope')]);
    expect(files.map((f) => f.slice(d.length + 1)).sort()).toEqual(['a/P1_white.jpg', 'a/b/P1_black.png']);
    expect(missing).toEqual([join(d, 'nope')]);
  });
});

describe('manifest', () => {
  function manifest(text: string): string {
    const d = mkdtempSync(join(tmpdir(), 'ef-man-'));
    const p = join(d, 'manifest.csv');
    writeFileSync(p, text);
    return p;
  }
  it('reads file, panel, pattern, corners and note', () => {
    const g = groupByManifest(manifest('file,panel,pattern,corners,note\nphotos/a.jpg,P1,white,"1,2 30,2 30,20 1,20",first\nphotos/b.jpg,P1,black,,\n'));
    expect(g.panels).toHaveLength(1);
    expect(g.panels[0].photos[0].corners).toEqual([
      [1, 2],
      [30, 2],
      [30, 20],
      [1, 20],
    ]);
    expect(g.panels[0].photos[0].note).toBe('first');
  });
  it('names the file and line for each problem', () => {
    expect(() => groupByManifest(manifest('file,panel\na.jpg,P1\n'))).toThrow(/manifest\.csv: missing column "pattern"/);
    expect(() => groupByManifest(manifest('file,panel,pattern\n../x.jpg,P1,white\n'))).toThrow(/line 2: file "\.\.\/x\.jpg" lies outside/);
    expect(() => groupByManifest(manifest('file,panel,pattern\na.jpg,P1,white\na.jpg,P2,black\n'))).toThrow(/line 3: file "a\.jpg" is listed twice \(also on line 2\)/);
    expect(() => groupByManifest(manifest('file,panel,pattern\na.jpg,P1,mauve\n'))).toThrow(/line 2: unknown pattern "mauve"/);
    expect(() => groupByManifest(manifest('file,panel,pattern\na.jpg,../../etc,white\n'))).toThrow(/line 2: panel id/);
    expect(() => groupByManifest(manifest('file,panel,pattern,corners\na.jpg,P1,white,1 2 3\n'))).toThrow(/line 2: corners must be 8 numbers/);
    expect(() => groupByManifest(manifest('file,panel,pattern,colour\na.jpg,P1,white,x\n'))).toThrow(/unknown column "colour"/);
  });
  it('says whether the manifest is missing or cannot be read (common practice: missing files are not-found)', () => {
    const d = mkdtempSync(join(tmpdir(), 'ef-man-'));
    expect(() => groupByManifest(join(d, 'none.csv'))).toThrow(expect.objectContaining({ code: 'not-found', message: expect.stringMatching(/none\.csv: manifest not found$/) }));
    // a folder where the file should be
    expect(() => groupByManifest(d)).toThrow(expect.objectContaining({ code: 'manifest', message: expect.stringMatching(/cannot read the manifest \(EISDIR\)/) }));
  });
  it('parses corners written with commas, spaces or semicolons', () => {
    expect(parseCornersText('1 2; 3 4; 5 6; 7 8')).toEqual([
      [1, 2],
      [3, 4],
      [5, 6],
      [7, 8],
    ]);
    expect(parseCornersText('1,2,3')).toBeNull();
  });
});

describe('results.csv', () => {
  it('guards text cells against spreadsheet formulas (common practice: prefix an apostrophe)', () => {
    expect(safeCell('=HYPERLINK("x")')).toBe(`'=HYPERLINK("x")`);
    expect(safeCell('+1')).toBe("'+1");
    expect(safeCell('@SUM(A1)')).toBe("'@SUM(A1)");
    expect(safeCell('KX27-0412')).toBe('KX27-0412');
    const panel: PanelResult = { panel: '=cmd', verdict: 'error', reasons: ['-2+3'], reasonDetails: [], photos: [] };
    const csv = resultsCsv([panel]);
    expect(csv.split('\n')[1]).toBe(`'=cmd,error,0,'-2+3`);
  });
});
