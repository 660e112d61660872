// What a file says about its own encoding: the PNG gAMA / sRGB chunks and the embedded ICC profile
// (description, tone curves, primaries). Used to decide whether code values are sRGB or linear and to
// warn when a profile other than sRGB is present.

import { SRGB_TO_XYZ, invert3, srgbDecode, xyzToXy } from '../photometry/index.js';

// ---------------------------------------------------------------------------------------------
// PNG chunks
// ---------------------------------------------------------------------------------------------

export interface PngColourChunks {
  /** gAMA value / 100000 (the file's encoding exponent: 1/2.2 -> 0.45455; 1.0 = linear), or null */
  gamma: number | null;
  /** an sRGB chunk is present */
  srgb: boolean;
  /** an iCCP chunk is present */
  iccp: boolean;
}

/** Read the colour chunks that precede the image data of a PNG (PNG spec §11.3). */
export function readPngColourChunks(buf: Uint8Array): PngColourChunks {
  const out: PngColourChunks = { gamma: null, srgb: false, iccp: false };
  const view = new DataView(buf.buffer, buf.byteOffset, buf.byteLength);
  let p = 8;
  while (p + 8 <= buf.length) {
    const len = view.getUint32(p);
    const type = String.fromCharCode(buf[p + 4]!, buf[p + 5]!, buf[p + 6]!, buf[p + 7]!);
    if (type === 'IDAT' || type === 'IEND') break;
    if (type === 'gAMA' && len === 4 && p + 12 <= buf.length) out.gamma = view.getUint32(p + 8) / 100000;
    if (type === 'sRGB') out.srgb = true;
    if (type === 'iCCP') out.iccp = true;
    p += 12 + len;
  }
  return out;
}

// ---------------------------------------------------------------------------------------------
// ICC profiles (ICC.1:2010; v2 'desc' and v4 'mluc' descriptions; 'curv' and 'para' curves)
// ---------------------------------------------------------------------------------------------

export type CurveKind = 'srgb' | 'linear' | 'other';

export interface IccSummary {
  /** profile description, or null */
  description: string | null;
  /** data colour space signature: 'RGB', 'GRAY', 'CMYK' ... */
  colourSpace: string;
  /** kind of the tone curves (all RGB curves, or the gray curve); null when the profile has none */
  curve: CurveKind | null;
  /** RGB profiles: whether the colorants are the sRGB primaries (within 0.01 in xy after adaptation) */
  srgbPrimaries: boolean | null;
  /** RGB profiles: linear RGB to CIE XYZ under D65 from the profile's colorants (rXYZ, gXYZ, bXYZ,
   *  which ICC profiles store adapted to the D50 connection white), adapted back to D65 by Bradford and
   *  scaled so that white has Y = 1; row-major 3 × 3. Null without the colorant tags. */
  rgbToXyzD65: number[] | null;
  /** the tone curve at the 256 8-bit code values (linear light, 0..1), when every RGB curve (or the
   *  gray curve) is the same one, of kind 'other', and rises throughout; null otherwise */
  curveTable: number[] | null;
  /** the same curve at the 65536 16-bit code values (code 65535 = 1), for 16-bit files; null with
   *  curveTable null */
  curveTable16: Float32Array | null;
}

function tag(buf: Uint8Array, view: DataView, sig: string): { off: number; size: number } | null {
  if (buf.length < 132) return null;
  const n = view.getUint32(128);
  for (let i = 0; i < n && 132 + i * 12 + 12 <= buf.length; i++) {
    const o = 132 + i * 12;
    const s = String.fromCharCode(buf[o]!, buf[o + 1]!, buf[o + 2]!, buf[o + 3]!);
    if (s === sig) {
      const off = view.getUint32(o + 4);
      const size = view.getUint32(o + 8);
      if (off + size <= buf.length && size >= 8) return { off, size };
      return null;
    }
  }
  return null;
}

function typeSig(buf: Uint8Array, off: number): string {
  return String.fromCharCode(buf[off]!, buf[off + 1]!, buf[off + 2]!, buf[off + 3]!);
}

const s15 = (view: DataView, off: number): number => view.getInt32(off) / 65536;

function readDescription(buf: Uint8Array, view: DataView): string | null {
  const t = tag(buf, view, 'desc');
  if (!t) return null;
  const type = typeSig(buf, t.off);
  if (type === 'desc') {
    const count = view.getUint32(t.off + 8);
    let s = '';
    for (let i = 0; i < count && t.off + 12 + i < t.off + t.size; i++) {
      const c = buf[t.off + 12 + i]!;
      if (c === 0) break;
      s += String.fromCharCode(c);
    }
    return s.trim() || null;
  }
  if (type === 'mluc') {
    const records = view.getUint32(t.off + 8);
    if (records < 1) return null;
    const len = view.getUint32(t.off + 20);
    const start = t.off + view.getUint32(t.off + 24);
    let s = '';
    for (let i = 0; i + 1 < len && start + i + 1 < buf.length; i += 2) s += String.fromCharCode(view.getUint16(start + i));
    return s.replace(/\0+$/, '').trim() || null;
  }
  return null;
}

/** Evaluate an ICC curve tag at x in 0..1, or null for an unknown form. */
function curveEvaluator(buf: Uint8Array, view: DataView, t: { off: number; size: number }): ((x: number) => number) | null {
  const type = typeSig(buf, t.off);
  if (type === 'curv') {
    const n = view.getUint32(t.off + 8);
    if (n === 0) return (x) => x;
    if (n === 1) {
      const g = view.getUint16(t.off + 12) / 256;
      return (x) => Math.pow(x, g);
    }
    if (t.off + 12 + 2 * n > buf.length) return null;
    return (x) => {
      const pos = x * (n - 1);
      const i = Math.min(n - 2, Math.floor(pos));
      const f = pos - i;
      const a = view.getUint16(t.off + 12 + 2 * i) / 65535;
      const b = view.getUint16(t.off + 12 + 2 * (i + 1)) / 65535;
      return a + f * (b - a);
    };
  }
  if (type === 'para') {
    const fn = view.getUint16(t.off + 8);
    const counts = [1, 3, 4, 5, 7];
    const k = counts[fn];
    if (k === undefined || t.off + 12 + 4 * k > buf.length) return null;
    const p = Array.from({ length: k }, (_, i) => s15(view, t.off + 12 + 4 * i));
    const [g, a = 1, b = 0, c = 0, d = 0, e = 0, f = 0] = p as [number, ...number[]];
    switch (fn) {
      case 0:
        return (x) => Math.pow(x, g);
      case 1:
        return (x) => (x >= -b / a ? Math.pow(a * x + b, g) : 0);
      case 2:
        return (x) => (x >= -b / a ? Math.pow(a * x + b, g) + c : c);
      case 3:
        return (x) => (x >= d ? Math.pow(a * x + b, g) : c * x);
      default:
        return (x) => (x >= d ? Math.pow(a * x + b, g) + e : c * x + f);
    }
  }
  return null;
}

function classifyCurve(fn: (x: number) => number): CurveKind {
  let dLin = 0;
  let dSrgb = 0;
  for (let i = 0; i <= 64; i++) {
    const x = i / 64;
    const y = fn(x);
    dLin = Math.max(dLin, Math.abs(y - x));
    dSrgb = Math.max(dSrgb, Math.abs(y - srgbDecode(x)));
  }
  // 0.002 of full scale: half an 8-bit code step, wide enough for 16-bit fixed-point parameters
  // and short curve tables, far narrower than the gap between sRGB and gamma 2.2 (about 0.01).
  if (dLin < 0.002) return 'linear';
  if (dSrgb < 0.002) return 'srgb';
  return 'other';
}

// Bradford cone-response matrix and the ICC PCS white (D50 as encoded in ICC.1:2010, 0.9642, 1, 0.8249),
// used to adapt the sRGB primaries to D50 for comparison with a profile's colorant tags. Values from
// memory (not re-read from the ICC specification); they only feed a 0.01 xy tolerance check that
// decides whether to warn, and the test compares the result with the colorants of sRGB profiles.
// Profiles adapted to D50 by another method than Bradford differ slightly; not measured here.
const BRADFORD = [0.8951, 0.2664, -0.1614, -0.7502, 1.7135, 0.0367, 0.0389, -0.0685, 1.0296];
const PCS_D50 = [0.9642, 1, 0.8249];

function mul3(m: readonly number[], v: readonly number[]): [number, number, number] {
  return [
    m[0]! * v[0]! + m[1]! * v[1]! + m[2]! * v[2]!,
    m[3]! * v[0]! + m[4]! * v[1]! + m[5]! * v[2]!,
    m[6]! * v[0]! + m[7]! * v[1]! + m[8]! * v[2]!,
  ];
}

/** xy of the sRGB primaries after Bradford adaptation from D65 to the ICC D50 white. */
export function srgbColorantsD50(): Array<[number, number]> {
  const white = mul3(SRGB_TO_XYZ, [1, 1, 1]);
  const src = mul3(BRADFORD, white);
  const dst = mul3(BRADFORD, PCS_D50);
  const inv = invert3(BRADFORD);
  return [0, 1, 2].map((k) => {
    const col = [SRGB_TO_XYZ[k]!, SRGB_TO_XYZ[3 + k]!, SRGB_TO_XYZ[6 + k]!];
    const cone = mul3(BRADFORD, col);
    const adapted = mul3(inv, [(cone[0] * dst[0]) / src[0], (cone[1] * dst[1]) / src[1], (cone[2] * dst[2]) / src[2]]);
    return xyzToXy(adapted[0], adapted[1], adapted[2]);
  });
}

/**
 * The RGB to XYZ (D65) matrix of three colorants given in the ICC connection space (D50): each column
 * adapted from the D50 white to D65 (ours: SRGB_TO_XYZ's white) with the Bradford transform, then all
 * scaled so that RGB white has Y = 1. Null when the colorants are degenerate.
 */
export function colorantsToD65(cols: [number, number, number][]): number[] | null {
  const w65 = mul3(SRGB_TO_XYZ, [1, 1, 1]);
  const src = mul3(BRADFORD, PCS_D50);
  const dst = mul3(BRADFORD, w65);
  const inv = invert3(BRADFORD);
  const adapted = cols.map((c) => {
    const cone = mul3(BRADFORD, c);
    return mul3(inv, [(cone[0] * dst[0]) / src[0], (cone[1] * dst[1]) / src[1], (cone[2] * dst[2]) / src[2]]);
  });
  const whiteY = adapted[0]![1] + adapted[1]![1] + adapted[2]![1];
  if (!(whiteY > 0) || adapted.some((c) => c.some((v) => !Number.isFinite(v)))) return null;
  const m: number[] = [];
  for (let r = 0; r < 3; r++) for (let k = 0; k < 3; k++) m.push(adapted[k]![r]! / whiteY);
  return m;
}

/** The curves' common table at the 256 8-bit codes, scaled so that code 255 is 1: null unless they
 *  agree within 1e-4 everywhere and rise throughout (a table to decode with must). */
function commonTable(fns: ((x: number) => number)[]): number[] | null {
  const t: number[] = [];
  for (let z = 0; z < 256; z++) {
    const vals = fns.map((f) => f(z / 255));
    if (Math.max(...vals) - Math.min(...vals) > 1e-4 || !vals.every(Number.isFinite)) return null;
    t.push(vals[0]!);
  }
  const top = t[255]!;
  if (!(top > 0)) return null;
  for (let z = 0; z < 256; z++) t[z] = t[z]! / top;
  for (let z = 1; z < 256; z++) if (!(t[z]! > t[z - 1]!)) return null;
  return t;
}

/** Summarise an ICC profile; null when the bytes are not a profile. */
export function readIccSummary(buf: Uint8Array): IccSummary | null {
  if (buf.length < 132) return null;
  const view = new DataView(buf.buffer, buf.byteOffset, buf.byteLength);
  if (typeSig(buf, 36) !== 'acsp') return null;
  const colourSpace = typeSig(buf, 16).trim();
  const description = readDescription(buf, view);

  const curveSigs = colourSpace === 'GRAY' ? ['kTRC'] : colourSpace === 'RGB' ? ['rTRC', 'gTRC', 'bTRC'] : [];
  let curve: CurveKind | null = null;
  const fns: ((x: number) => number)[] = [];
  for (const sig of curveSigs) {
    const t = tag(buf, view, sig);
    const fn = t ? curveEvaluator(buf, view, t) : null;
    const kind: CurveKind | null = fn ? classifyCurve(fn) : null;
    if (kind === null) {
      curve = null;
      break;
    }
    fns.push(fn!);
    curve = curve === null || curve === kind ? kind : 'other';
  }
  const curveTable = curve === 'other' && fns.length === curveSigs.length ? commonTable(fns) : null;
  let curveTable16: Float32Array | null = null;
  if (curveTable) {
    const f = fns[0]!;
    const top = f(1);
    curveTable16 = new Float32Array(65536);
    for (let z = 0; z < 65536; z++) curveTable16[z] = f(z / 65535) / top;
  }

  let srgbPrimaries: boolean | null = null;
  let rgbToXyzD65: number[] | null = null;
  if (colourSpace === 'RGB') {
    const ref = srgbColorantsD50();
    const sigs = ['rXYZ', 'gXYZ', 'bXYZ'];
    srgbPrimaries = true;
    const cols: [number, number, number][] = [];
    for (let k = 0; k < 3; k++) {
      const t = tag(buf, view, sigs[k]!);
      if (!t || typeSig(buf, t.off) !== 'XYZ ') {
        srgbPrimaries = null;
        break;
      }
      const c: [number, number, number] = [s15(view, t.off + 8), s15(view, t.off + 12), s15(view, t.off + 16)];
      cols.push(c);
      const xy = xyzToXy(c[0], c[1], c[2]);
      if (Math.hypot(xy[0] - ref[k]![0], xy[1] - ref[k]![1]) > 0.01) srgbPrimaries = false;
    }
    if (cols.length === 3) rgbToXyzD65 = colorantsToD65(cols);
  }
  return { description, colourSpace, curve, srgbPrimaries, rgbToXyzD65, curveTable, curveTable16 };
}
