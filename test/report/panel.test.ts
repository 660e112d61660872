import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { isEvenfieldError } from '../../lib/errors.js';
import { fmtRel, fmtSemu, verdictWord } from '../../lib/report/format.js';
import { panelReportId, renderPanelPdf } from '../../lib/report/panel.js';
import type { PanelReportInput } from '../../lib/report/types.js';
import { fakePanel, fakePhoto, THREE_PATTERNS } from './fabricate.js';

// Reading the PDFs back needs poppler-utils (pdftotext, pdffonts); .ci/run installs it.
const dir = mkdtempSync(join(tmpdir(), 'evenfield-report-'));
let n = 0;
function poppler(tool: 'pdftotext' | 'pdffonts' | 'pdfinfo', pdf: Buffer, args: string[] = []): string {
  const file = join(dir, `r${n++}.pdf`);
  writeFileSync(file, pdf);
  const out = tool === 'pdftotext' ? [file, '-'] : [file];
  return execFileSync(tool, [...args, ...out], { encoding: 'utf8' });
}
const flat = (s: string): string => s.replace(/\s+/g, ' ');
const squeeze = (s: string): string => s.replace(/\s+/g, '');
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('per-panel report (three patterns, fabricated test data)', () => {
  let input: PanelReportInput;
  let pdf: Buffer;
  let ms = 0;
  let text = '';

  beforeAll(async () => {
    input = fakePanel();
    const t0 = performance.now();
    pdf = await renderPanelPdf(input);
    ms = performance.now() - t0;
    text = poppler('pdftotext', pdf);
  });

  it('is a PDF under 1.5 MB (size and time printed)', () => {
    console.log(`panel report: ${(pdf.length / 1024).toFixed(0)} KiB, ${ms.toFixed(0)} ms, ${text.split('\f').length - 1} pages`);
    expect(pdf.subarray(0, 5).toString()).toBe('%PDF-');
    expect(pdf.length).toBeLessThan(1.5 * 1024 * 1024);
  });

  it('same inputs and date give identical bytes; the date is the creation date', async () => {
    const again = await renderPanelPdf(fakePanel());
    expect(Buffer.compare(again, pdf)).toBe(0);
    expect(pdf.includes(Buffer.from('(D:20250314120000Z)'))).toBe(true);
    const later = await renderPanelPdf({ ...fakePanel(), generated: '2025-03-15T08:30:00Z' });
    expect(Buffer.compare(later, pdf)).not.toBe(0);
    expect(later.includes(Buffer.from('(D:20250315083000Z)'))).toBe(true);
    expect(later.includes(Buffer.from('(D:20250314120000Z)'))).toBe(false);
    // the report id does not depend on the date
    expect(panelReportId({ ...input, generated: '2030-01-01T00:00:00Z' })).toBe(panelReportId(input));
  });

  it('text holds the verdict, every reason, every grid value and every blob SEMU', () => {
    const t = flat(text);
    expect(input.panel.verdict).toBe('fail');
    expect(t).toContain(verdictWord('fail'));
    expect(input.panel.reasons.length).toBeGreaterThan(0);
    for (const r of input.panel.reasons) expect(t).toContain(flat(r));
    let points = 0;
    let blobs = 0;
    for (const ph of input.panel.photos) {
      for (const g of ph.grid!.points) {
        expect(t).toContain(`${g.index}: ${fmtRel(g.relative)}`); // on the map
        points++;
      }
      for (const b of ph.blobs) {
        expect(t).toMatch(new RegExp(`B${b.id} [^]*? ${fmtSemu(b.semu).replace('.', '\\.')}`));
        blobs++;
      }
    }
    expect(points).toBe(9 + 25 + 9);
    expect(blobs).toBe(6);
    // the grid tables: every relative value appears once per table row as well as on the map
    for (const ph of input.panel.photos) {
      for (const g of ph.grid!.points) expect(t.split(fmtRel(g.relative)).length - 1).toBeGreaterThanOrEqual(2);
    }
  });

  it('describes the details of each blob in words, not by their field names', () => {
    // an edge glow carries its depth, the peak seen where the map begins and the strip it was carried over
    const t = flat(text);
    expect(t).toMatch(/reaching 9\.20* mm in, peak 12\.50* % where the map begins, carried across the 2\.560* mm strip left out along the edges/);
    // a spot whose region was carried across that strip: the area carried
    expect(t).toMatch(/12\.40* mm across, 31\.50* mm² of it under the strip left out along the edges/);
    for (const key of ['seenPeakPct', 'carriedToEdgeMm', 'depthMm', 'surroundPct', 'borderStripMm2', 'diameterMm']) expect(t).not.toContain(key);
  });

  it('says next to the verdict that it is a camera estimate, and has method, hashes and cautions', () => {
    const pages = text.split('\f');
    expect(flat(pages[0]!)).toMatch(/Camera-based estimate[^]*not with a calibrated photometer/);
    const t = flat(text);
    for (const ph of input.panel.photos) expect(t).toContain(ph.sha256);
    expect(t).toContain(input.criteria.hash);
    expect(t).toContain(panelReportId(input));
    expect(t).toContain('1/60 s, f/8, ISO 100');
    // long names may wrap after a slash
    expect(squeeze(text)).toContain('falloff/fakecam-50mm-f8.json');
    for (const line of input.criteria.lines) expect(squeeze(text)).toContain(squeeze(line.source!));
    expect(t).toMatch(/Mains voltage/);
    expect(t).toMatch(/capacitors/);
    expect(t).toMatch(/Backlight drivers/);
    expect(t).toMatch(/Glass/);
    expect(t).toMatch(/local electrical codes/);
  });

  it('every page names the panel and carries "Page X of Y"', () => {
    const pages = text.split('\f').filter((p) => p.trim().length > 0);
    expect(pages.length).toBeGreaterThanOrEqual(6);
    pages.forEach((p, i) => {
      expect(p).toContain('Panel A17-0042');
      expect(p).toContain(`Page ${i + 1} of ${pages.length}`);
    });
    expect(Number(/Pages:\s+(\d+)/.exec(poppler('pdfinfo', pdf))![1])).toBe(pages.length);
  });

  it('embeds every font it uses', () => {
    const rows = poppler('pdffonts', pdf).trim().split('\n').slice(2);
    expect(rows.length).toBeGreaterThanOrEqual(2);
    for (const r of rows) expect(r, r).toMatch(/DejaVu\S*\s+CID TrueType\s+Identity-H\s+yes yes yes/);
  });
});

describe('per-panel report, other cases', () => {
  it('a passing panel says PASS and names the closest figure', async () => {
    const input = fakePanel([THREE_PATTERNS[0]!]);
    input.panel.reasonDetails = input.panel.reasonDetails.filter((r) => r.severity === 'note');
    input.panel.reasons = [];
    input.panel.verdict = 'pass';
    const t = flat(poppler('pdftotext', await renderPanelPdf(input)));
    expect(t).toContain('PASS');
    expect(t).not.toContain('FAIL');
    expect(t).toMatch(/Every figure judged was inside its limit\. Closest to its limit:/);
  });

  it('a warning that every photo shares is listed once on the first page, with their patterns', async () => {
    const input = fakePanel();
    const w = 'part of the panel is seen 30.4° off its normal: its own angular emission may bias the corner values';
    for (const ph of input.panel.photos) ph.warnings = [w];
    const pages = poppler('pdftotext', await renderPanelPdf(input)).split('\f');
    const first = flat(pages[0]!);
    expect(first).toContain(`White, Grey 50 %, Black: ${w}`);
    expect(first.split(w).length - 1).toBe(1);
  });

  it('a photo that could not be measured and has no pictures still gets its page', async () => {
    const input = fakePanel([THREE_PATTERNS[0]!]);
    const bad = fakePhoto({ ...THREE_PATTERNS[2]!, status: 'error' }, 1).photo;
    Object.assign(bad, { grid: null, uniformity: null, mura: null, blobs: [], corners: null, geometry: null });
    input.panel.photos.push(bad);
    input.panel.verdict = 'error';
    input.panel.reasons = [`black: cannot be measured: ${bad.error}`];
    input.panel.reasonDetails = [{ pattern: 'black', figure: 'photo', value: null, limit: null, margin: null, text: input.panel.reasons[0]!, severity: 'error' }];
    const t = flat(poppler('pdftotext', await renderPanelPdf(input)));
    expect(t).toContain('NOT JUDGED');
    expect(t).toContain('This photo could not be measured (too-dark): panel signal lost in the noise floor');
    expect(t).toContain(input.panel.reasons[0]!);
  });

  it('accepts artifacts as an array parallel to the photos, and a calibrated map in cd/m²', async () => {
    const input = fakePanel([THREE_PATTERNS[0]!]);
    const art = input.artifacts as Record<string, import('../../lib/report/types.js').PhotoArtifacts>;
    const only = art[input.panel.photos[0]!.file]!;
    only.calibration = { cdPerM2AtRelative1: 250, source: 'reference meter, test value' };
    const t = flat(poppler('pdftotext', await renderPanelPdf({ ...input, artifacts: [only] })));
    expect(t).toContain('Luminance, cd/m²');
    const centre = input.panel.photos[0]!.grid!.points.find((g) => g.u === 0.5 && g.v === 0.5)!;
    expect(t).toContain(`5: ${(centre.relative * 250).toFixed(0)}`);
    expect(t).toContain('reference meter, test value');
  });

  it('rejects an invalid date and a map whose data does not match its size', async () => {
    const input = fakePanel([THREE_PATTERNS[0]!]);
    await expect(renderPanelPdf({ ...input, generated: 'not a date' })).rejects.toSatisfy((e) => isEvenfieldError(e) && /valid date/.test(e.message));
    const art = Object.values(input.artifacts as Record<string, import('../../lib/report/types.js').PhotoArtifacts>)[0]!;
    art.relMap = { width: 10, height: 10, data: new Float32Array(99) };
    await expect(renderPanelPdf(input)).rejects.toSatisfy((e) => isEvenfieldError(e) && /relMap/.test(e.message));
  });

  it('the report id changes when any measured value changes', () => {
    const a = fakePanel([THREE_PATTERNS[0]!]);
    const b = fakePanel([THREE_PATTERNS[0]!]);
    expect(panelReportId(a)).toBe(panelReportId(b));
    b.panel.photos[0]!.grid!.points[3]!.relative += 1e-6;
    expect(panelReportId(a)).not.toBe(panelReportId(b));
    const c = fakePanel([THREE_PATTERNS[0]!]);
    const map = Object.values(c.artifacts as Record<string, { relMap: { data: Float32Array } }>)[0]!.relMap;
    map.data[100] = map.data[100]! + 0.01;
    expect(panelReportId(a)).not.toBe(panelReportId(c));
  });
});
