import { afterAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createDoc, drawPageFurniture, drawTable, finish, fitLine, Flow, measure, PAGE, textAt } from '../../lib/report/doc.js';

const dir = mkdtempSync(join(tmpdir(), 'evenfield-doc-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const meta = { title: 't', subject: 's', keywords: 'k', creator: 'test', generated: new Date('2025-01-02T03:04:05Z') };

describe('page primitives', () => {
  it('textAt reports the height measure() predicts', async () => {
    const doc = createDoc(meta);
    const flow = new Flow(doc);
    flow.newPage();
    const samples = ['short', 'a longer line that will wrap at a narrow width, several times over', 'Δu\'v\' ≤ 0.004 · SEMU 1.5 — µ² ±'];
    for (const s of samples) {
      for (const w of [60, 200, 500]) {
        for (const size of [7, 9.5, 17]) {
          const h = measure(doc, s, w, { size });
          expect(textAt(doc, s, PAGE.left, 100, w, { size })).toBeCloseTo(h, 6);
        }
      }
    }
    expect(textAt(doc, '', PAGE.left, 100, 100)).toBe(0);
    await finish(doc);
  });

  it('fitLine cuts with an ellipsis only when needed', () => {
    const doc = createDoc(meta);
    doc.addPage();
    expect(fitLine(doc, 'fits', 200, { size: 8 })).toBe('fits');
    const cut = fitLine(doc, 'this sentence is far too long for forty points', 40, { size: 8 });
    expect(cut.endsWith('…')).toBe(true);
    doc.font('Sans').fontSize(8);
    expect(doc.widthOfString(cut)).toBeLessThanOrEqual(40);
  });

  it('a long table flows over pages, repeating its header, and every page gets "Page X of Y"', async () => {
    const doc = createDoc(meta);
    const flow = new Flow(doc);
    flow.newPage();
    const rows = Array.from({ length: 150 }, (_, i) => [String(i + 1), `row ${i + 1}`]);
    drawTable(flow, [{ header: 'Number', width: 60 }, { header: 'Label', width: 200 }], rows);
    drawPageFurniture(doc, 'header text', 'left text', 'centre text');
    const pdf = await finish(doc);
    const file = join(dir, 'table.pdf');
    writeFileSync(file, pdf);
    const pages = execFileSync('pdftotext', [file, '-'], { encoding: 'utf8' }).split('\f').filter((p) => p.trim());
    expect(pages.length).toBeGreaterThanOrEqual(3);
    pages.forEach((p, i) => {
      expect(p).toContain('Number');
      expect(p).toContain(`Page ${i + 1} of ${pages.length}`);
      expect(p).toContain('left text');
      if (i > 0) expect(p).toContain('header text');
    });
    const all = pages.join('\n');
    for (const r of rows) expect(all).toContain(r[1]!);
  });
});
