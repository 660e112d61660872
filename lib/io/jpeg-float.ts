// Baseline JPEG decoding to real-valued samples.
//
// Why: an 8-bit decoder rounds the inverse DCT's output to whole code values. On a smooth, lightly
// noisy field (a display showing a flat pattern) the encoder has zeroed most AC coefficients, so whole
// 8×8 blocks come out flat and the rounding is not dithered: every block of a region is off by the same
// fraction of a code value (up to half a code, about 0.6 % of linear light at mid-gray), which no
// averaging removes. The coefficients themselves carry the level to a fraction of a code (the DC
// quantiser step over 8). This decoder keeps that: dequantised coefficients, a floating-point inverse
// DCT (ITU-T T.81, A.3.3), no rounding, and YCbCr to RGB (JFIF 1.02) in floating point; only the range
// is limited to [0, 255] as every decoder does.
//
// Scope: Huffman-coded baseline and extended-sequential files (one interleaved scan) and progressive
// files (any scans), 8-bit samples, 1 or 3 components, sampling factors 1 or 2 (4:4:4, 4:2:2, 4:2:0,
// 4:4:0), restart intervals. Anything else (arithmetic coding, 12-bit, CMYK, sequential files in
// several scans) returns null and the caller decodes with libvips. Damaged entropy-coded data throws JpegDataError (the caller then lets libvips report
// it in its words).
//
// Output is streamed: each row of MCUs is turned into linear light and averaged into the reduced image
// as soon as it is decoded (progressive files: once all scans are read into the coefficient arrays), so
// no full-size sample buffer exists.

import { transferDecode, type Transfer } from '../photometry/index.js';
import type { Reduced } from './decode.js';

export class JpegDataError extends Error {}

/** The natural (row-major) index of the k-th coefficient in zig-zag order (T.81, Figure A.6). */
const ZIGZAG = new Uint8Array([
  0, 1, 8, 16, 9, 2, 3, 10, 17, 24, 32, 25, 18, 11, 4, 5, 12, 19, 26, 33, 40, 48, 41, 34, 27, 20, 13, 6, 7, 14, 21, 28, 35, 42, 49, 56, 57, 50, 43, 36, 29,
  22, 15, 23, 30, 37, 44, 51, 58, 59, 52, 45, 38, 31, 39, 46, 53, 60, 61, 54, 47, 55, 62, 63,
]);

/** IDCT basis: BASIS[x * 8 + u] = C(u)/2 · cos((2x + 1)uπ/16), C(0) = 1/√2 (T.81, A.3.3). */
const BASIS = new Float64Array(64);
for (let x = 0; x < 8; x++) for (let u = 0; u < 8; u++) BASIS[x * 8 + u] = ((u === 0 ? Math.SQRT1_2 : 1) * Math.cos(((2 * x + 1) * u * Math.PI) / 16)) / 2;

const LOOKUP_BITS = 9;

interface Huffman {
  /** (length << 8) | symbol for codes up to LOOKUP_BITS long, indexed by the next LOOKUP_BITS bits; 0 = longer */
  fast: Uint16Array;
  /** largest code of each length (−1: none), smallest code, index of its first symbol (T.81, F.2.2.3) */
  maxCode: Int32Array;
  minCode: Int32Array;
  valPtr: Int32Array;
  values: Uint8Array;
}

function buildHuffman(counts: Uint8Array, values: Uint8Array): Huffman {
  const fast = new Uint16Array(1 << LOOKUP_BITS);
  const maxCode = new Int32Array(18).fill(-1);
  const minCode = new Int32Array(17);
  const valPtr = new Int32Array(17);
  let code = 0;
  let k = 0;
  for (let len = 1; len <= 16; len++) {
    const n = counts[len - 1]!;
    valPtr[len] = k;
    minCode[len] = code;
    for (let i = 0; i < n; i++, k++, code++) {
      if (code >= 1 << len) throw new JpegDataError('Huffman table with more codes than its lengths allow');
      if (len <= LOOKUP_BITS) {
        const shift = LOOKUP_BITS - len;
        const first = code << shift;
        for (let j = 0; j < 1 << shift; j++) fast[first + j] = (len << 8) | values[k]!;
      }
    }
    maxCode[len] = n > 0 ? code - 1 : -1;
    code <<= 1;
  }
  maxCode[17] = 0x7fffffff;
  return { fast, maxCode, minCode, valPtr, values };
}

/** Entropy-coded data: bits MSB first, 0xFF00 stuffing removed; a marker stops the bits (zeros follow). */
class BitReader {
  private acc = 0;
  private n = 0;
  /** zero bytes fed after a marker or the end of data */
  private padded = 0;
  constructor(
    private readonly data: Uint8Array,
    public pos: number,
  ) {}

  private fill(): void {
    const d = this.data;
    while (this.n <= 16) {
      let b = 0;
      if (this.padded === 0 && this.pos < d.length) {
        b = d[this.pos]!;
        if (b === 0xff) {
          const b2 = this.pos + 1 < d.length ? d[this.pos + 1]! : 0xd9;
          if (b2 === 0) this.pos += 2;
          else {
            b = 0;
            this.padded = 1;
          }
        } else this.pos++;
      } else {
        b = 0;
        // a block may read a little past its last bit (peeking): allow a few bytes, not a missing block
        if (++this.padded > 8) throw new JpegDataError('entropy-coded data ends early');
      }
      this.acc = ((this.acc << 8) | b) & 0xffffff;
      this.n += 8;
    }
  }

  decode(h: Huffman): number {
    if (this.n <= 16) this.fill();
    const look = (this.acc >>> (this.n - LOOKUP_BITS)) & ((1 << LOOKUP_BITS) - 1);
    const e = h.fast[look]!;
    if (e !== 0) {
      this.n -= e >> 8;
      return e & 0xff;
    }
    let len = LOOKUP_BITS + 1;
    let code = (this.acc >>> (this.n - len)) & ((1 << len) - 1);
    while (len <= 16 && code > h.maxCode[len]!) {
      len++;
      code = (this.acc >>> (this.n - len)) & ((1 << len) - 1);
    }
    if (len > 16) throw new JpegDataError('bad Huffman code');
    this.n -= len;
    return h.values[h.valPtr[len]! + code - h.minCode[len]!]!;
  }

  /** n raw bits (n <= 16). */
  bits(n: number): number {
    if (this.n < n) this.fill();
    const v = (this.acc >>> (this.n - n)) & ((1 << n) - 1);
    this.n -= n;
    return v;
  }

  /** s more bits as a signed difference (T.81, F.2.2.1 EXTEND). */
  receiveExtend(s: number): number {
    if (s === 0) return 0;
    if (this.n < s) this.fill();
    const v = (this.acc >>> (this.n - s)) & ((1 << s) - 1);
    this.n -= s;
    return v < 1 << (s - 1) ? v - (1 << s) + 1 : v;
  }

  /** Discard the bits left in the byte, expect RSTn at the read position and step over it. */
  restart(expected: number): void {
    if (this.overrun()) throw new JpegDataError('entropy-coded data ends early');
    this.acc = 0;
    this.n = 0;
    this.padded = 0;
    const d = this.data;
    while (this.pos < d.length && d[this.pos] === 0xff && d[this.pos + 1] === 0xff) this.pos++;
    if (this.pos + 1 >= d.length || d[this.pos] !== 0xff || d[this.pos + 1] !== 0xd0 + expected) throw new JpegDataError('restart marker missing');
    this.pos += 2;
  }

  /** true when bits past the end of the entropy-coded data (the zeros fed after a marker) were used */
  overrun(): boolean {
    return this.padded * 8 - this.n > 0;
  }
}

export interface FloatDecodeOptions {
  /** output at 1/scale of full size: each output pixel is the linear-light mean of a scale×scale block */
  scale: 1 | 2 | 4 | 8;
  transfer: Transfer;
  /** a full-size pixel counts as clipped when its largest channel, rounded, is at or above this code */
  clipCode: number;
  /** ... and as dark when its largest channel, rounded, is below this code */
  darkCode: number;
  /** also make a clip mask of the output: 1 where any channel is at or above this linear level */
  clipLinear: number | null;
  /** luminance weights of R, G, B */
  weights: readonly [number, number, number];
}

/** The reduced image as decode.ts's other paths make it, and the luma DC quantiser: a block's mean level
 *  moves in steps of this over 8 codes. */
export type FloatDecoded = Reduced & { lumaDcQuant: number; lumaBlocks: FlatBlocks };

/**
 * The luma blocks that carry no AC term (flat: every sample at the block's mean) and their mean code
 * value (0-255, the DC term over 8 plus the level shift); NaN for the others. Block (i, j) covers the
 * full-size pixels from (i blockW, j blockH), blockW x blockH of them.
 */
export interface FlatBlocks {
  cols: number;
  rows: number;
  blockW: number;
  blockH: number;
  mean: Float32Array;
}

interface Comp {
  id: number;
  h: number;
  v: number;
  tq: number;
  dc: Huffman | null;
  ac: Huffman | null;
  pred: number;
  /** samples of one MCU row: (mcusPerLine · h · 8) wide, v · 8 high */
  rows: Float32Array;
  stride: number;
  /** blocks across and down the MCU-padded frame (coefficient storage of progressive files) */
  bw: number;
  bh: number;
  /** the component's own size in samples */
  cw: number;
  ch: number;
  /** luma only: the mean code of each flat block, NaN for the others (FlatBlocks.mean) */
  flat?: Float32Array;
}

/** Code value (0..255, real) to linear light: a table of 16 steps per code, linearly interpolated. Kept
 *  as pairs (value at the step, difference to the next step), so that a lookup reads one place. */
const STEPS = 16;
const linearTables = new Map<string, Float64Array>();
function linearTable(transfer: Transfer): Float64Array {
  const key = typeof transfer === 'string' ? transfer : `response ${transfer.id}`;
  let pairs = linearTables.get(key);
  if (!pairs) {
    const t = new Float64Array(255 * STEPS + 2);
    for (let i = 0; i < t.length; i++) {
      const v = Math.min(1, i / (255 * STEPS));
      t[i] = transferDecode(transfer, v);
    }
    pairs = new Float64Array(2 * (t.length - 1));
    for (let i = 0; i + 1 < t.length; i++) {
      pairs[2 * i] = t[i]!;
      pairs[2 * i + 1] = t[i + 1]! - t[i]!;
    }
    linearTables.set(key, pairs);
  }
  return pairs;
}

/** Linear light of a code value (0..255, real) from a linearTable, interpolated between its steps. */
function lin(table: Float64Array, v: number): number {
  const f = v * STEPS;
  const i = f | 0;
  return table[2 * i]! + (f - i) * table[2 * i + 1]!;
}

/**
 * Decode a baseline or progressive Huffman-coded JPEG to linear light at 1/scale, without rounding
 * samples to whole codes. Returns null for files outside this decoder's scope (see the file's header).
 */
export function decodeJpegFloat(data: Uint8Array, opts: FloatDecodeOptions): FloatDecoded | null {
  if (data.length < 4 || data[0] !== 0xff || data[1] !== 0xd8) return null;
  const qt: (Float64Array | undefined)[] = [];
  const dcTables: (Huffman | undefined)[] = [];
  const acTables: (Huffman | undefined)[] = [];
  let restartInterval = 0;
  let adobeTransform: number | null = null;
  let frame: Frame | null = null;
  let progressive = false;
  let coefs: Int16Array[] | null = null;
  let pos = 2;
  const u16 = (p: number): number => (data[p]! << 8) | data[p + 1]!;
  while (pos < data.length) {
    if (data[pos] !== 0xff) throw new JpegDataError(`marker expected at byte ${pos}`);
    while (data[pos] === 0xff) pos++;
    const m = data[pos++]!;
    if (m === 0xd8 || (m >= 0xd0 && m <= 0xd7) || m === 0x01) continue;
    if (m === 0xd9) break;
    if (pos + 2 > data.length) throw new JpegDataError('truncated marker segment');
    const len = u16(pos);
    const end = pos + len;
    if (len < 2 || end > data.length) throw new JpegDataError('truncated marker segment');
    let p = pos + 2;
    if (m === 0xdb) {
      while (p < end) {
        const pq = data[p]! >> 4;
        const tq = data[p]! & 15;
        p++;
        const t = new Float64Array(64);
        for (let k = 0; k < 64; k++) {
          t[ZIGZAG[k]!] = pq ? u16(p + 2 * k) : data[p + k]!;
        }
        p += pq ? 128 : 64;
        qt[tq] = t;
      }
    } else if (m === 0xc4) {
      while (p < end) {
        const tc = data[p]! >> 4;
        const th = data[p]! & 15;
        const counts = data.subarray(p + 1, p + 17);
        let total = 0;
        for (let i = 0; i < 16; i++) total += counts[i]!;
        const values = data.subarray(p + 17, p + 17 + total);
        if (p + 17 + total > end) throw new JpegDataError('truncated Huffman table');
        (tc === 0 ? dcTables : acTables)[th] = buildHuffman(counts, values);
        p += 17 + total;
      }
    } else if (m === 0xdd) {
      restartInterval = u16(p);
    } else if (m === 0xee) {
      // Adobe APP14: transform 0 = RGB (or CMYK), 1 = YCbCr, 2 = YCCK
      if (len >= 14 && String.fromCharCode(...data.subarray(p, p + 5)) === 'Adobe') adobeTransform = data[p + 11]!;
    } else if (m === 0xc0 || m === 0xc1 || m === 0xc2) {
      if (frame) throw new JpegDataError('second frame header');
      if (data[p] !== 8) return null;
      const height = u16(p + 1);
      const width = u16(p + 3);
      const nf = data[p + 5]!;
      if (height === 0 || width === 0 || (nf !== 1 && nf !== 3)) return null;
      const comps: Comp[] = [];
      for (let i = 0; i < nf; i++) {
        const q = p + 6 + 3 * i;
        comps.push({ id: data[q]!, h: data[q + 1]! >> 4, v: data[q + 1]! & 15, tq: data[q + 2]!, dc: null, ac: null, pred: 0, rows: new Float32Array(0), stride: 0, bw: 0, bh: 0, cw: 0, ch: 0 });
      }
      frame = frameOf(width, height, comps, opts);
      if (!frame) return null;
      progressive = m === 0xc2;
      if (progressive) coefs = frame.comps.map((c) => new Int16Array(c.bw * c.bh * 64));
    } else if (m >= 0xc3 && m <= 0xcf && m !== 0xc4 && m !== 0xc8 && m !== 0xcc) {
      return null; // lossless, hierarchical or arithmetic-coded
    } else if (m === 0xda) {
      if (!frame) throw new JpegDataError('scan before frame header');
      const ns = data[p]!;
      const scomps: Comp[] = [];
      for (let i = 0; i < ns; i++) {
        const cid = data[p + 1 + 2 * i]!;
        const tables = data[p + 2 + 2 * i]!;
        const c = frame.comps.find((x) => x.id === cid);
        if (!c) throw new JpegDataError('scan names an unknown component');
        c.dc = dcTables[tables >> 4] ?? null;
        c.ac = acTables[tables & 15] ?? null;
        scomps.push(c);
      }
      const q = p + 1 + 2 * ns;
      const ss = data[q]!;
      const se = data[q + 1]!;
      const ah = data[q + 2]! >> 4;
      const al = data[q + 2]! & 15;
      if (!progressive) {
        if (ns !== frame.comps.length) return null; // non-interleaved sequential scans
        for (const c of frame.comps) {
          if (!c.dc || !c.ac) throw new JpegDataError('scan uses an undefined Huffman table');
          if (!qt[c.tq]) throw new JpegDataError('component uses an undefined quantisation table');
        }
        const ycc = isYcc(frame.comps, adobeTransform);
        const out = new Emitter(frame, opts, ycc);
        const reader = decodeBaseline(data, end, frame, qt as Float64Array[], restartInterval, out);
        expectEnd(data, reader);
        return out.result(qt[frame.comps[0]!.tq]![0]!);
      }
      if (ss > se || se > 63 || (ss === 0 && se !== 0) || (ss > 0 && ns !== 1) || al > 13) throw new JpegDataError('bad progressive scan parameters');
      for (const c of scomps) {
        if (ss === 0 && ah === 0 && !c.dc) throw new JpegDataError('scan uses an undefined Huffman table');
        if (ss > 0 && !c.ac) throw new JpegDataError('scan uses an undefined Huffman table');
      }
      const reader = decodeProgressiveScan(data, end, frame, scomps, coefs!, restartInterval, ss, se, ah, al);
      if (reader.overrun()) throw new JpegDataError('entropy-coded data ends early');
      // continue at the marker that ends the scan
      let r = reader.pos;
      while (r + 1 < data.length && !(data[r] === 0xff && data[r + 1] !== 0 && data[r + 1] !== 0xff && (data[r + 1]! < 0xd0 || data[r + 1]! > 0xd7))) r++;
      if (r + 1 >= data.length) throw new JpegDataError('no end-of-image marker after the scan');
      pos = r;
      continue;
    }
    pos = end;
  }
  if (progressive && frame && coefs) {
    if (pos >= data.length && data[data.length - 1] !== 0xd9) throw new JpegDataError('no end-of-image marker');
    for (const c of frame.comps) if (!qt[c.tq]) throw new JpegDataError('component uses an undefined quantisation table');
    const out = new Emitter(frame, opts, isYcc(frame.comps, adobeTransform));
    renderCoefficients(frame, coefs, qt as Float64Array[], out);
    return out.result(qt[frame.comps[0]!.tq]![0]!);
  }
  throw new JpegDataError('no image data');
}

function isYcc(comps: Comp[], adobeTransform: number | null): boolean {
  return comps.length === 3 && adobeTransform !== 0 && !(comps[0]!.id === 82 && comps[1]!.id === 71 && comps[2]!.id === 66);
}

/** The next marker after a scan must end the image (libjpeg, too, calls a file without it truncated). */
function expectEnd(data: Uint8Array, reader: BitReader): void {
  if (reader.overrun()) throw new JpegDataError('entropy-coded data ends early');
  let q = reader.pos;
  while (q + 1 < data.length && !(data[q] === 0xff && data[q + 1] !== 0 && data[q + 1] !== 0xff && (data[q + 1]! < 0xd0 || data[q + 1]! > 0xd7))) q++;
  if (q + 1 >= data.length || data[q + 1] !== 0xd9) throw new JpegDataError('no end-of-image marker after the scan');
}

interface Frame {
  W: number;
  H: number;
  comps: Comp[];
  hmax: number;
  vmax: number;
  mcuW: number;
  mcuH: number;
  mcusPerLine: number;
  mcuRows: number;
}

/** Frame geometry (T.81, A.1.1): MCU size, each component's block grid. Null for sampling outside scope. */
function frameOf(W: number, H: number, comps: Comp[], opts: FloatDecodeOptions): Frame | null {
  const hmax = Math.max(...comps.map((c) => c.h));
  const vmax = Math.max(...comps.map((c) => c.v));
  for (const c of comps) {
    if (c.h < 1 || c.v < 1 || hmax / c.h > 2 || vmax / c.v > 2 || hmax % c.h || vmax % c.v) return null;
  }
  // the component's own size and block grid, before the sampling factors are normalised below
  for (const c of comps) {
    c.cw = Math.ceil((W * c.h) / hmax);
    c.ch = Math.ceil((H * c.v) / vmax);
  }
  if (comps.length === 1) {
    // a single-component frame is never interleaved: one block per MCU whatever the sampling factors
    comps[0]!.h = 1;
    comps[0]!.v = 1;
  }
  const mh = comps.length === 1 ? 1 : hmax;
  const mv = comps.length === 1 ? 1 : vmax;
  const mcuW = 8 * mh;
  const mcuH = 8 * mv;
  const mcusPerLine = Math.ceil(W / mcuW);
  const mcuRows = Math.ceil(H / mcuH);
  if (mcuH % opts.scale !== 0) return null;
  for (const c of comps) {
    c.stride = mcusPerLine * c.h * 8;
    c.rows = new Float32Array(c.stride * c.v * 8);
    c.bw = mcusPerLine * c.h;
    c.bh = mcuRows * c.v;
  }
  comps[0]!.flat = new Float32Array(comps[0]!.bw * comps[0]!.bh).fill(NaN);
  return { W, H, comps, hmax: comps.length === 1 ? 1 : hmax, vmax: comps.length === 1 ? 1 : vmax, mcuW, mcuH, mcusPerLine, mcuRows };
}

/** One sequential scan of all components, decoded and emitted one MCU row at a time (T.81, F.2.2). */
function decodeBaseline(data: Uint8Array, start: number, f: Frame, qt: Float64Array[], restartInterval: number, out: Emitter): BitReader {
  const reader = new BitReader(data, start);
  const coef = new Float64Array(64);
  const tmp = new Float64Array(64);
  let mcuCount = 0;
  let nextRst = 0;
  for (let my = 0; my < f.mcuRows; my++) {
    for (let mx = 0; mx < f.mcusPerLine; mx++) {
      if (restartInterval > 0 && mcuCount > 0 && mcuCount % restartInterval === 0) {
        reader.restart(nextRst);
        nextRst = (nextRst + 1) & 7;
        for (const c of f.comps) c.pred = 0;
      }
      mcuCount++;
      for (const c of f.comps) {
        const q = qt[c.tq]!;
        for (let by = 0; by < c.v; by++) {
          for (let bx = 0; bx < c.h; bx++) {
            // one block (T.81, F.2.2): DC difference, then run/size AC pairs
            const t = reader.decode(c.dc!);
            if (t > 11) throw new JpegDataError('bad DC difference size');
            c.pred += reader.receiveExtend(t);
            coef.fill(0);
            coef[0] = c.pred * q[0]!;
            let rowMask = 1;
            let colMax = 0;
            for (let k = 1; k < 64; ) {
              const rs = reader.decode(c.ac!);
              const sz = rs & 15;
              const run = rs >> 4;
              if (sz === 0) {
                if (run === 15) {
                  k += 16;
                  continue;
                }
                break;
              }
              k += run;
              if (k > 63) throw new JpegDataError('AC coefficient index past 63');
              const z = ZIGZAG[k]!;
              coef[z] = reader.receiveExtend(sz) * q[z]!;
              rowMask |= 1 << (z >> 3);
              if ((z & 7) > colMax) colMax = z & 7;
              k++;
            }
            if (c.flat && rowMask === 1 && colMax === 0) c.flat[(my * c.v + by) * c.bw + mx * c.h + bx] = coef[0]! / 8 + 128;
            idct(coef, tmp, rowMask, colMax, c.rows, by * 8 * c.stride + (mx * c.h + bx) * 8, c.stride);
          }
        }
      }
    }
    out.emitMcuRow(my);
  }
  return reader;
}

/**
 * One scan of a progressive JPEG into the coefficient arrays (T.81, G.1.2; the refinement of AC
 * coefficients follows G.1.2.3): DC first and refinement scans, interleaved or not; AC first and
 * refinement scans of one component, with end-of-band runs.
 */
function decodeProgressiveScan(
  data: Uint8Array,
  start: number,
  f: Frame,
  scomps: Comp[],
  coefs: Int16Array[],
  restartInterval: number,
  ss: number,
  se: number,
  ah: number,
  al: number,
): BitReader {
  const reader = new BitReader(data, start);
  const p1 = 1 << al;
  const m1 = -1 << al;
  let eobrun = 0;
  const blockDc = (c: Comp, store: Int16Array, at: number): void => {
    if (ah === 0) {
      const t = reader.decode(c.dc!);
      if (t > 11) throw new JpegDataError('bad DC difference size');
      c.pred += reader.receiveExtend(t);
      store[at] = c.pred * p1;
    } else if (reader.bits(1)) store[at] = store[at]! | p1;
  };
  const blockAcFirst = (c: Comp, store: Int16Array, at: number): void => {
    if (eobrun > 0) {
      eobrun--;
      return;
    }
    for (let k = ss; k <= se; k++) {
      const rs = reader.decode(c.ac!);
      const s = rs & 15;
      const r = rs >> 4;
      if (s) {
        k += r;
        if (k > 63) throw new JpegDataError('AC coefficient index past 63');
        store[at + ZIGZAG[k]!] = reader.receiveExtend(s) * p1;
      } else if (r === 15) {
        k += 15;
      } else {
        eobrun = (1 << r) - 1;
        if (r) eobrun += reader.bits(r);
        break;
      }
    }
  };
  const refine = (store: Int16Array, z: number): void => {
    if (reader.bits(1) && (store[z]! & p1) === 0) store[z] = store[z]! + (store[z]! >= 0 ? p1 : m1);
  };
  const blockAcRefine = (c: Comp, store: Int16Array, at: number): void => {
    let k = ss;
    if (eobrun === 0) {
      for (; k <= se; k++) {
        const rs = reader.decode(c.ac!);
        let r = rs >> 4;
        let s = rs & 15;
        if (s) {
          if (s !== 1) throw new JpegDataError('bad AC refinement size');
          s = reader.bits(1) ? p1 : m1;
        } else if (r !== 15) {
          eobrun = 1 << r;
          if (r) eobrun += reader.bits(r);
          break;
        }
        while (k <= se) {
          const z = at + ZIGZAG[k]!;
          if (store[z] !== 0) refine(store, z);
          else if (--r < 0) break;
          k++;
        }
        if (s) {
          if (k > 63) throw new JpegDataError('AC coefficient index past 63');
          store[at + ZIGZAG[k]!] = s;
        }
      }
    }
    if (eobrun > 0) {
      for (; k <= se; k++) {
        const z = at + ZIGZAG[k]!;
        if (store[z] !== 0) refine(store, z);
      }
      eobrun--;
    }
  };
  const block = ss === 0 ? blockDc : ah === 0 ? blockAcFirst : blockAcRefine;
  let count = 0;
  let nextRst = 0;
  const restartCheck = (): void => {
    if (restartInterval > 0 && count > 0 && count % restartInterval === 0) {
      reader.restart(nextRst);
      nextRst = (nextRst + 1) & 7;
      for (const c of f.comps) c.pred = 0;
      eobrun = 0;
    }
    count++;
  };
  for (const c of f.comps) c.pred = 0;
  if (scomps.length === 1) {
    // non-interleaved: the component's own blocks in raster order (T.81, A.2.2)
    const c = scomps[0]!;
    const store = coefs[f.comps.indexOf(c)]!;
    const bw = Math.ceil(c.cw / 8);
    const bh = Math.ceil(c.ch / 8);
    for (let by = 0; by < bh; by++) {
      for (let bx = 0; bx < bw; bx++) {
        restartCheck();
        block(c, store, (by * c.bw + bx) * 64);
      }
    }
  } else {
    for (let my = 0; my < f.mcuRows; my++) {
      for (let mx = 0; mx < f.mcusPerLine; mx++) {
        restartCheck();
        for (const c of scomps) {
          const store = coefs[f.comps.indexOf(c)]!;
          for (let by = 0; by < c.v; by++) {
            for (let bx = 0; bx < c.h; bx++) block(c, store, ((my * c.v + by) * c.bw + mx * c.h + bx) * 64);
          }
        }
      }
    }
  }
  return reader;
}

/** Dequantise and transform the stored coefficients, one MCU row at a time, into the emitter. */
function renderCoefficients(f: Frame, coefs: Int16Array[], qt: Float64Array[], out: Emitter): void {
  const coef = new Float64Array(64);
  const tmp = new Float64Array(64);
  for (let my = 0; my < f.mcuRows; my++) {
    f.comps.forEach((c, ci) => {
      const q = qt[c.tq]!;
      const store = coefs[ci]!;
      for (let by = 0; by < c.v; by++) {
        for (let bx = 0; bx < c.bw; bx++) {
          const at = ((my * c.v + by) * c.bw + bx) * 64;
          let rowMask = 1;
          let colMax = 0;
          for (let z = 0; z < 64; z++) {
            const v = store[at + z]!;
            coef[z] = v * q[z]!;
            if (v !== 0 && z > 0) {
              rowMask |= 1 << (z >> 3);
              if ((z & 7) > colMax) colMax = z & 7;
            }
          }
          if (c.flat && rowMask === 1 && colMax === 0) c.flat[(my * c.v + by) * c.bw + bx] = coef[0]! / 8 + 128;
          idct(coef, tmp, rowMask, colMax, c.rows, by * 8 * c.stride + bx * 8, c.stride);
        }
      }
    });
    out.emitMcuRow(my);
  }
}

/** Colour, linear light and the s×s means of each decoded MCU row, streamed into the reduced image. */
class Emitter {
  private readonly out: Float32Array;
  private readonly lum: Float32Array;
  private readonly clipMask: Uint8Array | null;
  private readonly acc: Float64Array;
  private readonly w: number;
  private readonly h: number;
  private clipped = 0;
  private dark = 0;
  /** luminance weights (opts.weights), kept as fields: put() runs once per output pixel */
  private readonly wr: number;
  private readonly wg: number;
  private readonly wb: number;
  constructor(
    private readonly f: Frame,
    private readonly opts: FloatDecodeOptions,
    private readonly ycc: boolean,
  ) {
    this.w = Math.ceil(f.W / opts.scale);
    this.h = Math.ceil(f.H / opts.scale);
    this.out = new Float32Array(this.w * this.h * 3);
    this.lum = new Float32Array(this.w * this.h);
    this.clipMask = opts.clipLinear !== null ? new Uint8Array(this.w * this.h) : null;
    this.acc = new Float64Array(this.w * 3);
    [this.wr, this.wg, this.wb] = opts.weights;
  }

  emitMcuRow(my: number): void {
    const f0 = this.f;
    if (this.ycc && this.opts.scale === 2 && f0.comps.length === 3 && f0.hmax === 2 && f0.vmax === 2 && f0.comps[0]!.h === 2 && f0.comps[0]!.v === 2 && f0.comps[1]!.h === 1 && f0.comps[1]!.v === 1 && f0.comps[2]!.h === 1 && f0.comps[2]!.v === 1) {
      this.emit420Half(my);
      return;
    }
    this.emitAny(my);
  }

  /**
   * The usual case, 4:2:0 at half size: each output pixel is one 2×2 block of luma under one chroma
   * sample. The same sums as emitAny (up to the order of the additions), with the chroma terms formed
   * once per block.
   */
  // emit420Half and emitAny repeat the same few lines per pixel (clamp, clip and dark counts, linearise
  // and sum): kept inline in both on purpose, as these are the decoder's hottest loops; what they share
  // per output pixel is put().
  private emit420Half(my: number): void {
    const { f, opts, w } = this;
    const W = f.W;
    const H = f.H;
    const table = linearTable(opts.transfer);
    const clipAt = opts.clipCode - 0.5;
    const darkBelow = opts.darkCode - 0.5;
    const Yd = f.comps[0]!.rows;
    const ys = f.comps[0]!.stride;
    const Cb = f.comps[1]!.rows;
    const Cr = f.comps[2]!.rows;
    const cs = f.comps[1]!.stride;
    let clipped = 0;
    let dark = 0;
    const y0 = my * f.mcuH;
    const y1 = Math.min(H, y0 + f.mcuH);
    for (let y = y0; y < y1; y += 2) {
      const ly = y - y0;
      const rows = y + 1 < H ? 2 : 1;
      const oy = y >> 1;
      const cRow = (ly >> 1) * cs;
      for (let ox = 0; ox < w; ox++) {
        const x = 2 * ox;
        const cols = x + 1 < W ? 2 : 1;
        const cb = Cb[cRow + ox]! - 128;
        const cr = Cr[cRow + ox]! - 128;
        const dR = 1.402 * cr;
        const dG = -0.344136 * cb - 0.714136 * cr;
        const dB = 1.772 * cb;
        let a0 = 0;
        let a1 = 0;
        let a2 = 0;
        for (let r = 0; r < rows; r++) {
          const base = (ly + r) * ys + x;
          for (let c = 0; c < cols; c++) {
            const yv = Yd[base + c]!;
            let R = yv + dR;
            let G = yv + dG;
            let B = yv + dB;
            R = R < 0 ? 0 : R > 255 ? 255 : R;
            G = G < 0 ? 0 : G > 255 ? 255 : G;
            B = B < 0 ? 0 : B > 255 ? 255 : B;
            const mxc = R > G ? (R > B ? R : B) : G > B ? G : B;
            if (mxc >= clipAt) clipped++;
            if (mxc < darkBelow) dark++;
            a0 += lin(table, R);
            a1 += lin(table, G);
            a2 += lin(table, B);
          }
        }
        this.put(oy * w + ox, a0, a1, a2, 1 / (rows * cols));
      }
    }
    this.clipped += clipped;
    this.dark += dark;
  }

  private emitAny(my: number): void {
    const { f, opts, ycc, acc, w } = this;
    const W = f.W;
    const H = f.H;
    const s = opts.scale;
    const table = linearTable(opts.transfer);
    const clipAt = opts.clipCode - 0.5;
    const darkBelow = opts.darkCode - 0.5;
    const c0 = f.comps[0]!;
    const c1 = f.comps[1];
    const c2 = f.comps[2];
    const chs1 = c1 ? (f.hmax / c1.h === 2 ? 1 : 0) : 0;
    const cvs1 = c1 ? (f.vmax / c1.v === 2 ? 1 : 0) : 0;
    const chs2 = c2 ? (f.hmax / c2.h === 2 ? 1 : 0) : 0;
    const cvs2 = c2 ? (f.vmax / c2.v === 2 ? 1 : 0) : 0;
    const ys = f.comps.length === 1 ? 0 : f.hmax / c0.h === 2 ? 1 : 0;
    const yvs = f.comps.length === 1 ? 0 : f.vmax / c0.v === 2 ? 1 : 0;
    let clipped = 0;
    let dark = 0;
    const y0 = my * f.mcuH;
    const y1 = Math.min(H, y0 + f.mcuH);
    const Yd = c0.rows;
    const Cb = c1 ? c1.rows : Yd;
    const Cr = c2 ? c2.rows : Yd;
    for (let y = y0; y < y1; y++) {
      const ly = y - y0;
      const yRow = (ly >> yvs) * c0.stride;
      const r1 = c1 ? (ly >> cvs1) * c1.stride : 0;
      const r2 = c2 ? (ly >> cvs2) * c2.stride : 0;
      for (let x = 0, o = 0; x < W; x += s, o += 3) {
        const xe = x + s < W ? x + s : W;
        let a0 = 0;
        let a1 = 0;
        let a2 = 0;
        for (let xx = x; xx < xe; xx++) {
          let R: number;
          let G: number;
          let B: number;
          const yv = Yd[yRow + (xx >> ys)]!;
          if (c1 === undefined) {
            R = G = B = yv;
          } else if (ycc) {
            const cb = Cb[r1 + (xx >> chs1)]! - 128;
            const cr = Cr[r2 + (xx >> chs2)]! - 128;
            R = yv + 1.402 * cr;
            G = yv - 0.344136 * cb - 0.714136 * cr;
            B = yv + 1.772 * cb;
          } else {
            R = yv;
            G = Cb[r1 + (xx >> chs1)]!;
            B = Cr[r2 + (xx >> chs2)]!;
          }
          R = R < 0 ? 0 : R > 255 ? 255 : R;
          G = G < 0 ? 0 : G > 255 ? 255 : G;
          B = B < 0 ? 0 : B > 255 ? 255 : B;
          const mxc = R > G ? (R > B ? R : B) : G > B ? G : B;
          if (mxc >= clipAt) clipped++;
          if (mxc < darkBelow) dark++;
          a0 += lin(table, R);
          a1 += lin(table, G);
          a2 += lin(table, B);
        }
        acc[o] = acc[o]! + a0;
        acc[o + 1] = acc[o + 1]! + a1;
        acc[o + 2] = acc[o + 2]! + a2;
      }
      if ((y + 1) % s === 0 || y === H - 1) {
        const oy = Math.floor(y / s);
        const rows = y - oy * s + 1;
        const base = oy * w;
        for (let ox = 0; ox < w; ox++) {
          const cols = Math.min(W, ox * s + s) - ox * s;
          const o = ox * 3;
          this.put(base + ox, acc[o]!, acc[o + 1]!, acc[o + 2]!, 1 / (rows * cols));
        }
        acc.fill(0);
      }
    }
    this.clipped += clipped;
    this.dark += dark;
  }

  /** Output pixel q: the means of its block's linear sums, its luminance and its clip-mask bit. */
  private put(q: number, a0: number, a1: number, a2: number, inv: number): void {
    const { wr, wg, wb } = this;
    const r = Math.fround(a0 * inv);
    const g = Math.fround(a1 * inv);
    const b = Math.fround(a2 * inv);
    this.out[3 * q] = r;
    this.out[3 * q + 1] = g;
    this.out[3 * q + 2] = b;
    this.lum[q] = wr * r + wg * g + wb * b;
    const cl = this.opts.clipLinear;
    if (this.clipMask !== null && cl !== null && (r >= cl || g >= cl || b >= cl)) this.clipMask[q] = 1;
  }

  result(lumaDcQuant: number): FloatDecoded {
    const y = this.f.comps[0]!;
    const lumaBlocks: FlatBlocks = {
      cols: y.bw,
      rows: y.bh,
      blockW: (8 * this.f.hmax) / y.h,
      blockH: (8 * this.f.vmax) / y.v,
      mean: y.flat!,
    };
    return { lumaDcQuant, lumaBlocks, data: this.out, luminance: this.lum, width: this.w, height: this.h, clipped: this.clipped, dark: this.dark, pixels: this.f.W * this.f.H, clipMask: this.clipMask };
  }
}

/**
 * Inverse DCT of one dequantised block into `dst` (row stride `stride`), plus the level shift of 128.
 * Rows of coefficients that are all zero (rowMask bit clear) and columns past colMax are skipped; a
 * block with only its DC term is a constant.
 */
function idct(coef: Float64Array, tmp: Float64Array, rowMask: number, colMax: number, dst: Float32Array, at: number, stride: number): void {
  if (rowMask === 1 && colMax === 0) {
    const v = coef[0]! / 8 + 128;
    for (let y = 0, p = at; y < 8; y++, p += stride) {
      dst[p] = v;
      dst[p + 1] = v;
      dst[p + 2] = v;
      dst[p + 3] = v;
      dst[p + 4] = v;
      dst[p + 5] = v;
      dst[p + 6] = v;
      dst[p + 7] = v;
    }
    return;
  }
  // rows: tmp[v][x] = Σ_u BASIS[x][u] · coef[v][u], summed over the non-zero coefficients of the row in
  // order of u (a zero term adds nothing, so each sum is the one a full loop over u would give)
  let vMax = 0;
  for (let v = 0; v < 8; v++) {
    const r = v * 8;
    tmp[r] = 0;
    tmp[r + 1] = 0;
    tmp[r + 2] = 0;
    tmp[r + 3] = 0;
    tmp[r + 4] = 0;
    tmp[r + 5] = 0;
    tmp[r + 6] = 0;
    tmp[r + 7] = 0;
    if ((rowMask & (1 << v)) === 0) continue;
    vMax = v;
    for (let u = 0; u <= colMax; u++) {
      const c = coef[r + u]!;
      if (c === 0) continue;
      tmp[r] += BASIS[u]! * c;
      tmp[r + 1] += BASIS[8 + u]! * c;
      tmp[r + 2] += BASIS[16 + u]! * c;
      tmp[r + 3] += BASIS[24 + u]! * c;
      tmp[r + 4] += BASIS[32 + u]! * c;
      tmp[r + 5] += BASIS[40 + u]! * c;
      tmp[r + 6] += BASIS[48 + u]! * c;
      tmp[r + 7] += BASIS[56 + u]! * c;
    }
  }
  // columns: out[y][x] = Σ_v BASIS[y][v] · tmp[v][x], over the rows with a non-zero coefficient, in order of v
  for (let y = 0, p = at; y < 8; y++, p += stride) {
    const b = y * 8;
    let s0 = 0;
    let s1 = 0;
    let s2 = 0;
    let s3 = 0;
    let s4 = 0;
    let s5 = 0;
    let s6 = 0;
    let s7 = 0;
    for (let v = 0; v <= vMax; v++) {
      if ((rowMask & (1 << v)) === 0) continue;
      const k = BASIS[b + v]!;
      const r = v * 8;
      s0 += k * tmp[r]!;
      s1 += k * tmp[r + 1]!;
      s2 += k * tmp[r + 2]!;
      s3 += k * tmp[r + 3]!;
      s4 += k * tmp[r + 4]!;
      s5 += k * tmp[r + 5]!;
      s6 += k * tmp[r + 6]!;
      s7 += k * tmp[r + 7]!;
    }
    dst[p] = s0 + 128;
    dst[p + 1] = s1 + 128;
    dst[p + 2] = s2 + 128;
    dst[p + 3] = s3 + 128;
    dst[p + 4] = s4 + 128;
    dst[p + 5] = s5 + 128;
    dst[p + 6] = s6 + 128;
    dst[p + 7] = s7 + 128;
  }
}

/**
 * The DC quantiser of a JPEG's first component (luma), read from its headers, or null when the file
 * does not say (not a JPEG, or damaged before its first scan).
 */
export function lumaDcQuant(data: Uint8Array): number | null {
  if (data.length < 4 || data[0] !== 0xff || data[1] !== 0xd8) return null;
  const dc: number[] = [];
  let tq: number | null = null;
  let pos = 2;
  while (pos + 4 <= data.length) {
    if (data[pos] !== 0xff) return null;
    while (data[pos] === 0xff) pos++;
    const m = data[pos++]!;
    if (m === 0xd8 || (m >= 0xd0 && m <= 0xd7) || m === 0x01) continue;
    // tables may follow the frame header: the first scan closes them
    if (m === 0xda) return tq !== null ? (dc[tq] ?? null) : null;
    if (m === 0xd9) return null;
    const len = (data[pos]! << 8) | data[pos + 1]!;
    const end = pos + len;
    if (len < 2 || end > data.length) return null;
    let p = pos + 2;
    if (m === 0xdb) {
      while (p < end) {
        const pq = data[p]! >> 4;
        dc[data[p]! & 15] = pq ? (data[p + 1]! << 8) | data[p + 2]! : data[p + 1]!;
        p += 1 + (pq ? 128 : 64);
      }
    } else if (m >= 0xc0 && m <= 0xcf && m !== 0xc4 && m !== 0xc8 && m !== 0xcc) {
      // frame header: the first component's quantisation table
      tq = data[pos + 2 + 8]!;
    }
    pos = end;
  }
  return null;
}
