import { afterAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { lotFigures, lotReportId, orderPanels, renderLotPdf } from '../../lib/report/lot.js';
import { fakeLot } from './fabricate.js';

const dir = mkdtempSync(join(tmpdir(), 'evenfield-lot-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
function pdftotext(pdf: Buffer, layout = false): string {
  const file = join(dir, `lot-${Math.random().toString(36).slice(2)}.pdf`);
  writeFileSync(file, pdf);
  return execFileSync('pdftotext', [...(layout ? ['-layout'] : []), file, '-'], { encoding: 'utf8' });
}

describe('lot summary (fabricated test data)', () => {
  it('counts, yield, fields, one line per panel with failing panels first; deterministic', async () => {
    const input = fakeLot(40);
    const t0 = performance.now();
    const pdf = await renderLotPdf(input);
    const ms = performance.now() - t0;
    const text = pdftotext(pdf, true);
    console.log(`lot summary: ${input.panels.length} panels, ${(pdf.length / 1024).toFixed(0)} KiB, ${ms.toFixed(0)} ms`);

    const passed = input.panels.filter((p) => p.verdict === 'pass').length;
    const failed = input.panels.filter((p) => p.verdict === 'fail').length;
    const errors = input.panels.filter((p) => p.verdict === 'error').length;
    expect(passed + failed + errors).toBe(40);
    expect(failed).toBeGreaterThan(0);
    expect(errors).toBe(1);
    const flat = text.replace(/\s+/g, ' ');
    for (const s of ['LOT-2025-03-A', 'Bench 2', 'J. Doe', '2025-03-14', 'lot/stray.jpg', lotReportId(input)]) expect(flat).toContain(s);
    expect(flat).toContain(`${((100 * passed) / (passed + failed)).toFixed(1)} %`);

    // one line per panel, in the order failing, not judged, passing
    const lines = text.split('\n');
    const rowOf = (panel: string): number => lines.findIndex((l) => new RegExp(`^\\s*\\d+\\s+${panel}\\s`).test(l));
    const rows = input.panels.map((p) => ({ p, at: rowOf(p.panel), page: text.slice(0, text.indexOf(lines[rowOf(p.panel)]!)).split('\f').length }));
    for (const r of rows) expect(r.at, r.p.panel).toBeGreaterThanOrEqual(0);
    const key = (r: (typeof rows)[number]): number => r.page * 1e6 + r.at;
    const lastFail = Math.max(...rows.filter((r) => r.p.verdict === 'fail').map(key));
    const firstOther = Math.min(...rows.filter((r) => r.p.verdict !== 'fail').map(key));
    expect(lastFail).toBeLessThan(firstOther);
    for (const r of rows) expect(lines[r.at]).toContain(r.p.verdict === 'pass' ? 'PASS' : r.p.verdict === 'fail' ? 'FAIL' : 'NOT JUDGED');

    const again = await renderLotPdf(fakeLot(40));
    expect(Buffer.compare(again, pdf)).toBe(0);
    const pages = text.split('\f').filter((p) => p.trim());
    pages.forEach((p, i) => expect(p).toContain(`Page ${i + 1} of ${pages.length}`));
  });

  it('figures per pattern take their limit from the judged reasons; a panel not measured has no value', () => {
    const input = fakeLot(12);
    const figures = lotFigures(input.panels);
    const nonu = figures.find((f) => f.key === 'white:nonuniformityPct')!;
    expect(nonu.limit).toBe(25);
    expect(nonu.limitKind).toBe('max');
    expect(nonu.values.map((v) => v.value)).toEqual(input.panels.map((p) => p.photos[0]!.uniformity!.nonuniformityPct));
    const blackSemu = figures.find((f) => f.key === 'black:maxSemu')!;
    expect(blackSemu.limit).toBeNull();
    expect(blackSemu.values[7]!.value).toBeNull(); // panel 8's black photo could not be measured
    const override = lotFigures(input.panels, { 'black:maxSemu': { limit: 3, source: 'test' } });
    expect(override.find((f) => f.key === 'black:maxSemu')!.limit).toBe(3);
  });

  it('orders failing panels first, then not judged, then passing, each by relative margin', () => {
    const ordered = orderPanels(fakeLot(30).panels);
    const rank = { fail: 0, error: 1, pass: 2 } as const;
    for (let i = 1; i < ordered.length; i++) expect(rank[ordered[i]!.verdict]).toBeGreaterThanOrEqual(rank[ordered[i - 1]!.verdict]);
    const passing = ordered.filter((p) => p.verdict === 'pass');
    const rel = (p: (typeof passing)[number]): number =>
      Math.min(...p.reasonDetails.filter((r) => r.margin !== null && r.limit).map((r) => r.margin! / Math.abs(r.limit!)));
    for (let i = 1; i < passing.length; i++) expect(rel(passing[i]!)).toBeGreaterThanOrEqual(rel(passing[i - 1]!));
  });
});
