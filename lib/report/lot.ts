// The lot summary PDF: who, where and when; counts and yield; the distribution of each key figure
// across the lot against its limit; one line per panel, failing panels first.

import type { PanelResult, PhotoResult, Reason } from '../types.js';
import { worstMargin } from '../judge/index.js';
import {
  createDoc,
  drawPageFurniture,
  drawPairs,
  drawTable,
  drawVerdictSymbol,
  finish,
  fitLine,
  Flow,
  MUTED,
  PAGE,
  textAt,
} from './doc.js';
import { figureDecimals, figureName, fmtDate, fmtLimit, fmtNum, fmtPct, patternName, shortHash, verdictWord } from './format.js';
import { reportId } from './ids.js';
import { drawHistogram } from './plots.js';
import { ESTIMATE_NOTICE } from './texts.js';
import { generatedDate } from './panel.js';
import type { LotFigure, LotReportInput } from './types.js';

/** The figures the lot summary plots by default, per pattern (and grey level). */
const DEFAULT_FIGURES: Array<{
  key: string;
  label: string;
  unit: string;
  limitKind: 'max' | 'min';
  get: (p: PhotoResult) => number | null;
}> = [
  { key: 'nonuniformityPct', label: 'luminance non-uniformity', unit: '%', limitKind: 'max', get: (p) => p.uniformity?.nonuniformityPct ?? null },
  { key: 'maxDeviationFromCentrePct', label: 'largest deviation from centre', unit: '%', limitKind: 'max', get: (p) => p.uniformity?.maxDeviationFromCentrePct ?? null },
  { key: 'maxDuvFromCentre', label: "max \u0394u'v' from centre", unit: '', limitKind: 'max', get: (p) => p.uniformity?.maxDuvFromCentre ?? null },
  { key: 'maxSemu', label: 'largest SEMU', unit: 'SEMU', limitKind: 'max', get: (p) => p.mura?.maxSemu ?? null },
];

function photoKey(p: PhotoResult): string {
  return p.patternLevel !== null ? `${p.pattern}-${p.patternLevel}` : p.pattern;
}

/**
 * Key figures across the panels: for every pattern present, non-uniformity, deviation from centre,
 * Δu'v' and largest SEMU. A figure's limit is taken from the first reason (any panel) with the same
 * pattern and figure name and a limit; `limits` (keyed "pattern:figure", e.g. "white:nonuniformityPct")
 * overrides it. Figures without any value are left out.
 */
export function lotFigures(
  panels: PanelResult[],
  limits: Record<string, { limit: number | null; limitKind?: 'max' | 'min'; source?: string | null }> = {},
): LotFigure[] {
  const keys: Array<{ key: string; pattern: PhotoResult['pattern']; level: number | null }> = [];
  for (const panel of panels) {
    for (const ph of panel.photos) {
      const k = photoKey(ph);
      if (!keys.some((x) => x.key === k)) keys.push({ key: k, pattern: ph.pattern, level: ph.patternLevel });
    }
  }
  const out: LotFigure[] = [];
  for (const pk of keys) {
    for (const f of DEFAULT_FIGURES) {
      const values = panels.map((panel) => {
        const ph = panel.photos.find((x) => photoKey(x) === pk.key && x.status === 'ok');
        const v = ph ? f.get(ph) : null;
        return { panel: panel.panel, value: v !== null && Number.isFinite(v) ? v : null };
      });
      if (values.every((v) => v.value === null)) continue;
      const override = limits[`${pk.pattern}:${f.key}`] ?? limits[`${pk.key}:${f.key}`];
      let limit: number | null = null;
      if (override) limit = override.limit;
      else {
        for (const panel of panels) {
          const r = panel.reasonDetails.find((x) => x.pattern === pk.pattern && x.figure === f.key && x.limit !== null);
          if (r) {
            limit = r.limit;
            break;
          }
        }
      }
      out.push({
        key: `${pk.key}:${f.key}`,
        label: `${patternName(pk.pattern, pk.level)}: ${f.label}`,
        unit: f.unit,
        limit,
        limitKind: override?.limitKind ?? f.limitKind,
        limitSource: override?.source ?? null,
        decimals: figureDecimals(f.key),
        values,
      });
    }
  }
  return out;
}

/**
 * The panel's judged figure closest to (or furthest beyond) its limit, relative to the limit, as the
 * judge defines it (errors, report-only figures and borderline notes left out).
 */
export function worstReason(panel: PanelResult): { reason: Reason; relative: number } | null {
  return worstMargin(panel.reasonDetails);
}

const VERDICT_ORDER = { fail: 0, error: 1, pass: 2 } as const;

/** Failing panels first, then those not judged, then passing; within each, closest to the limit first. */
export function orderPanels(panels: PanelResult[]): PanelResult[] {
  const rel = (p: PanelResult): number => worstReason(p)?.relative ?? Infinity;
  return [...panels].sort((a, b) => VERDICT_ORDER[a.verdict] - VERDICT_ORDER[b.verdict] || rel(a) - rel(b) || a.panel.localeCompare(b.panel));
}

export function lotReportId(input: LotReportInput): string {
  return reportId({
    kind: 'lot-report',
    lot: input.lot,
    panels: input.panels,
    figures: input.figures ?? null,
    criteria: input.criteria,
    toolVersion: input.toolVersion,
  });
}

export async function renderLotPdf(input: LotReportInput): Promise<Buffer> {
  const generated = generatedDate(input.generated);
  const id = lotReportId(input);
  const lotName = input.lot.lot ?? 'unnamed lot';
  const doc = createDoc({
    title: `Lot summary: ${lotName}`,
    subject: `Display uniformity inspection of lot ${lotName}: ${input.panels.length} panels.`,
    keywords: `display uniformity, mura, lot ${lotName}, report ${id}`,
    creator: `evenfield ${input.toolVersion}`,
    generated,
  });
  const flow = new Flow(doc);
  flow.newPage();

  textAt(doc, 'Lot summary: display uniformity inspection', PAGE.left, flow.y, PAGE.contentWidth, { font: 'Sans-Bold', size: 17 });
  flow.gap(28);

  drawPairs(flow, [
    ['Lot', lotName],
    ['Date', input.lot.date ?? '\u2013'],
    ['Station', input.lot.station ?? '\u2013'],
    ['Operator', input.lot.operator ?? '\u2013'],
    ['Criteria', `${input.criteria.name} (SHA-256 ${shortHash(input.criteria.hash, 16)}\u2026)`],
    ['Report generated', fmtDate(generated)],
    ['Software', `evenfield ${input.toolVersion}`],
    ['Report id', { text: id, font: 'Mono' }],
  ], 110, 8.5);
  flow.gap(4);

  // counts and yield
  const n = input.panels.length;
  const passed = input.panels.filter((p) => p.verdict === 'pass').length;
  const failed = input.panels.filter((p) => p.verdict === 'fail').length;
  const notJudged = n - passed - failed;
  const judged = passed + failed;
  const yieldPct = judged > 0 ? (100 * passed) / judged : null;

  flow.heading('Counts and yield', 2, 70);
  flow.ensure(62);
  const boxes: Array<[string, string, 'pass' | 'fail' | 'error' | null]> = [
    ['Panels', String(n), null],
    ['Passed', String(passed), 'pass'],
    ['Failed', String(failed), 'fail'],
    ['Not judged', String(notJudged), 'error'],
    ['Yield', yieldPct === null ? '\u2013' : `${fmtPct(yieldPct)} %`, null],
  ];
  const bw = PAGE.contentWidth / boxes.length;
  boxes.forEach(([label, value, v], i) => {
    const x = PAGE.left + i * bw;
    doc.rect(x + 2, flow.y, bw - 4, 46).lineWidth(0.6).strokeColor('#999999').stroke();
    if (v) drawVerdictSymbol(doc, v, x + 14, flow.y + 13, 6);
    textAt(doc, label, x + (v ? 24 : 8), flow.y + 8, bw - 30, { size: 8, colour: MUTED });
    textAt(doc, value, x + 8, flow.y + 21, bw - 16, { font: 'Sans-Bold', size: 17 });
  });
  flow.y += 52;
  flow.text(
    `Yield = passed \u00f7 panels judged (passed + failed). Panels not judged (a photo could not be measured) are counted separately and listed below. ${ESTIMATE_NOTICE}`,
    { size: 7.4, colour: MUTED, after: 6 },
  );

  // distributions
  const figures = input.figures ?? lotFigures(input.panels);
  if (figures.length > 0) {
    flow.heading('Distribution of key figures across the lot', 2, 170);
    flow.text(
      'Bars: number of panels per interval; ticks under the axis: one per panel. The dashed line is the limit; bars and ticks beyond it are hatched and longer.',
      { size: 7.4, colour: MUTED, after: 4 },
    );
    const plotW = (PAGE.contentWidth - 18) / 2;
    const plotH = 150;
    for (let i = 0; i < figures.length; i += 2) {
      flow.ensure(plotH + 8);
      for (let j = 0; j < 2 && i + j < figures.length; j++) {
        const f = figures[i + j]!;
        const vals = f.values.map((v) => v.value).filter((v): v is number => v !== null && Number.isFinite(v));
        const out = f.limit === null ? 0 : vals.filter((v) => (f.limitKind === 'max' ? v > f.limit! : v < f.limit!)).length;
        const sorted = [...vals].sort((a, b) => a - b);
        const median = sorted.length ? sorted[Math.floor((sorted.length - 1) / 2)]! : null;
        const unit = f.unit ? ` ${f.unit}` : '';
        const fx = (x: number | null | undefined): string => (x === null || x === undefined ? '\u2013' : x.toFixed(f.decimals ?? 2));
        drawHistogram(doc, { x: PAGE.left + j * (plotW + 18), y: flow.y, w: plotW, h: plotH }, {
          title: f.label,
          subtitle:
            `n = ${vals.length}; median ${fx(median)}${unit}; range ${fx(sorted[0])}\u2013${fx(sorted[sorted.length - 1])}${unit}` +
            (f.limit !== null ? `; ${out} beyond the limit` : '; no limit set'),
          xLabel: f.unit ? `${f.label.split(': ').pop()}, ${f.unit}` : f.label.split(': ').pop()!,
          values: vals,
          limit: f.limit,
          limitKind: f.limitKind,
          limitLabel: f.limit !== null ? `limit ${f.limitKind === 'max' ? '\u2264' : '\u2265'} ${fmtLimit(f.limit)}${unit}` : undefined,
        });
      }
      flow.y += plotH + 10;
    }
  }

  // one line per panel
  flow.heading('Panels (failing first)', 2, 60);
  const ordered = orderPanels(input.panels);
  const cols = [
    { header: '#', width: 24, align: 'right' as const },
    { header: 'Panel', width: 70 },
    { header: 'Verdict', width: 66 },
    { header: 'Worst margin: figure', width: 116 },
    { header: 'Value', width: 42, align: 'right' as const },
    { header: 'Limit', width: 36, align: 'right' as const },
    { header: 'Margin', width: 42, align: 'right' as const },
  ];
  const reasonW = PAGE.contentWidth - cols.reduce((a, c) => a + c.width, 0);
  const rows = ordered.map((p, i) => {
    const w = worstReason(p)?.reason ?? null;
    const d = w ? figureDecimals(w.figure) : 2;
    const fx = (x: number | null): string => (x === null ? '\u2013' : x.toFixed(d));
    const first = p.reasons[0] ?? (p.verdict === 'pass' ? 'all criteria met' : '');
    return [
      String(i + 1),
      fitLine(doc, p.panel, 70 - 6, { size: 7.4 }),
      { text: verdictWord(p.verdict), font: p.verdict === 'pass' ? ('Sans' as const) : ('Sans-Bold' as const) },
      w ? fitLine(doc, `${w.pattern ? `${patternName(w.pattern)}: ` : ''}${figureName(w.figure)}`, 116 - 6, { size: 7.4 }) : '\u2013',
      w ? fx(w.value) : '\u2013',
      w ? fmtLimit(w.limit) : '\u2013',
      w ? { text: fx(w.margin), font: w.margin !== null && w.margin < 0 ? ('Sans-Bold' as const) : ('Sans' as const) } : '\u2013',
      fitLine(doc, first, reasonW - 6, { size: 7.4 }),
    ];
  });
  drawTable(flow, [...cols, { header: 'First reason', width: reasonW }], rows, {
    size: 7.4,
    decorate: (row, col, box) => {
      if (col !== 2) return;
      const v = ordered[row]!.verdict;
      doc.font(v === 'pass' ? 'Sans' : 'Sans-Bold').fontSize(7.4);
      const tw = doc.widthOfString(verdictWord(v));
      drawVerdictSymbol(doc, v, box.x + 3 + tw + 8, box.y + box.h / 2, 3.6);
    },
  });
  flow.text('Worst margin: the figure closest to (or furthest beyond) its limit, relative to the limit; a negative margin means the limit was exceeded. Each panel has its own report with the evidence.', {
    size: 7.2,
    colour: MUTED,
  });

  if (input.unassigned && input.unassigned.length > 0) {
    flow.heading('Photos not assigned to any panel', 2, 50);
    drawTable(
      flow,
      [
        { header: 'File', width: 200 },
        { header: 'Why', width: PAGE.contentWidth - 200 },
      ],
      input.unassigned.map((u) => [u.file, u.reason]),
      { size: 7.4 },
    );
  }

  drawPageFurniture(doc, `Lot ${lotName} \u00b7 lot summary`, `Lot ${lotName}`, `Summary ${shortHash(id)}`);
  return finish(doc);
}
