// Page set-up and the few drawing primitives every report page uses: a flowing cursor that starts
// a new page when the next block does not fit, text blocks, tables that repeat their header, the
// verdict symbol, and the footer written on every page once the page count is known.

import PDFDocument from 'pdfkit';
import type { Verdict } from '../types.js';
import { findFonts } from './fonts.js';

export type Doc = PDFKit.PDFDocument;

/** A4 portrait in PDF points. */
export const PAGE = {
  width: 595.28,
  height: 841.89,
  left: 42,
  right: 595.28 - 42,
  top: 56,
  bottom: 841.89 - 50,
  contentWidth: 595.28 - 84,
} as const;

export const INK = '#1a1a1a';
export const MUTED = '#555555';
export const RULE = '#b0b0b0';
export const STRIPE = '#f1f1f1';
/** Verdict colours (colour-blind-safe pair: blue / vermilion, plus amber); never used without a word and a shape. */
export const VERDICT_COLOUR: Record<Verdict, string> = { pass: '#0072B2', fail: '#D55E00', error: '#E69F00' };
export const VERDICT_TINT: Record<Verdict, string> = { pass: '#e3eff8', fail: '#fbe9dd', error: '#fcf2dc' };

export type FontName = 'Sans' | 'Sans-Bold' | 'Mono';

export interface DocMeta {
  title: string;
  subject: string;
  keywords: string;
  creator: string;
  generated: Date;
}

export function createDoc(meta: DocMeta): Doc {
  const fonts = findFonts();
  const doc = new PDFDocument({
    size: 'A4',
    margin: 0,
    autoFirstPage: false,
    bufferPages: true,
    compress: true,
    pdfVersion: '1.7',
    lang: 'en',
    displayTitle: true,
    info: {
      Title: meta.title,
      Subject: meta.subject,
      Keywords: meta.keywords,
      Author: 'evenfield',
      Creator: meta.creator,
      Producer: 'evenfield with PDFKit',
      // pdfkit derives the document ID from the info dictionary, so a fixed date gives fixed bytes.
      CreationDate: meta.generated,
    },
  });
  doc.registerFont('Sans', fonts.regular);
  doc.registerFont('Sans-Bold', fonts.bold);
  doc.registerFont('Mono', fonts.mono);
  doc.font('Sans');
  return doc;
}

/** Finish the document and collect its bytes. */
export function finish(doc: Doc): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    const chunks: Buffer[] = [];
    doc.on('data', (c: Buffer) => chunks.push(c));
    doc.on('end', () => resolve(Buffer.concat(chunks)));
    doc.on('error', reject);
    doc.end();
  });
}

export interface TextStyle {
  font?: FontName;
  size?: number;
  colour?: string;
  align?: 'left' | 'right' | 'center' | 'justify';
  lineGap?: number;
}

export function setStyle(doc: Doc, s: TextStyle): void {
  doc.font(s.font ?? 'Sans').fontSize(s.size ?? 9).fillColor(s.colour ?? INK);
}

/** Height a text block will take at the given width and style. */
export function measure(doc: Doc, text: string, width: number, s: TextStyle = {}): number {
  if (text === '') return 0;
  setStyle(doc, s);
  return doc.heightOfString(text, { width, lineGap: s.lineGap ?? 1 });
}

/** Draw text at (x, y) wrapped to width; returns its height (the same as measure() gives). */
export function textAt(doc: Doc, text: string, x: number, y: number, width: number, s: TextStyle = {}): number {
  if (text === '') return 0;
  setStyle(doc, s);
  doc.text(text, x, y, { width, align: s.align ?? 'left', lineGap: s.lineGap ?? 1 });
  return doc.y - y;
}

/** One line, cut with an ellipsis to fit width. */
export function fitLine(doc: Doc, text: string, width: number, s: TextStyle = {}): string {
  setStyle(doc, s);
  if (doc.widthOfString(text) <= width) return text;
  let lo = 0;
  let hi = text.length;
  while (lo < hi) {
    const mid = Math.ceil((lo + hi) / 2);
    if (doc.widthOfString(`${text.slice(0, mid)}…`) <= width) lo = mid;
    else hi = mid - 1;
  }
  return `${text.slice(0, lo).trimEnd()}…`;
}

/** A vertical cursor over the pages: blocks ask for room and get a new page when there is none. */
export class Flow {
  y: number = PAGE.top;
  pageCount = 0;

  constructor(
    readonly doc: Doc,
    private readonly onNewPage: (flow: Flow) => void = () => {},
  ) {}

  newPage(): void {
    this.doc.addPage({ size: 'A4', margin: 0 });
    this.pageCount++;
    this.y = PAGE.top;
    this.onNewPage(this);
  }

  /** Start a new page unless `height` points still fit on this one. */
  ensure(height: number): void {
    if (this.pageCount === 0 || this.y + height > PAGE.bottom) this.newPage();
  }

  get room(): number {
    return PAGE.bottom - this.y;
  }

  gap(h: number): void {
    this.y += h;
  }

  /** A wrapped paragraph across the content width (or a given column). */
  text(text: string, s: TextStyle & { x?: number; width?: number; after?: number } = {}): void {
    const x = s.x ?? PAGE.left;
    const width = s.width ?? PAGE.right - x;
    const h = measure(this.doc, text, width, s);
    if (h > PAGE.bottom - PAGE.top) {
      // longer than a page: let it run line by line
      for (const line of text.split('\n')) this.text(line, { ...s, after: 0 });
      this.gap(s.after ?? 4);
      return;
    }
    this.ensure(h);
    textAt(this.doc, text, x, this.y, width, s);
    this.y += h + (s.after ?? 4);
  }

  heading(text: string, level: 1 | 2 | 3 = 2, keepWith = 60): void {
    const size = level === 1 ? 16 : level === 2 ? 12.5 : 10.5;
    const before = level === 1 ? 0 : level === 2 ? 10 : 6;
    const h = measure(this.doc, text, PAGE.contentWidth, { font: 'Sans-Bold', size });
    if (this.y > PAGE.top) this.y += before;
    this.ensure(h + keepWith);
    textAt(this.doc, text, PAGE.left, this.y, PAGE.contentWidth, { font: 'Sans-Bold', size });
    this.y += h + (level === 1 ? 6 : 4);
    if (level <= 2) {
      this.doc.moveTo(PAGE.left, this.y - 2).lineTo(PAGE.right, this.y - 2).lineWidth(level === 1 ? 1 : 0.5).strokeColor(RULE).stroke();
      this.y += 3;
    }
  }
}

export interface Column {
  header: string;
  width: number;
  align?: 'left' | 'right' | 'center';
  font?: FontName;
}

export interface Cell {
  text: string;
  font?: FontName;
  colour?: string;
}

export interface TableOptions {
  size?: number;
  x?: number;
  stripes?: boolean;
  /** draw something in a cell after its text, e.g. a verdict symbol (cell box given) */
  decorate?: (row: number, col: number, box: { x: number; y: number; w: number; h: number }) => void;
  /** keep the header plus this many rows together */
  keepRows?: number;
}

const PAD_X = 3;
const PAD_Y = 2;

function cellText(c: string | Cell): Cell {
  return typeof c === 'string' ? { text: c } : c;
}

function headerHeightOf(doc: Doc, columns: Column[], size: number): number {
  return Math.max(...columns.map((c) => measure(doc, c.header, c.width - 2 * PAD_X, { font: 'Sans-Bold', size }))) + 2 * PAD_Y;
}

function rowHeightOf(doc: Doc, columns: Column[], r: Array<string | Cell>, size: number): number {
  return (
    Math.max(
      ...columns.map((c, i) => {
        const cell = cellText(r[i] ?? '');
        return measure(doc, cell.text, c.width - 2 * PAD_X, { font: cell.font ?? c.font ?? 'Sans', size });
      }),
    ) + 2 * PAD_Y
  );
}

/** Height of a table's header plus the rows it keeps together with it (see keepRows). */
export function tableHeight(doc: Doc, columns: Column[], rows: Array<Array<string | Cell>>, opts: TableOptions = {}): number {
  const size = opts.size ?? 8;
  const keep = Math.min(rows.length, opts.keepRows ?? 2);
  return headerHeightOf(doc, columns, size) + rows.slice(0, keep).reduce((a, r) => a + rowHeightOf(doc, columns, r, size), 0);
}

/** A table that flows across pages, repeating its header row. */
export function drawTable(flow: Flow, columns: Column[], rows: Array<Array<string | Cell>>, opts: TableOptions = {}): void {
  const doc = flow.doc;
  const size = opts.size ?? 8;
  const x0 = opts.x ?? PAGE.left;
  const totalW = columns.reduce((a, c) => a + c.width, 0);
  const cellOf = cellText;
  const headerHeight = headerHeightOf(doc, columns, size);
  const rowHeight = (r: Array<string | Cell>): number => rowHeightOf(doc, columns, r, size);

  const drawHeader = (): void => {
    let x = x0;
    for (const c of columns) {
      textAt(doc, c.header, x + PAD_X, flow.y + PAD_Y, c.width - 2 * PAD_X, { font: 'Sans-Bold', size, align: c.align ?? 'left' });
      x += c.width;
    }
    flow.y += headerHeight;
    doc.moveTo(x0, flow.y).lineTo(x0 + totalW, flow.y).lineWidth(0.8).strokeColor(INK).stroke();
  };

  flow.ensure(tableHeight(doc, columns, rows, opts));
  drawHeader();

  rows.forEach((r, ri) => {
    const h = rowHeight(r);
    if (flow.y + h > PAGE.bottom) {
      flow.newPage();
      drawHeader();
    }
    if (opts.stripes !== false && ri % 2 === 1) {
      doc.rect(x0, flow.y, totalW, h).fillColor(STRIPE).fill();
    }
    let x = x0;
    columns.forEach((c, ci) => {
      const cell = cellOf(r[ci] ?? '');
      textAt(doc, cell.text, x + PAD_X, flow.y + PAD_Y, c.width - 2 * PAD_X, {
        font: cell.font ?? c.font ?? 'Sans',
        size,
        colour: cell.colour ?? INK,
        align: c.align ?? 'left',
      });
      opts.decorate?.(ri, ci, { x, y: flow.y, w: c.width, h });
      x += c.width;
    });
    flow.y += h;
  });
  doc.moveTo(x0, flow.y).lineTo(x0 + totalW, flow.y).lineWidth(0.5).strokeColor(RULE).stroke();
  flow.y += 6;
}

/** Label / value pairs in two columns. */
export function drawPairs(flow: Flow, pairs: Array<[string, string | Cell]>, labelWidth = 150, size = 8.5): void {
  const doc = flow.doc;
  const valueW = PAGE.contentWidth - labelWidth;
  for (const [label, v] of pairs) {
    const cell = typeof v === 'string' ? { text: v } : v;
    const h = Math.max(
      measure(doc, label, labelWidth - 6, { font: 'Sans-Bold', size }),
      measure(doc, cell.text, valueW, { font: cell.font ?? 'Sans', size }),
    );
    flow.ensure(h + 2);
    textAt(doc, label, PAGE.left, flow.y, labelWidth - 6, { font: 'Sans-Bold', size, colour: MUTED });
    textAt(doc, cell.text, PAGE.left + labelWidth, flow.y, valueW, { font: cell.font ?? 'Sans', size, colour: cell.colour ?? INK });
    flow.y += h + 2.5;
  }
}

/**
 * The verdict symbol: PASS a circle with a tick, FAIL an octagon with a cross, NOT JUDGED a
 * triangle with an exclamation mark. Shape and word carry the meaning; colour only adds to it.
 */
export function drawVerdictSymbol(doc: Doc, verdict: Verdict, cx: number, cy: number, r: number): void {
  doc.save();
  const colour = VERDICT_COLOUR[verdict];
  if (verdict === 'pass') {
    doc.circle(cx, cy, r).fillColor(colour).fill();
    doc
      .moveTo(cx - 0.5 * r, cy + 0.02 * r)
      .lineTo(cx - 0.12 * r, cy + 0.4 * r)
      .lineTo(cx + 0.52 * r, cy - 0.38 * r)
      .lineWidth(Math.max(1, r * 0.2))
      .lineCap('round')
      .lineJoin('round')
      .strokeColor('#ffffff')
      .stroke();
  } else if (verdict === 'fail') {
    const pts: Array<[number, number]> = [];
    for (let i = 0; i < 8; i++) {
      const a = Math.PI / 8 + (i * Math.PI) / 4;
      pts.push([cx + r * Math.cos(a), cy + r * Math.sin(a)]);
    }
    doc.polygon(...pts).fillColor(colour).fill();
    const k = 0.38 * r;
    doc
      .moveTo(cx - k, cy - k)
      .lineTo(cx + k, cy + k)
      .moveTo(cx + k, cy - k)
      .lineTo(cx - k, cy + k)
      .lineWidth(Math.max(1, r * 0.2))
      .lineCap('round')
      .strokeColor('#ffffff')
      .stroke();
  } else {
    const h = r * 1.9;
    doc
      .polygon([cx, cy - 0.55 * h], [cx + r * 1.05, cy + 0.45 * h], [cx - r * 1.05, cy + 0.45 * h])
      .fillColor(colour)
      .fill();
    doc
      .moveTo(cx, cy - 0.22 * h)
      .lineTo(cx, cy + 0.12 * h)
      .lineWidth(Math.max(1, r * 0.18))
      .lineCap('round')
      .strokeColor(INK)
      .stroke();
    doc.circle(cx, cy + 0.29 * h, Math.max(0.6, r * 0.1)).fillColor(INK).fill();
  }
  doc.restore();
}

/** Write the running header (pages after the first) and the footer on every page. */
export function drawPageFurniture(doc: Doc, header: string, footerLeft: string, footerCentre: string): void {
  const range = doc.bufferedPageRange();
  const total = range.count;
  for (let i = range.start; i < range.start + total; i++) {
    doc.switchToPage(i);
    const n = i - range.start + 1;
    if (n > 1) {
      textAt(doc, header, PAGE.left, 28, PAGE.contentWidth, { size: 7.5, colour: MUTED });
      doc.moveTo(PAGE.left, 40).lineTo(PAGE.right, 40).lineWidth(0.4).strokeColor(RULE).stroke();
    }
    const y = PAGE.height - 34;
    doc.moveTo(PAGE.left, y - 5).lineTo(PAGE.right, y - 5).lineWidth(0.4).strokeColor(RULE).stroke();
    const third = PAGE.contentWidth / 3;
    setStyle(doc, { size: 7.5, colour: MUTED });
    doc.text(fitLine(doc, footerLeft, third - 4, { size: 7.5 }), PAGE.left, y, { width: third, lineBreak: false });
    setStyle(doc, { size: 7.5, colour: MUTED });
    doc.text(fitLine(doc, footerCentre, third - 4, { size: 7.5 }), PAGE.left + third, y, { width: third, align: 'center', lineBreak: false });
    setStyle(doc, { size: 7.5, colour: MUTED });
    doc.text(`Page ${n} of ${total}`, PAGE.right - third, y, { width: third, align: 'right', lineBreak: false });
  }
}
