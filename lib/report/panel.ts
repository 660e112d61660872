// The per-panel PDF report: verdict and reasons first, then the evidence per pattern, then the
// method and traceability, then the cautions. Pure: returns the bytes; the caller writes them.

import type { Blob, GridPoint, LeftOutFinding, PhotoResult, Plane, Reason } from '../types.js';
import { EvenfieldError } from '../errors.js';
import { worstMargin } from '../judge/index.js';
import { COLOUR_MAPS, type ColourMap, falseColour } from './colourmaps.js';
import {
  type Cell,
  type Column,
  createDoc,
  type Doc,
  drawPageFurniture,
  drawPairs,
  drawTable,
  tableHeight,
  drawVerdictSymbol,
  finish,
  Flow,
  INK,
  measure,
  MUTED,
  PAGE,
  RULE,
  textAt,
  VERDICT_COLOUR,
  VERDICT_TINT,
} from './doc.js';
import {
  fmtCd,
  fmtContrast,
  fmtDate,
  fmtExposureTime,
  fmtLimit,
  fmtMm,
  fmtNum,
  fmtPct,
  fmtRel,
  fmtSemu,
  fmtUv,
  patternName,
  trim,
  placeWords,
  shortHash,
  verdictWord,
} from './format.js';
import { reportId } from './ids.js';
import { centreProfile, colourBarRaster, contrastRange, luminanceRange, scalePlane } from './mapdata.js';
import { drawLinePlot, niceTicks, tickLabel } from './plots.js';
import { encodePhotoJpeg, encodePng } from './png.js';
import { CONDITIONS, DEFINITIONS, ESTIMATE_DETAIL, ESTIMATE_NOTICE, SAFETY, SAFETY_INTRO } from './texts.js';
import type { PanelReportInput, PhotoArtifacts } from './types.js';

/** Photo long side in the PDF: about 200 dpi at the size it is printed. */
const PHOTO_MAX_PX = 700;

interface PreparedPhoto {
  photo: PhotoResult;
  art: PhotoArtifacts;
  number: number;
  photoJpeg: { jpeg: Buffer; width: number; height: number } | null;
  lum: { png: Buffer; width: number; height: number; range: [number, number]; clipped: boolean; plane: Plane } | null;
  contrast: { png: Buffer; width: number; height: number; range: [number, number]; clipped: boolean } | null;
  calibrated: boolean;
  sizeMm: { width: number; height: number; known: boolean } | null;
}

/** The unique id of a panel report: SHA-256 over all its inputs except the generation date. */
export function panelReportId(input: PanelReportInput): string {
  return reportId({
    kind: 'panel-report',
    panel: input.panel,
    artifacts: input.artifacts,
    criteria: input.criteria,
    toolVersion: input.toolVersion,
    lot: input.lot ?? null,
    colourMap: input.colourMap ?? 'viridis',
  });
}

/** The generation date as a Date; throws on anything that is not a valid date. */
export function generatedDate(d: Date | string): Date {
  const date = d instanceof Date ? d : new Date(d);
  if (Number.isNaN(date.getTime())) throw new EvenfieldError('internal', `report: generated date ${String(d)} is not a valid date`);
  return date;
}

function artifactsOf(input: PanelReportInput, index: number, photo: PhotoResult): PhotoArtifacts {
  const a = Array.isArray(input.artifacts) ? input.artifacts[index] : input.artifacts[photo.file];
  return a ?? { thumbnail: null, relMap: null };
}

function checkInput(input: PanelReportInput): void {
  generatedDate(input.generated);
  const all = Array.isArray(input.artifacts)
    ? input.panel.photos.map((p, i) => [p.file, input.artifacts[i as never] as PhotoArtifacts | null] as const)
    : Object.entries(input.artifacts);
  if (Array.isArray(input.artifacts) && input.artifacts.length !== input.panel.photos.length) {
    throw new EvenfieldError('internal', `report: ${input.artifacts.length} artifact entries for ${input.panel.photos.length} photos`);
  }
  for (const [file, art] of all) {
    if (!art) continue;
    for (const [name, p] of [
      ['relMap', art.relMap],
      ['contrastMap', art.contrastMap],
    ] as const) {
      if (p && p.data.length !== p.width * p.height) {
        throw new EvenfieldError('internal', `report: ${name} of ${file} has ${p.data.length} values for ${p.width}x${p.height}`);
      }
    }
    const t = art.thumbnail;
    if (t && (t.rgb.length !== t.width * t.height * 3 || !(t.scaleToFull > 0))) {
      throw new EvenfieldError('internal', `report: thumbnail of ${file} is inconsistent`);
    }
  }
}

function panelSize(photo: PhotoResult, art: PhotoArtifacts): { width: number; height: number; known: boolean } | null {
  if (art.panelSizeMm) return art.panelSizeMm;
  const g = photo.geometry;
  if (!g || !(g.pxPerMm > 0)) return null;
  const known = (photo.grid?.points ?? []).some((p) => p.xMm !== null);
  return { width: g.mapWidth / g.pxPerMm, height: g.mapHeight / g.pxPerMm, known };
}

async function preparePhoto(photo: PhotoResult, art: PhotoArtifacts, number: number, lumMap: ColourMap, conMap: ColourMap): Promise<PreparedPhoto> {
  const calibrated = !!art.calibration && art.calibration.cdPerM2AtRelative1 > 0;
  const k = calibrated ? art.calibration!.cdPerM2AtRelative1 : 1;
  const photoJpeg = art.thumbnail ? await encodePhotoJpeg(art.thumbnail, PHOTO_MAX_PX) : null;
  let lum: PreparedPhoto['lum'] = null;
  if (art.relMap) {
    const plane = calibrated ? scalePlane(art.relMap, k) : art.relMap;
    const gridVals = (photo.grid?.points ?? []).map((p) => p.relative * k);
    const { range, clipped } = luminanceRange(plane, gridVals);
    const png = await encodePng(falseColour(plane, range, lumMap));
    lum = { png, width: plane.width, height: plane.height, range, clipped, plane };
  }
  let contrast: PreparedPhoto['contrast'] = null;
  if (art.contrastMap) {
    const { range, clipped } = contrastRange(art.contrastMap);
    const png = await encodePng(falseColour(art.contrastMap, range, conMap));
    contrast = { png, width: art.contrastMap.width, height: art.contrastMap.height, range, clipped };
  }
  return { photo, art, number, photoJpeg, lum, contrast, calibrated, sizeMm: panelSize(photo, art) };
}

export async function renderPanelPdf(input: PanelReportInput): Promise<Buffer> {
  checkInput(input);
  const { panel } = input;
  const id = panelReportId(input);
  const lumName = input.colourMap ?? 'viridis';
  const lumMap = COLOUR_MAPS[lumName];
  const conMap = COLOUR_MAPS[lumName === 'viridis' ? 'cividis' : 'viridis'];

  const prepared: PreparedPhoto[] = [];
  for (const [i, photo] of panel.photos.entries()) {
    const art = artifactsOf(input, i, photo);
    prepared.push(await preparePhoto(photo, art, i + 1, lumMap, conMap));
  }
  const bars = {
    lum: await encodePng(colourBarRaster(lumMap)),
    con: await encodePng(colourBarRaster(conMap)),
  };

  const doc = createDoc({
    title: `Display uniformity report: panel ${panel.panel}`,
    subject: `${verdictWord(panel.verdict)}. Luminance and colour uniformity and mura of panel ${panel.panel}, measured from camera photos.`,
    keywords: `display uniformity, mura, SEMU, panel ${panel.panel}, report ${id}`,
    creator: `evenfield ${input.toolVersion}`,
    generated: generatedDate(input.generated),
  });
  const flow = new Flow(doc);
  const ctx: Ctx = { doc, flow, input, id, prepared, bars, lumMap, conMap, sections: [], deferred: [], lastPatternBare: false };

  drawSummary(ctx);
  for (const p of prepared) drawPattern(ctx, p);
  drawMethod(ctx);
  drawCautions(ctx);
  for (const d of ctx.deferred) d();

  drawPageFurniture(
    doc,
    `Panel ${panel.panel} \u00b7 ${verdictWord(panel.verdict)} \u00b7 display uniformity report`,
    `Panel ${panel.panel}`,
    `Report ${shortHash(id)}`,
  );
  return finish(doc);
}

interface Ctx {
  doc: Doc;
  flow: Flow;
  input: PanelReportInput;
  id: string;
  prepared: PreparedPhoto[];
  bars: { lum: Buffer; con: Buffer };
  lumMap: ColourMap;
  conMap: ColourMap;
  /** title and 1-based page of each section, for the contents */
  sections: Array<{ title: string; page: number }>;
  /** drawing that needs page numbers known only at the end */
  deferred: Array<() => void>;
  /** the previous pattern section had nothing but its error */
  lastPatternBare: boolean;
}

function startSection(ctx: Ctx, title: string, newPage = true): void {
  if (newPage) ctx.flow.newPage();
  ctx.sections.push({ title, page: ctx.flow.pageCount });
}

// ---------------------------------------------------------------- summary page

function failCount(reasons: Reason[]): number {
  return reasons.filter((r) => r.severity === 'fail').length;
}

function verdictLine(ctx: Ctx): string {
  const { panel } = ctx.input;
  const fails = failCount(panel.reasonDetails);
  if (panel.verdict === 'pass') return 'All acceptance criteria met.';
  if (panel.verdict === 'fail') {
    const n = fails || panel.reasons.length;
    return `${n} acceptance ${n === 1 ? 'criterion' : 'criteria'} not met.`;
  }
  return 'The panel could not be judged: at least one photo could not be measured.';
}

function drawSummary(ctx: Ctx): void {
  const { doc, flow, input } = ctx;
  const { panel } = input;
  startSection(ctx, 'Verdict');

  textAt(doc, 'Display uniformity report', PAGE.left, flow.y, PAGE.contentWidth, { font: 'Sans-Bold', size: 17 });
  flow.gap(26);

  // identity block, two columns
  const lot = input.lot;
  const dates = panel.photos.map((p) => p.exposure?.dateTime).filter((d): d is string => !!d).sort();
  const taken = dates.length === 0 ? 'not recorded' : dates[0] === dates[dates.length - 1] ? dates[0]! : `${dates[0]} to ${dates[dates.length - 1]}`;
  const left: Array<[string, string]> = [
    ['Panel', panel.panel],
    ['Lot', lot?.lot ?? '\u2013'],
    ['Station', lot?.station ?? '\u2013'],
    ['Operator', lot?.operator ?? '\u2013'],
    ['Software', `evenfield ${input.toolVersion}`],
  ];
  const right: Array<[string, string]> = [
    ['Photos taken', taken],
    ['Report generated', fmtDate(generatedDate(input.generated))],
    ['Criteria', input.criteria.name],
    ['Criteria SHA-256', shortHash(input.criteria.hash, 16)],
    ['Report id', shortHash(ctx.id, 16)],
  ];
  const colW = PAGE.contentWidth / 2;
  const y0 = flow.y;
  let yl = y0;
  let yr = y0;
  for (const [k, v] of left) {
    textAt(doc, k, PAGE.left, yl, 62, { size: 8, colour: MUTED });
    yl += Math.max(11, textAt(doc, v, PAGE.left + 64, yl, colW - 70, { font: 'Sans-Bold', size: 8.5 }) + 1.5);
  }
  for (const [k, v] of right) {
    textAt(doc, k, PAGE.left + colW, yr, 82, { size: 8, colour: MUTED });
    yr += Math.max(11, textAt(doc, v, PAGE.left + colW + 84, yr, colW - 84, { font: k === 'Report id' || k === 'Criteria SHA-256' ? 'Mono' : 'Sans', size: 8.5 }) + 1.5);
  }
  flow.y = Math.max(yl, yr) + 8;

  // verdict banner
  const v = panel.verdict;
  const bannerH = 78;
  const bx = PAGE.left;
  const by = flow.y;
  doc.rect(bx, by, PAGE.contentWidth, bannerH).fillColor(VERDICT_TINT[v]).fill();
  doc.rect(bx, by, PAGE.contentWidth, bannerH).lineWidth(1.6).strokeColor(VERDICT_COLOUR[v]).stroke();
  drawVerdictSymbol(doc, v, bx + 34, by + bannerH / 2, 20);
  textAt(doc, 'Verdict', bx + 66, by + 9, 170, { size: 8, colour: MUTED });
  textAt(doc, verdictWord(v), bx + 66, by + 19, 190, { font: 'Sans-Bold', size: v === 'error' ? 20 : 28 });
  textAt(doc, verdictLine(ctx), bx + 66, by + 54, 190, { size: 8 });
  const noteX = bx + 265;
  doc.moveTo(noteX - 10, by + 10).lineTo(noteX - 10, by + bannerH - 10).lineWidth(0.5).strokeColor(RULE).stroke();
  textAt(doc, ESTIMATE_NOTICE, noteX, by + 9, PAGE.right - noteX - 10, { size: 7.6, lineGap: 0.6 });
  flow.y = by + bannerH + 5;

  // contents on one or two lines, filled in once every section's page is known
  const contentsY = flow.y;
  const contentsH = 22;
  flow.y += contentsH;
  ctx.deferred.push(() => {
    doc.switchToPage(0);
    const line = ctx.sections.map((s) => `${s.title} p.\u00a0${s.page}`).join('  \u00b7  ');
    textAt(doc, `Contents:  ${line}`, PAGE.left, contentsY, PAGE.contentWidth, { size: 7.5, colour: MUTED });
  });

  // reasons: the panel's reasons verbatim, in the judge's order (errors, failures, borderline)
  flow.heading('Reasons', 2);
  const severityOf = (text: string): Reason['severity'] | null => panel.reasonDetails.find((d) => d.text === text)?.severity ?? null;
  const listed = [...panel.reasons];
  for (const d of panel.reasonDetails) {
    if ((d.severity === 'fail' || d.severity === 'error') && !listed.includes(d.text)) listed.push(d.text);
  }
  if (listed.length === 0) {
    const closest = worstMargin(panel.reasonDetails);
    flow.text(
      v === 'pass'
        ? `Every figure judged was inside its limit.${closest ? ` Closest to its limit: ${closest.reason.text}.` : ''}`
        : 'No reason was recorded for this verdict.',
      { size: 9.5 },
    );
  }
  for (const text of listed) {
    const sev = severityOf(text) ?? (v === 'fail' ? 'fail' : v === 'error' ? 'error' : 'note');
    const x = PAGE.left + 18;
    const w = PAGE.contentWidth - 18;
    const h = measure(doc, text, w, { size: 9.5 });
    flow.ensure(h + 4);
    if (sev === 'fail' || sev === 'error') drawVerdictSymbol(doc, sev, PAGE.left + 6, flow.y + 6, 5);
    else drawNoteSymbol(doc, PAGE.left + 6, flow.y + 6, 4.5);
    textAt(doc, text, x, flow.y, w, { size: 9.5 });
    flow.y += h + 5;
  }
  if (listed.some((t) => severityOf(t) === 'note')) {
    flow.text('Ringed: borderline, within the measurement allowance of a limit; the verdict stands, but a calibrated check is advisable.', {
      size: 7.2,
      colour: MUTED,
      after: 4,
    });
  }

  // results by pattern
  flow.heading('Results by pattern', 2);
  const rows = ctx.prepared.map((p) => {
    const ph = p.photo;
    const u = ph.uniformity;
    const blobs = ph.mura ? String(ph.blobs.length) : '\u2013';
    return [
      `${p.number}. ${patternName(ph.pattern, ph.patternLevel)}`,
      ph.grid ? `${ph.grid.layout} points` : '\u2013',
      fmtPct(u?.nonuniformityPct),
      fmtPct(u?.minOverMaxPct),
      fmtPct(u?.maxDeviationFromCentrePct),
      fmtUv(u?.maxDuvFromCentre),
      blobs,
      ph.mura ? fmtSemu(ph.mura.maxSemu) : '\u2013',
      ph.status === 'ok' ? 'measured' : `not measured: ${ph.errorCode ?? 'error'}`,
    ];
  });
  drawTable(
    flow,
    [
      { header: 'Pattern', width: 78 },
      { header: 'Grid', width: 52 },
      { header: 'Non-uniformity %', width: 58, align: 'right' },
      { header: 'Lmin/Lmax %', width: 50, align: 'right' },
      { header: 'Max deviation from centre %', width: 66, align: 'right' },
      { header: "Max \u0394u'v' from centre", width: 56, align: 'right' },
      { header: 'Mura found', width: 40, align: 'right' },
      { header: 'Max SEMU', width: 40, align: 'right' },
      { header: 'Photo', width: PAGE.contentWidth - 440 },
    ],
    rows,
    { size: 7.8 },
  );

  // errors are listed under Reasons already; borderline notes repeat a judged figure
  const judgedRows = panel.reasonDetails.filter((r) => r.severity !== 'error' && !(r as { borderline?: boolean }).borderline);
  if (judgedRows.length > 0) {
    flow.heading('Every figure judged', 2, 50);
    drawTable(
      flow,
      [
        { header: 'Result', width: 66 },
        { header: 'Figure, value and limit as judged', width: PAGE.contentWidth - 66 },
      ],
      judgedRows.map((r) => [{ text: resultWord(r), font: r.severity === 'fail' || r.severity === 'error' ? 'Sans-Bold' : 'Sans' }, r.text]),
      {
        size: 7.6,
        decorate: (row, col, box) => {
          const r = judgedRows[row]!;
          if (col === 0 && (r.severity === 'fail' || r.severity === 'error')) drawVerdictSymbol(doc, r.severity, box.x + box.w - 8, box.y + 7, 3.6);
        },
      },
    );
  }

  // a warning that several photos share (the same pose of the camera, say) is given once, with their patterns
  const byText = new Map<string, string[]>();
  for (const p of panel.photos) {
    for (const w of [...p.warnings, ...(p.falloff?.warnings ?? [])]) {
      const names = byText.get(w) ?? [];
      const name = patternName(p.pattern, p.patternLevel);
      if (!names.includes(name)) names.push(name);
      byText.set(w, names);
    }
  }
  const warnings = [...byText].map(([w, names]) => `${names.join(', ')}: ${w}`);
  if (warnings.length > 0) {
    flow.heading('Warnings', 3, 24);
    for (const w of warnings.slice(0, 6)) flow.text(`\u2022 ${w}`, { size: 8, after: 1.5 });
    if (warnings.length > 6) flow.text(`and ${warnings.length - 6} more on the Method page.`, { size: 8, colour: MUTED });
  }
}

function resultWord(r: Reason): string {
  if (r.severity === 'fail') return 'OUTSIDE';
  if (r.severity === 'error') return 'ERROR';
  if ((r as { reportOnly?: boolean }).reportOnly) return 'report only';
  if (r.limit !== null && r.margin !== null) return 'inside';
  return 'note';
}

/** A ring: a borderline note (neither pass nor fail symbol). */
function drawNoteSymbol(doc: Doc, cx: number, cy: number, r: number): void {
  doc.circle(cx, cy, r).lineWidth(1.2).strokeColor(INK).stroke();
}

// ---------------------------------------------------------------- pattern pages

function drawPattern(ctx: Ctx, p: PreparedPhoto): void {
  const { doc, flow } = ctx;
  const ph = p.photo;
  const title = `${p.number}. ${patternName(ph.pattern, ph.patternLevel)} field`;
  // a photo with nothing to show but its error shares a page with the next one
  const hasContent = !!(p.photoJpeg || p.lum || p.contrast || ph.grid || ph.uniformity || ph.mura);
  const shareable = !hasContent && flow.pageCount > 1 && ctx.lastPatternBare && flow.room > 160;
  if (shareable) flow.gap(12);
  startSection(ctx, title, !shareable);
  ctx.lastPatternBare = !hasContent;
  flow.heading(title, 1);
  flow.text(`Photo ${ph.file}  \u00b7  SHA-256 ${shortHash(ph.sha256, 16)}\u2026 (full hash on the Method page)`, { size: 8, colour: MUTED, after: 6 });

  if (ph.status !== 'ok') {
    flow.text(`This photo could not be measured (${ph.errorCode ?? 'error'}): ${ph.error ?? 'no detail recorded'}`, { size: 10, after: 8 });
  }
  if (!hasContent) return;

  // photo and key figures side by side
  const colGap = 14;
  const photoW = 250;
  const figX = PAGE.left + photoW + colGap;
  const figW = PAGE.right - figX;
  const rowsOfFigures = keyFigures(ctx, p);
  let photoH = 0;
  if (p.photoJpeg) photoH = Math.min(150, (photoW * p.photoJpeg.height) / p.photoJpeg.width);
  const figH = rowsOfFigures.length * 12.5 + 18;
  flow.ensure(Math.max(photoH + 24, figH));
  const top = flow.y;
  let leftBottom = top;
  if (p.photoJpeg) {
    const w = (photoH * p.photoJpeg.width) / p.photoJpeg.height;
    doc.image(p.photoJpeg.jpeg, PAGE.left, top, { width: w, height: photoH });
    doc.rect(PAGE.left, top, w, photoH).lineWidth(0.4).strokeColor(RULE).stroke();
    drawOutline(doc, p, PAGE.left, top, w, photoH);
    const src = ph.geometry?.cornersSource;
    const how = src === 'auto' ? 'found automatically' : src === 'manual' ? 'given by hand' : src === 'shared' ? "taken from the panel's other photo" : 'not found';
    leftBottom = top + photoH + 3 + textAt(doc, `The photo, with the panel outline ${how} (marker at the top-left corner).`, PAGE.left, top + photoH + 3, photoW, { size: 7, colour: MUTED });
  } else {
    leftBottom = top + textAt(doc, 'No photo preview available.', PAGE.left, top, photoW, { size: 8, colour: MUTED });
  }
  let fy = top;
  fy += textAt(doc, 'Key figures', figX, fy, figW, { font: 'Sans-Bold', size: 9 }) + 3;
  for (const [label, value, judged] of rowsOfFigures) {
    const h = Math.max(
      measure(doc, label, figW * 0.55, { size: 7.8 }),
      measure(doc, value, figW * 0.17, { font: 'Sans-Bold', size: 7.8 }),
      measure(doc, judged, figW * 0.28 - 4, { size: 7 }),
    );
    textAt(doc, label, figX, fy, figW * 0.55, { size: 7.8 });
    textAt(doc, value, figX + figW * 0.55, fy, figW * 0.17, { font: 'Sans-Bold', size: 7.8, align: 'right' });
    textAt(doc, judged, figX + figW * 0.72 + 4, fy + 0.6, figW * 0.28 - 4, { size: 7, colour: MUTED });
    fy += h + 3;
    doc.moveTo(figX, fy - 1.5).lineTo(PAGE.right, fy - 1.5).lineWidth(0.3).strokeColor('#dddddd').stroke();
  }
  flow.y = Math.max(leftBottom, fy) + 10;

  if (p.lum) {
    const unit = p.calibrated ? 'Luminance, cd/m\u00b2' : 'Relative luminance (centre point = 1)';
    const blobsHere = !p.contrast && ph.blobs.length > 0;
    flow.heading(`Luminance map${blobsHere ? ', grid points and mura' : ' and grid points'}`, 2, 250);
    drawMapBlock(ctx, {
      png: p.lum.png,
      width: p.lum.width,
      height: p.lum.height,
      range: p.lum.range,
      bar: ctx.bars.lum,
      barLabel: unit,
      maxH: 300,
      overlay: (box) => {
        drawGridPoints(doc, p, box);
        if (blobsHere) drawBlobOutlines(doc, ph.blobs, p.art, box);
      },
      caption:
        `The rectified panel as the viewer sees it, in the ${ctx.lumMap.name} colour scale (dark = low, bright = high; ` +
        `it reads correctly in grey-scale print). ${p.lum.clipped ? `Values beyond ${tickLabel(p.lum.range[0], 1e-3)}\u2013${tickLabel(p.lum.range[1], 1e-3)} are shown at the end colours. ` : ''}` +
        `White = no data. Numbered circles: grid points with their ${p.calibrated ? 'luminance in cd/m\u00b2' : 'relative luminance'}.`,
    });
  } else if (ph.status === 'ok') {
    flow.text('No panel map was provided for this photo.', { size: 9, colour: MUTED });
  }

  drawGridTable(ctx, p);
  drawProfiles(ctx, p);
  drawMura(ctx, p);
}

function keyFigures(ctx: Ctx, p: PreparedPhoto): Array<[string, string, string]> {
  const ph = p.photo;
  const u = ph.uniformity;
  const reasons = ctx.input.panel.reasonDetails.filter((r) => {
    const file = (r as { file?: string | null }).file;
    return r.pattern === ph.pattern && (file === undefined || file === null || file === ph.file) && !(r as { borderline?: boolean }).borderline;
  });
  const judged = (figure: string): string => {
    const r = reasons.find((x) => x.figure === figure && x.limit !== null);
    if (!r || r.limit === null) return '';
    const word = r.severity === 'fail' ? 'OUTSIDE' : (r as { reportOnly?: boolean }).reportOnly ? 'report only' : 'inside';
    return `limit ${fmtLimit(r.limit)}: ${word}`;
  };
  const rows: Array<[string, string, string]> = [];
  if (u) {
    rows.push(
      ['Luminance non-uniformity', `${fmtPct(u.nonuniformityPct)} %`, judged('nonuniformityPct')],
      ['Uniformity Lmin/Lmax', `${fmtPct(u.minOverMaxPct)} %`, judged('minOverMaxPct')],
      [ph.pattern === 'white' ? 'White variation \u03b4W (Lmax/Lmin)' : 'Ratio Lmax/Lmin', fmtNum(u.maxOverMin), judged('maxOverMin')],
      ['Largest deviation from centre', `${fmtPct(u.maxDeviationFromCentrePct)} %`, judged('maxDeviationFromCentrePct')],
      ['Coefficient of variation', `${fmtPct(u.cvPct, 2)} %`, judged('cvPct')],
      ["Max \u0394u'v' from centre", fmtUv(u.maxDuvFromCentre), judged('maxDuvFromCentre')],
      ["Max \u0394u'v' between points", fmtUv(u.maxDuvAnyPair), judged('maxDuvAnyPair')],
    );
  }
  if (ph.mura) {
    rows.push(
      ['Mura found', String(ph.blobs.length), ''],
      ['Largest SEMU', fmtSemu(ph.mura.maxSemu), judged('maxSemu')],
      ['Contrast noise floor (1\u03c3)', `${fmtContrast(ph.mura.noiseFloorPct)} %`, ''],
    );
  }
  if (p.calibrated && ph.grid) {
    const c = ph.grid.points.find((g) => Math.abs(g.u - 0.5) < 1e-6 && Math.abs(g.v - 0.5) < 1e-6);
    if (c) rows.unshift(['Centre luminance', `${fmtCd(c.relative * p.art.calibration!.cdPerM2AtRelative1)} cd/m\u00b2`, judged('luminanceCdM2')]);
  }
  if (rows.length === 0) rows.push(['No figures', '\u2013', '']);
  return rows;
}

/** Photo corner coordinates -> points on the page. */
function drawOutline(doc: Doc, p: PreparedPhoto, x: number, y: number, w: number, h: number): void {
  const c = p.photo.corners;
  const t = p.art.thumbnail;
  if (!c || !t) return;
  // full-image pixel centre x maps to thumbnail x_t = (x + 0.5) / s - 0.5; the page spans width t.width
  const toPage = ([cx, cy]: [number, number]): [number, number] => [
    x + ((cx + 0.5) / t.scaleToFull / t.width) * w,
    y + ((cy + 0.5) / t.scaleToFull / t.height) * h,
  ];
  const pts = c.map(toPage);
  doc.save();
  doc.rect(x, y, w, h).clip();
  doc.polygon(...pts).lineWidth(2.6).lineJoin('round').strokeColor('#000000').stroke();
  doc.polygon(...pts).lineWidth(1.1).lineJoin('round').strokeColor('#ffe000').stroke();
  const [tx, ty] = pts[0]!;
  doc.circle(tx, ty, 3.4).fillColor('#000000').fill();
  doc.circle(tx, ty, 2.2).fillColor('#ffe000').fill();
  doc.restore();
}

interface MapBlock {
  png: Buffer;
  width: number;
  height: number;
  range: [number, number];
  bar: Buffer;
  barLabel: string;
  maxH: number;
  overlay: (box: { x: number; y: number; w: number; h: number }) => void;
  caption: string;
}

const BAR_SPACE = 78;

/** Size of a map on the page: as wide as the column allows beside the colour bar, at most maxH tall. */
function mapSize(width: number, height: number, maxH: number): { w: number; h: number } {
  const scale = Math.min((PAGE.contentWidth - BAR_SPACE) / width, maxH / height);
  return { w: width * scale, h: height * scale };
}

function mapBlockHeight(doc: Doc, m: Pick<MapBlock, 'width' | 'height' | 'maxH' | 'caption'>): number {
  return mapSize(m.width, m.height, m.maxH).h + measure(doc, m.caption, PAGE.contentWidth, { size: 7.2 }) + 14;
}

function drawMapBlock(ctx: Ctx, m: MapBlock): void {
  const { doc, flow } = ctx;
  const { w, h } = mapSize(m.width, m.height, m.maxH);
  const capH = measure(doc, m.caption, PAGE.contentWidth, { size: 7.2 });
  flow.ensure(h + capH + 12);
  const x = PAGE.left;
  const y = flow.y + 2;
  doc.image(m.png, x, y, { width: w, height: h });
  doc.rect(x, y, w, h).lineWidth(0.5).strokeColor(INK).stroke();
  doc.save();
  m.overlay({ x, y, w, h });
  doc.restore();

  // colour bar with ticks
  const bx = x + w + 12;
  const bw = 11;
  doc.image(m.bar, bx, y, { width: bw, height: h });
  doc.rect(bx, y, bw, h).lineWidth(0.5).strokeColor(INK).stroke();
  const t = niceTicks(m.range[0], m.range[1], Math.max(3, Math.min(8, Math.floor(h / 32))));
  for (const v of t.ticks) {
    if (v < m.range[0] - 1e-9 || v > m.range[1] + 1e-9) continue;
    const ty = y + h - ((v - m.range[0]) / (m.range[1] - m.range[0])) * h;
    doc.moveTo(bx + bw, ty).lineTo(bx + bw + 3, ty).lineWidth(0.5).strokeColor(INK).stroke();
    textAt(doc, tickLabel(v, t.step), bx + bw + 5, ty - 3.5, 34, { size: 6.8 });
  }
  doc.save();
  const lx = bx + bw + 44;
  doc.rotate(-90, { origin: [lx, y + h / 2] });
  textAt(doc, m.barLabel, lx - h / 2, y + h / 2 - 4, h, { size: 7, colour: MUTED, align: 'center' });
  doc.restore();

  flow.y = y + h + 4;
  textAt(doc, m.caption, PAGE.left, flow.y, PAGE.contentWidth, { size: 7.2, colour: MUTED });
  flow.y += capH + 8;
}

function labelBox(doc: Doc, text: string, x: number, y: number, size = 6.5): { w: number; h: number } {
  doc.font('Sans').fontSize(size);
  const w = doc.widthOfString(text) + 4;
  const h = size + 3;
  doc.rect(x, y, w, h).fillOpacity(0.85).fillColor('#ffffff').fill();
  doc.fillOpacity(1);
  doc.rect(x, y, w, h).lineWidth(0.4).strokeColor(INK).stroke();
  textAt(doc, text, x + 2, y + 1.4, w, { size });
  return { w, h };
}

function gridValue(p: PreparedPhoto, g: GridPoint): string {
  return p.calibrated ? fmtCd(g.relative * p.art.calibration!.cdPerM2AtRelative1) : fmtRel(g.relative);
}

function drawGridPoints(doc: Doc, p: PreparedPhoto, box: { x: number; y: number; w: number; h: number }): void {
  const pts = p.photo.grid?.points ?? [];
  for (const g of pts) {
    const cx = box.x + g.u * box.w;
    const cy = box.y + g.v * box.h;
    doc.circle(cx, cy, 3.3).fillColor('#ffffff').fill();
    doc.circle(cx, cy, 3.3).lineWidth(1).strokeColor('#000000').stroke();
    doc.circle(cx, cy, 0.8).fillColor('#000000').fill();
    const text = `${g.index}: ${gridValue(p, g)}`;
    doc.font('Sans').fontSize(6.5);
    const w = doc.widthOfString(text) + 4;
    const lx = cx + 5 + w > box.x + box.w ? cx - 5 - w : cx + 5;
    const ly = cy + 4 + 9.5 > box.y + box.h ? cy - 13.5 : cy + 4;
    labelBox(doc, text, lx, ly);
  }
}

function blobPolygon(b: Blob, art: PhotoArtifacts): Array<[number, number]> {
  const outline = art.blobOutlines?.[b.id];
  if (outline && outline.length >= 3) return outline.map(([u, v]) => [u, v]);
  const [u0, v0, u1, v1] = b.bbox;
  return [
    [u0, v0],
    [u1, v0],
    [u1, v1],
    [u0, v1],
  ];
}

function drawBlobOutlines(doc: Doc, blobs: Blob[], art: PhotoArtifacts, box: { x: number; y: number; w: number; h: number }): void {
  for (const b of blobs) {
    const pts = blobPolygon(b, art).map(([u, v]) => [box.x + u * box.w, box.y + v * box.h] as [number, number]);
    doc.polygon(...pts).lineWidth(2.4).lineJoin('round').strokeColor('#ffffff').stroke();
    doc.polygon(...pts).lineWidth(1).dash(3, { space: 1.5 }).strokeColor('#000000').stroke();
    doc.undash();
    const minX = Math.min(...pts.map((q) => q[0]));
    const minY = Math.min(...pts.map((q) => q[1]));
    const maxY = Math.max(...pts.map((q) => q[1]));
    const text = `B${b.id}`;
    doc.font('Sans-Bold').fontSize(7);
    const w = doc.widthOfString(text) + 4;
    const lx = Math.min(Math.max(box.x, minX), box.x + box.w - w);
    const ly = minY - 11 >= box.y ? minY - 11 : maxY + 1 + 10 <= box.y + box.h ? maxY + 1 : minY + 1;
    doc.rect(lx, ly, w, 10).fillColor('#000000').fill();
    textAt(doc, text, lx + 2, ly + 1.3, w, { font: 'Sans-Bold', size: 7, colour: '#ffffff' });
  }
}

/** Plain words for the detail fields of a finding (results.json keeps the field names). */
const DETAIL_WORDS: Record<string, (v: string) => string> = {
  diameterMm: (v) => `${v} mm across`,
  widthMm: (v) => `${v} mm wide`,
  lengthMm: (v) => `${v} mm long`,
  depthMm: (v) => `reaching ${v} mm in`,
  reachMm: (v) => `reaching ${v} mm`,
  pitchUMm: (v) => `pitch ${v} mm across`,
  pitchVMm: (v) => `${v} mm down`,
  zones: (v) => `${v} zones`,
  darkGaps: (v) => `${v} dark gaps`,
  zoneAreaMm2: (v) => `${v} mm² a zone`,
  significanceSigma: (v) => `${v} σ above the noise`,
  stepPct: (v) => `step ${v} %`,
  edge: (v) => `${v} edge`,
  corner: (v) => `${v} corner`,
  axis: (v) => v,
  tile: (v) => `tile ${v}`,
  seam: (v) => `seam at ${v}`,
  at: (v) => `at ${v} of the edge`,
  form: (v) => v,
  seenPeakPct: (v) => `peak ${v} % where the map begins`,
  carriedToEdgeMm: (v) => `carried across the ${v} mm strip left out along the edges`,
  borderStripMm2: (v) => `${v} mm² of it under the strip left out along the edges`,
  surroundPct: (v) => `on a surround of ${v} %`,
  fadingEndSpecks: (v) => `with ${v === '1' ? 'a speck' : `${v} specks`} of its fading end along the edge`,
  belowResolution: (v) =>
    `${v === 'size' ? 'smaller' : 'narrower'} than the photo resolves: its ${v === 'size' ? 'area' : 'width'} is at most the figure given, its contrast and SEMU at least`,
};

function blobKind(b: Blob): string {
  const detail = Object.entries(b.detail)
    .map(([k, v]) => {
      const text = typeof v === 'number' ? (Number.isInteger(v) ? String(v) : fmtNum(v)) : String(v);
      const words = DETAIL_WORDS[k];
      return words ? words(text) : `${k} ${text}`;
    })
    .join(', ');
  return `${b.kind}, ${b.polarity}${detail ? ` (${detail})` : ''}`;
}

function drawMura(ctx: Ctx, p: PreparedPhoto): void {
  const { doc, flow } = ctx;
  const ph = p.photo;
  if (ph.status !== 'ok') return;
  if (!ph.mura) {
    flow.heading('Mura', 2, 30);
    flow.text('Mura was not evaluated for this photo.', { size: 9, colour: MUTED });
    return;
  }
  const m = ph.mura;
  const res = Object.entries(m.resolvableContrastPct)
    .map(([d, c]) => `${d} mm: ${fmtContrast(c)} %`)
    .join(', ');
  const intro =
    `Background model: ${m.backgroundModel}. Contrast noise floor ${fmtContrast(m.noiseFloorPct)} % (1\u03c3 at the map's pixel scale)` +
    `${res ? `; smallest contrast that can be resolved, by feature diameter: ${res}` : ''}` +
    `${m.resolvedFromMm !== undefined ? `; features resolved from ${m.resolvedFromMm.toFixed(1)} mm across (two pixels of the analysed map)` : ''}.`;
  const block: MapBlock | null = p.contrast
    ? {
        png: p.contrast.png,
        width: p.contrast.width,
        height: p.contrast.height,
        range: p.contrast.range,
        bar: ctx.bars.con,
        barLabel: 'Contrast against the fitted background, %',
        maxH: 200,
        overlay: (box) => drawBlobOutlines(doc, ph.blobs, p.art, box),
        caption:
          `Local contrast against the fitted background, in the ${ctx.conMap.name} colour scale: darker than the background is dark, brighter is bright. ` +
          `${p.contrast.clipped ? 'Contrast beyond the scale is shown at the end colours. ' : ''}White = no data. Dashed outlines: blobs listed in the table below.`,
      }
    : null;
  const rows = ph.blobs.map((b) => [
    { text: `B${b.id}`, font: 'Sans-Bold' as const },
    blobKind(b),
    `${placeWords(b.u, b.v)}; x ${fmtMm(b.xMm)}, y ${fmtMm(b.yMm)} mm`,
    `${fmtMm(b.areaMm2)} mm\u00b2; ${fmtMm((b.bbox[2] - b.bbox[0]) * (p.sizeMm?.width ?? NaN))} \u00d7 ${fmtMm((b.bbox[3] - b.bbox[1]) * (p.sizeMm?.height ?? NaN))} mm`,
    fmtContrast(b.contrastPct),
    fmtContrast(b.peakContrastPct),
    { text: fmtSemu(b.semu), font: 'Sans-Bold' as const },
  ]);
  const columns: Column[] = [
    { header: 'Blob', width: 34 },
    { header: 'Kind', width: 106 },
    { header: 'Place (from top-left of active area)', width: 128 },
    { header: 'Size: area; width \u00d7 height', width: 112 },
    { header: 'Contrast %', width: 46, align: 'right' },
    { header: 'Peak contrast %', width: 45, align: 'right' },
    { header: 'SEMU', width: PAGE.contentWidth - 471, align: 'right' },
  ];
  const opts = { size: 7.6, keepRows: 3 };
  // the table's key goes above it, with its start: below it, a table ending at the foot of a page left
  // the key alone on the next one
  const key = 'Contrast is the signed mean over the half-peak region (negative = darker than the background). Blobs are numbered in order of SEMU, as in the reasons.';
  const keyStyle = { size: 7, colour: MUTED, after: 4 };
  const keyH = measure(doc, key, PAGE.contentWidth, { size: 7 }) + 4;
  // keep the heading, the map and the start of its table together when they fit on one page
  const introH = measure(doc, intro, PAGE.contentWidth, { size: 8 }) + 6;
  const mapH = block ? mapBlockHeight(doc, block) : 0;
  const tableH = rows.length > 0 ? keyH + tableHeight(doc, columns, rows, opts) + 6 : 20;
  const together = introH + mapH + tableH;
  flow.heading('Mura', 2, together + 40 <= PAGE.bottom - PAGE.top ? together : introH + mapH);
  flow.text(intro, { size: 8, after: 6 });
  if (block) drawMapBlock(ctx, block);
  if (ph.blobs.length === 0) {
    flow.text('No mura was found above the detection threshold.', { size: 9, after: 6 });
  } else {
    flow.ensure(keyH + tableHeight(doc, columns, rows, opts));
    flow.text(key, keyStyle);
    drawTable(flow, columns, rows, opts);
  }
  for (const t of leftOutLines(m.leftOut ?? [])) flow.text(t, { size: 7.6, after: 4 });
}

/** One sentence per candidate left out of the findings, with the figures the decision rested on. */
export function leftOutLines(list: LeftOutFinding[]): string[] {
  return list.map(
    (b) =>
      `Left out as the panel's own roll-off, not mura: a ${b.polarity} cloud (${placeWords(b.u, b.v)}; x ${fmtMm(b.xMm)}, y ${fmtMm(b.yMm)} mm), ` +
      `${fmtMm(b.areaMm2)} mm\u00b2, mean contrast ${fmtContrast(b.contrastPct)} %, SEMU ${fmtSemu(b.semu)} if it were counted. ` +
      `It sits on the background's peak or dip; within three radii of it a radial roll-off about it leaves a model error of ` +
      `${b.modelErrorRollOffPct.toFixed(3)} %, a cloud there ${b.modelErrorCloudPct.toFixed(3)} %. The contrast map still shows it.`,
  );
}

function drawProfiles(ctx: Ctx, p: PreparedPhoto): void {
  const { doc, flow } = ctx;
  if (!p.lum) return;
  const plane = p.lum.plane;
  const size = p.sizeMm;
  const lenX = size ? size.width : 100;
  const lenY = size ? size.height : 100;
  const unitPos = size ? (size.known ? 'mm' : 'mm, nominal') : '% of width';
  const h = centreProfile(plane, 'horizontal', lenX);
  const v = centreProfile(plane, 'vertical', lenY);
  let lo = Infinity;
  let hi = -Infinity;
  for (const arr of [h.value, v.value]) {
    for (const x of arr) {
      if (Number.isFinite(x)) {
        lo = Math.min(lo, x);
        hi = Math.max(hi, x);
      }
    }
  }
  if (!Number.isFinite(lo)) return;
  const k = p.calibrated ? p.art.calibration!.cdPerM2AtRelative1 : 1;
  if (!p.calibrated) {
    lo = Math.min(lo, 1);
    hi = Math.max(hi, 1);
  }
  const pts = p.photo.grid?.points ?? [];
  for (const g of pts) {
    lo = Math.min(lo, g.relative * k);
    hi = Math.max(hi, g.relative * k);
  }
  const yLabel = p.calibrated ? 'Luminance, cd/m\u00b2' : 'Relative luminance';
  const plotH = 150;
  flow.heading('Profiles through the centre', 2, plotH);
  flow.ensure(plotH + 20);
  const w = (PAGE.contentWidth - 16) / 2;
  const onLine = (a: number): boolean => Math.abs(a - 0.5) < 0.02;
  drawLinePlot(doc, { x: PAGE.left, y: flow.y, w, h: plotH }, {
    title: `Horizontal (rows ${fmtPct(h.band[0] * 100, 0)}\u2013${fmtPct(h.band[1] * 100, 0)} % of height averaged)`,
    xLabel: `Position from left edge, ${unitPos}`,
    yLabel,
    xRange: [0, lenX],
    yRange: [lo, hi],
    series: [{ x: h.pos, y: h.value, colour: '#0b3c73', width: 1 }],
    markers: pts.filter((g) => onLine(g.v)).map((g) => ({ x: g.u * lenX, y: g.relative * k, label: String(g.index) })),
    refLines: p.calibrated ? [] : [{ y: 1, label: 'centre point = 1' }],
  });
  drawLinePlot(doc, { x: PAGE.left + w + 16, y: flow.y, w, h: plotH }, {
    title: `Vertical (columns ${fmtPct(v.band[0] * 100, 0)}\u2013${fmtPct(v.band[1] * 100, 0)} % of width averaged)`,
    xLabel: `Position from top edge, ${unitPos}`,
    yLabel,
    xRange: [0, lenY],
    yRange: [lo, hi],
    series: [{ x: v.pos, y: v.value, colour: '#0b3c73', width: 1 }],
    markers: pts.filter((g) => onLine(g.u)).map((g) => ({ x: g.v * lenY, y: g.relative * k, label: String(g.index) })),
    refLines: p.calibrated ? [] : [{ y: 1, label: 'centre point = 1' }],
  });
  flow.y += plotH + 4;
  flow.text('Lines: the map averaged across a narrow band through the centre. Circles: grid points on that line, numbered as in the table.', {
    size: 7,
    colour: MUTED,
    after: 6,
  });
}

function drawGridTable(ctx: Ctx, p: PreparedPhoto): void {
  const { flow } = ctx;
  const grid = p.photo.grid;
  if (!grid) return;
  const pts = grid.points;
  const heading = `Grid points (${grid.layout}-point, ${grid.placement === 'inset' ? `inset ${fmtPct(grid.insetPct)} %` : 'cell centres'})`;
  const rel = pts.map((g) => g.relative);
  const minI = rel.indexOf(Math.min(...rel));
  const maxI = rel.indexOf(Math.max(...rel));
  const centre = pts.find((g) => Math.abs(g.u - 0.5) < 1e-6 && Math.abs(g.v - 0.5) < 1e-6);
  const k = p.calibrated ? p.art.calibration!.cdPerM2AtRelative1 : 1;
  const rows: Array<Array<string | Cell>> = pts.map((g, i) => [
    String(g.index),
    fmtPct(g.u * 100),
    fmtPct(g.v * 100),
    g.xMm === null ? '\u2013' : fmtMm(g.xMm),
    g.yMm === null ? '\u2013' : fmtMm(g.yMm),
    { text: fmtRel(g.relative), font: 'Sans-Bold' },
    p.calibrated ? fmtCd(g.relative * k) : fmtNum(g.Y),
    fmtPct((g.relative - 1) * 100, 2),
    fmtUv(g.uprime),
    fmtUv(g.vprime),
    fmtUv(g.duvFromCentre),
    [g === centre ? 'centre' : '', i === minI ? 'min' : '', i === maxI ? 'max' : ''].filter(Boolean).join(' '),
  ]);
  const columns = [
    { header: 'Point', width: 30, align: 'right' as const },
    { header: 'u %', width: 34, align: 'right' as const },
    { header: 'v %', width: 34, align: 'right' as const },
    { header: 'x mm', width: 42, align: 'right' as const },
    { header: 'y mm', width: 42, align: 'right' as const },
    { header: 'L rel.', width: 44, align: 'right' as const },
    { header: p.calibrated ? 'L cd/m\u00b2' : 'Y photo', width: 46, align: 'right' as const },
    { header: '\u0394 centre %', width: 54, align: 'right' as const },
    { header: "u'", width: 42, align: 'right' as const },
    { header: "v'", width: 42, align: 'right' as const },
    { header: "\u0394u'v'", width: 46, align: 'right' as const },
  ];
  columns.push({ header: 'Note', width: PAGE.contentWidth - columns.reduce((a, c) => a + c.width, 0), align: 'right' });
  const opts = { size: 7.6, keepRows: rows.length <= 13 ? rows.length : 3 };
  flow.heading(heading, 2, tableHeight(flow.doc, columns, rows, opts) + 30);
  flow.text(
    `u, v: % of the active area's width and height from its top-left corner. Spot radius ${fmtPct(grid.spotRadiusPct)} % of the diagonal ` +
      `(${pts[0] ? `${pts[0].pixels}` : '\u2013'} map pixels at point 1). L rel. = L / Lc; \u0394 centre = 100 (L \u2212 Lc) / Lc; ` +
      `${p.calibrated ? '' : 'Y photo: linear Y in the photo\u2019s units; '}\u0394u'v' from the centre point.`,
    { size: 7, colour: MUTED, after: 3 },
  );
  drawTable(flow, columns, rows, opts);

}

// ---------------------------------------------------------------- method

function cameraLine(ph: PhotoResult): string {
  const e = ph.exposure;
  if (!e) return 'not recorded';
  return [e.make, e.model].filter(Boolean).join(' ') || 'not recorded';
}

function exposureLine(ph: PhotoResult): string {
  const e = ph.exposure;
  if (!e) return 'not recorded (no EXIF)';
  const parts = [
    fmtExposureTime(e.exposureTimeS),
    e.fNumber !== null ? `f/${fmtLimit(Number(e.fNumber.toFixed(1)))}` : 'f/\u2013',
    e.iso !== null ? `ISO ${e.iso}` : 'ISO \u2013',
  ];
  if (e.focalLengthMm !== null) {
    parts.push(`focal length ${fmtLimit(Number(e.focalLengthMm.toFixed(1)))} mm${e.focalLength35mm !== null ? ` (${fmtLimit(Number(e.focalLength35mm.toFixed(1)))} mm in 35 mm terms)` : ''}`);
  }
  return parts.join(', ');
}

function photoMethodPairs(p: PreparedPhoto): Array<[string, string | Cell]> {
  const ph = p.photo;
  const pairs: Array<[string, string | Cell]> = [];
  pairs.push(['File', ph.file]);
  pairs.push(['SHA-256', { text: ph.sha256, font: 'Mono' }]);
  pairs.push(['Camera', cameraLine(ph)]);
  pairs.push(['Lens', ph.exposure?.lens ?? 'not recorded']);
  pairs.push(['Exposure', exposureLine(ph)]);
  pairs.push(['Taken', ph.exposure?.dateTime ?? 'not recorded']);
  const d = ph.decode;
  pairs.push([
    'Decoding',
    d
      ? `${d.format.toUpperCase()}, ${d.width} \u00d7 ${d.height} px, ${d.bitDepth}-bit, ${d.channels} channels; ` +
        (d.jpegSamples === 'float'
          ? `decoded without rounding samples to whole code values (level step ${trim(d.levelStepCodes ?? 1, 3)} code value); ` +
            ((d.codePlateauShare ?? 0) >= 0.5
              ? `almost no noise: its codes lie in plateaus of whole codes (plateau share ${trim(d.codePlateauShare!, 2)}), and small findings fainter than that share of a code value are not reported; `
              : '')
          : d.jpegSamples === '8bit'
            ? 'decoded to whole code values; '
            : '') +
        `${
          d.transfer === 'srgb'
            ? 'sRGB transfer function undone to linear light'
            : d.transfer === 'response'
              ? `camera response measured from an exposure bracket undone to linear light (table ${d.responseId ?? '?'})`
              : d.transfer === 'profile'
                ? `the embedded colour profile's tone curve undone to linear light (table ${d.responseId ?? '?'})`
              : 'linear data'
        }; ` +
        `${d.scale === 1 ? 'measured at full size' : `measured at 1/${trim(d.scale, 2)} size (area average)`}`
      : 'not decoded',
  ]);
  const s = ph.exposureStats;
  pairs.push([
    'Clipping and noise floor',
    s
      ? `${fmtPct(s.clippedFraction * 100, 3)} % of pixels clipped (a channel at 98 % of white or more); ` +
        `${fmtPct(s.darkFraction * 100, 2)} % in the noise floor; median Y ${fmtNum(s.median)}, 99.9th percentile ${fmtNum(s.p999)} (linear, 1 = white)`
      : 'not recorded',
  ]);
  if (ph.offFrame) {
    const o = ph.offFrame;
    pairs.push([
      'Display-off frame',
      `${o.file} (SHA-256 ${shortHash(o.sha256, 16)}…), its light scaled by ${trim(o.exposureRatio, 3)} for the exposures and taken from this photo before measuring: ` +
        `room light reflected by the screen and the camera's offset, ${fmtPct(o.sharePct)} % of this photo's level on the panel`,
    ]);
  }
  if (s && (s.spikesRemoved ?? 0) > 0) {
    pairs.push(['Single-pixel spikes', `${s.spikesRemoved} on the panel replaced by their neighbours' mean (hot or dead camera pixels, or panel dots smaller than one pixel as measured)`]);
  }
  const f = ph.falloff;
  pairs.push([
    'Lens falloff correction',
    f
      ? f.applied
        ? `applied in camera coordinates before rectification; method ${f.method}; source ${f.source ?? 'not recorded'}` +
          `${f.cornerFalloff !== null ? `; the corners had ${fmtPct(f.cornerFalloff * 100)} % of the centre's light before correction` : ''}`
        : `not applied (${f.method})${f.source ? `; ${f.source}` : ''}`
      : 'not recorded',
  ]);
  const g = ph.geometry;
  pairs.push([
    'Panel outline and geometry',
    g
      ? `corners ${g.cornersSource === 'auto' ? 'found automatically' : g.cornersSource === 'manual' ? 'given by hand' : "shared with the panel's other photos"}` +
        `${g.edgeResidualPx !== null ? `; edge-fit residual ${trim(g.edgeResidualPx, 2)} camera px rms` : ''}` +
        `${g.tiltDeg !== null ? `; camera axis ${trim(g.tiltDeg, 1)}\u00b0 off the panel normal` : ''}` +
        `${g.viewAngleMaxDeg !== null && g.viewAngleMaxDeg !== undefined ? `; largest viewing angle ${trim(g.viewAngleMaxDeg, 1)}\u00b0` : ''}` +
        `; corners TL TR BR BL (camera px) ${(ph.corners ?? []).map(([x, y]) => `(${x.toFixed(1)}, ${y.toFixed(1)})`).join(' ')}`
      : 'not located',
  ]);
  if (g) {
    pairs.push([
      'Panel map',
      `${g.mapWidth} \u00d7 ${g.mapHeight} px at ${trim(g.pxPerMm, 3)} px/mm` +
        `${p.sizeMm ? `; active area ${fmtMm(p.sizeMm.width)} \u00d7 ${fmtMm(p.sizeMm.height)} mm (${p.sizeMm.known ? 'size given' : 'size assumed: mm are nominal'})` : ''}` +
        `; ${trim(g.cameraPxPerMapPx, 2)} camera px per map px at the centre`,
    ]);
  }
  if (ph.grid) {
    pairs.push([
      'Grid',
      `${ph.grid.layout} points, ${ph.grid.placement === 'inset' ? `inset ${fmtPct(ph.grid.insetPct)} %` : 'at cell centres'}, spot radius ${fmtPct(ph.grid.spotRadiusPct)} % of the diagonal`,
    ]);
  }
  if (p.art.calibration) {
    pairs.push(['Luminance calibration', `${fmtCd(p.art.calibration.cdPerM2AtRelative1)} cd/m\u00b2 at relative 1; ${p.art.calibration.source}`]);
  } else {
    pairs.push(['Luminance calibration', 'none: luminance is relative to the centre point']);
  }
  const warnings = [...ph.warnings, ...(ph.falloff?.warnings ?? [])];
  pairs.push(['Warnings', warnings.length ? warnings.map((w) => `\u2022 ${w}`).join('\n') : 'none']);
  if (ph.status !== 'ok') pairs.push(['Error', `${ph.errorCode ?? 'error'}: ${ph.error ?? ''}`]);
  return pairs;
}

function drawMethod(ctx: Ctx): void {
  const { flow, input } = ctx;
  startSection(ctx, 'Method');
  flow.heading('Method and traceability', 1);
  flow.text(
    'Each photo was decoded to linear light, corrected for lens falloff in camera coordinates, and the panel ' +
      'located and rectified to a map of the active area. Grid points are means of linear luminance over small ' +
      'spots at the listed positions; mura are areas whose contrast against a smooth fitted background stands out ' +
      'from the noise, sized on the panel in mm\u00b2 and rated in SEMU.',
    { size: 8.5, after: 6 },
  );

  flow.heading('Source photos', 2, 40);
  drawTable(
    flow,
    [
      { header: 'Pattern', width: 70 },
      { header: 'File', width: 155 },
      { header: 'SHA-256 of the file as read', width: PAGE.contentWidth - 225, font: 'Mono' },
    ],
    ctx.prepared.flatMap((p) => [
      [`${p.number}. ${patternName(p.photo.pattern, p.photo.patternLevel)}`, p.photo.file, p.photo.sha256],
      ...(p.photo.offFrame ? [[`${p.number}. display off`, p.photo.offFrame.file, p.photo.offFrame.sha256]] : []),
    ]),
    { size: 7 },
  );

  for (const p of ctx.prepared) {
    flow.heading(`${p.number}. ${patternName(p.photo.pattern, p.photo.patternLevel)}: camera, exposure and corrections`, 3, 100);
    drawPairs(flow, photoMethodPairs(p), 130, 7.8);
  }

  flow.heading('Acceptance criteria', 2, 60);
  drawPairs(flow, [
    ['Criteria', input.criteria.name],
    ['SHA-256 of criteria file', { text: input.criteria.hash, font: 'Mono' }],
  ], 130, 7.8);
  if (input.criteria.lines.length > 0) {
    drawTable(
      flow,
      [
        { header: 'Criterion', width: 290 },
        { header: 'Source of the limit', width: PAGE.contentWidth - 290 },
      ],
      input.criteria.lines.map((l) => [l.text, l.source ?? 'not stated']),
      { size: 7.6 },
    );
  }

  flow.heading('Definitions', 2, 60);
  for (const d of DEFINITIONS) flow.text(`\u2022 ${d}`, { size: 7.8, after: 2 });

  flow.heading('This report', 2, 60);
  drawPairs(flow, [
    ['Software', `evenfield ${input.toolVersion}`],
    ['Report id (SHA-256 of all inputs except the generation date)', { text: ctx.id, font: 'Mono' }],
    ['Generated', fmtDate(generatedDate(input.generated))],
    ['Colour scales', `${ctx.lumMap.name} for luminance, ${ctx.conMap.name} for contrast (perceptually uniform, readable with colour-vision deficiency)`],
  ], 130, 7.8);
}

// ---------------------------------------------------------------- cautions

function drawCautions(ctx: Ctx): void {
  const { flow } = ctx;
  startSection(ctx, 'Cautions');
  flow.heading('Cautions', 1);

  flow.heading('A camera estimate, not a photometer reading', 2, 60);
  for (const t of ESTIMATE_DETAIL) flow.text(t, { size: 8.5, after: 4 });

  flow.heading('Conditions these figures hold under', 2, 60);
  flow.text('The figures describe this panel as photographed. They hold only as far as these conditions were met:', { size: 8.5, after: 3 });
  for (const t of CONDITIONS) flow.text(`\u2022 ${t}`, { size: 8.5, after: 2 });
  const specific = specificCautions(ctx);
  if (specific.length > 0) {
    flow.gap(3);
    flow.text('For this panel in particular:', { font: 'Sans-Bold', size: 8.5, after: 2 });
    for (const t of specific) flow.text(`\u2022 ${t}`, { size: 8.5, after: 2 });
  }

  flow.heading('Safety when opening a display', 2, 60);
  flow.text(SAFETY_INTRO, { size: 8.5, after: 4 });
  for (const t of SAFETY) flow.text(`\u2022 ${t}`, { size: 8.5, after: 2 });
}

function specificCautions(ctx: Ctx): string[] {
  const out: string[] = [];
  for (const p of ctx.prepared) {
    const ph = p.photo;
    const name = patternName(ph.pattern, ph.patternLevel);
    const va = ph.geometry?.viewAngleMaxDeg;
    if (va !== null && va !== undefined && va > 10) {
      out.push(`${name}: part of the panel was seen ${trim(va, 1)}\u00b0 off its normal; viewing-angle effects may be in the figures.`);
    }
    if (ph.falloff && !ph.falloff.applied) out.push(`${name}: no lens falloff correction was applied, so the corners read darker than they are.`);
    if (ph.exposureStats && ph.exposureStats.clippedFraction > 0) {
      out.push(`${name}: ${fmtPct(ph.exposureStats.clippedFraction * 100, 3)} % of the frame was clipped.`);
    }
    if (p.sizeMm && !p.sizeMm.known) out.push(`${name}: the panel size was assumed, so mm, mm\u00b2 and SEMU are nominal.`);
    if ((ph.pattern === 'black' || (ph.pattern === 'gray' && (ph.patternLevel ?? 100) < 25)) && ph.mura) {
      out.push(`${name}: SEMU on a dark field is an extrapolation of its definition.`);
    }
  }
  return out;
}
