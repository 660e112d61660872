// One panel: measure its photos (bright first, so their outline can serve the dark ones), judge
// the panel against the criteria, write its PDF. Runs in a worker thread or in the main thread.

import { join } from 'node:path';
import { measurePhoto } from '../pipeline/index.js';
import type { MeasureOptions, PhotoArtifacts, SharedGeometry } from '../pipeline/index.js';
import { judgePanel } from '../judge/index.js';
import type { Criteria } from '../judge/index.js';
import { renderPanelPdf } from '../report/index.js';
import type { CriteriaSummary, PanelReportInput } from '../report/index.js';
import { writeFileAtomic } from '../io/index.js';
import type { PanelResult, PhotoResult } from '../types.js';
import type { PanelGroup } from './grouping.js';

export interface RunContext {
  /** measurement options shared by every photo; pattern, corners and shared geometry are per photo */
  measure: Omit<MeasureOptions, 'pattern' | 'patternLevel' | 'corners' | 'shared' | 'offFrame'>;
  criteria: Criteria;
  criteriaHash: string;
  criteriaSource: string;
  criteriaSummary: CriteriaSummary;
  outDir: string;
  pdf: boolean;
  toolVersion: string;
  /** ISO date written into reports */
  date: string;
  lot: { id: string | null; station: string | null; operator: string | null };
}

export interface PanelTask {
  group: PanelGroup;
  ctx: RunContext;
}

export interface PanelOutcome {
  result: PanelResult;
  pdfFile: string | null;
  pdfBytes: number;
  msMeasure: number;
  msPdf: number;
}

const BRIGHT = new Set(['white', 'gray', 'red', 'green', 'blue']);

/** The batch's own PDF in the same folder (SUMMARY_PDF in run.ts): a panel may not take its name. */
const LOT_SUMMARY_PDF = 'lot-summary.pdf';

export function pdfNameFor(panel: string): string {
  const name = `${panel}.pdf`;
  // compared without case: on a case-insensitive file system "Lot-Summary.pdf" is the same file
  return name.toLowerCase() === LOT_SUMMARY_PDF ? `${panel}.panel.pdf` : name;
}

export async function runPanel(task: PanelTask): Promise<PanelOutcome> {
  const { group, ctx } = task;
  const t0 = performance.now();
  const photos: PhotoResult[] = [];
  const artifacts: (PhotoArtifacts | null)[] = [];
  let shared: SharedGeometry | null = null;
  for (const entry of group.photos) {
    const m = await measurePhoto(entry.file, {
      ...ctx.measure,
      pattern: entry.pattern,
      patternLevel: entry.level,
      corners: entry.corners,
      shared: entry.pattern === 'black' ? shared : null,
      offFrame: entry.pattern === 'black' ? (group.offFrame ?? null) : null,
    });
    photos.push(m.result);
    artifacts.push(m.artifacts);
    if (
      BRIGHT.has(entry.pattern) &&
      m.result.status === 'ok' &&
      m.result.corners &&
      m.result.decode &&
      (shared === null || m.cornerStrength > shared.strength || m.result.geometry?.cornersSource === 'manual')
    ) {
      shared = {
        corners: m.result.corners,
        file: entry.file,
        strength: m.result.geometry?.cornersSource === 'manual' ? 1 : m.cornerStrength,
        imageWidth: m.result.decode.width,
        imageHeight: m.result.decode.height,
        edgeBowPx: m.result.geometry?.edgeBowPx ?? null,
      };
    }
  }
  const judged = judgePanel(photos, ctx.criteria);
  const reasons = [...group.problems, ...judged.reasons];
  const verdict = group.problems.length > 0 ? 'error' : judged.verdict;
  const result: PanelResult = {
    panel: group.panel,
    verdict,
    reasons,
    reasonDetails: [
      ...group.problems.map((text) => ({ pattern: null, figure: 'grouping', value: null, limit: null, margin: null, text, severity: 'error' as const })),
      ...judged.reasonDetails,
    ],
    photos,
  };
  const t1 = performance.now();
  let pdfFile: string | null = null;
  let pdfBytes = 0;
  if (ctx.pdf) {
    const input: PanelReportInput = {
      panel: result,
      artifacts: artifacts.map((a) => a ?? null),
      criteria: ctx.criteriaSummary,
      toolVersion: ctx.toolVersion,
      generated: ctx.date,
      lot: { lot: ctx.lot.id, date: ctx.date.slice(0, 10), station: ctx.lot.station, operator: ctx.lot.operator },
    };
    const bytes = await renderPanelPdf(input);
    pdfFile = join(ctx.outDir, pdfNameFor(group.panel));
    await writeFileAtomic(pdfFile, bytes);
    pdfBytes = bytes.length;
  }
  const t2 = performance.now();
  return { result, pdfFile, pdfBytes, msMeasure: t1 - t0, msPdf: t2 - t1 };
}

/** Default export for the worker pool. */
export default runPanel;
