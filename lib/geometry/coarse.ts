// Coarse panel location on a box-downsampled copy of the luminance plane, in log luminance:
// threshold (Otsu, plus Otsu within each of its two classes), connected components, hole filling, a
// shape test (solidity) and an edge-contrast score; then a rough quadrilateral from robust line fits
// to the component's outermost pixels on each side.

import type { Plane, Point } from '../types.js';
import { intersectLines, type Line } from './quad.js';

export interface CoarseOptions {
  /** Long side of the downsampled copy, pixels. */
  coarseMaxSize: number;
  /** Smallest panel area as a fraction of the frame. */
  minAreaFraction: number;
  /** Smallest ratio of component area to its convex hull area. */
  minSolidity: number;
}

export interface CoarseImage {
  /** downsampling factor: coarse pixel (i, j) averages input pixels [i f, (i+1) f) x [j f, (j+1) f) */
  f: number;
  width: number;
  height: number;
  /** natural log of luminance, floored */
  logLum: Float32Array;
}

export interface CoarseCandidate {
  threshold: number;
  area: number;
  solidity: number;
  /** mean log luminance just inside minus just outside the component's outline */
  contrast: number;
  touchesBorder: boolean;
  /** filled mask over the whole coarse image */
  mask: Uint8Array;
  bbox: [number, number, number, number];
}

export interface CoarseQuad {
  /** TL, TR, BR, BL in input-plane pixel coordinates */
  corners: [Point, Point, Point, Point];
  candidate: CoarseCandidate;
  coarse: CoarseImage;
}

/** Box-average downsample of the plane by an integer factor, then log (floored). */
export function downsampleLog(lum: Plane, maxSize: number): CoarseImage {
  const { width: W, height: H, data } = lum;
  const f = Math.max(1, Math.ceil(Math.max(W, H) / maxSize));
  const cw = Math.ceil(W / f);
  const ch = Math.ceil(H / f);
  const sum = new Float64Array(cw * ch);
  const cnt = new Float64Array(cw * ch);
  for (let y = 0; y < H; y++) {
    const row = ((y / f) | 0) * cw;
    const off = y * W;
    for (let i = 0; i < cw; i++) {
      const xa = i * f;
      const xb = Math.min(W, xa + f);
      let s = 0;
      for (let x = xa; x < xb; x++) s += data[off + x];
      sum[row + i] += s;
      cnt[row + i] += xb - xa;
    }
  }
  const mean = new Float32Array(cw * ch);
  let maxV = 0;
  for (let k = 0; k < mean.length; k++) {
    const v = sum[k] / cnt[k];
    mean[k] = v;
    if (v > maxV) maxV = v;
  }
  // Floor far below any useful signal so log stays finite for zero or negative (dark-subtracted) values.
  const floor = Math.max(maxV * 1e-6, 1e-12);
  const logLum = new Float32Array(cw * ch);
  for (let k = 0; k < mean.length; k++) logLum[k] = Math.log(Math.max(mean[k], floor));
  return { f, width: cw, height: ch, logLum };
}

/** Otsu's threshold of the values in [lo, hi] (histogram of 256 bins); NaN when the range is empty. */
export function otsuThreshold(values: Float32Array, lo: number, hi: number): number {
  const bins = 256;
  if (!(hi > lo)) return Number.NaN;
  const hist = new Float64Array(bins);
  const scale = bins / (hi - lo);
  let n = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v < lo || v > hi) continue;
    let b = Math.floor((v - lo) * scale);
    if (b >= bins) b = bins - 1;
    hist[b]++;
    n++;
  }
  if (n < 2) return Number.NaN;
  let total = 0;
  for (let b = 0; b < bins; b++) total += b * hist[b];
  let w0 = 0;
  let s0 = 0;
  let best = -1;
  let bestB = -1;
  for (let b = 0; b < bins - 1; b++) {
    w0 += hist[b];
    s0 += b * hist[b];
    const w1 = n - w0;
    if (w0 === 0 || w1 === 0) continue;
    const m0 = s0 / w0;
    const m1 = (total - s0) / w1;
    const between = w0 * w1 * (m0 - m1) * (m0 - m1);
    if (between > best) {
      best = between;
      bestB = b;
    }
  }
  if (bestB < 0) return Number.NaN;
  return lo + (bestB + 1) / scale;
}

/** Approximate quantiles from a 4096-bin histogram (no full sort). */
function quantiles(values: Float32Array, qs: number[]): number[] {
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  if (!(hi > lo)) return qs.map(() => lo);
  const bins = 4096;
  const hist = new Float64Array(bins);
  const scale = bins / (hi - lo);
  for (let i = 0; i < values.length; i++) {
    let b = Math.floor((values[i] - lo) * scale);
    if (b >= bins) b = bins - 1;
    hist[b]++;
  }
  return qs.map((q) => {
    const target = q * values.length;
    let acc = 0;
    for (let b = 0; b < bins; b++) {
      acc += hist[b];
      if (acc >= target) return lo + (b + 0.5) / scale;
    }
    return hi;
  });
}

/** Candidate thresholds: Otsu over the robust range, and Otsu within each of the two resulting classes. */
export function candidateThresholds(img: CoarseImage): number[] {
  const [lo, hi] = quantiles(img.logLum, [0.002, 0.998]);
  const t1 = otsuThreshold(img.logLum, lo, hi);
  if (!Number.isFinite(t1)) return [];
  const out = [t1];
  const t0 = otsuThreshold(img.logLum, lo, t1);
  const t2 = otsuThreshold(img.logLum, t1, hi);
  if (Number.isFinite(t2)) out.push(t2);
  if (Number.isFinite(t0)) out.push(t0);
  return out;
}

interface Labelled {
  labels: Int32Array;
  sizes: number[];
  /** per label: x0, y0, x1, y1 */
  boxes: number[][];
}

/** Label 8-connected components of mask (0 = background), with sizes and bounding boxes (index = label). */
function labelComponents(mask: Uint8Array, w: number, h: number, stack: Int32Array): Labelled {
  const labels = new Int32Array(w * h);
  const sizes = [0];
  const boxes: number[][] = [[0, 0, -1, -1]];
  let next = 1;
  for (let start = 0; start < w * h; start++) {
    if (!mask[start] || labels[start]) continue;
    let sp = 0;
    stack[sp++] = start;
    labels[start] = next;
    let size = 0;
    let bx0 = w;
    let by0 = h;
    let bx1 = -1;
    let by1 = -1;
    while (sp > 0) {
      const k = stack[--sp];
      size++;
      const x = k % w;
      const y = (k / w) | 0;
      if (x < bx0) bx0 = x;
      if (x > bx1) bx1 = x;
      if (y < by0) by0 = y;
      if (y > by1) by1 = y;
      for (let dy = -1; dy <= 1; dy++) {
        const yy = y + dy;
        if (yy < 0 || yy >= h) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const xx = x + dx;
          if (xx < 0 || xx >= w) continue;
          const kk = yy * w + xx;
          if (mask[kk] && !labels[kk]) {
            labels[kk] = next;
            stack[sp++] = kk;
          }
        }
      }
    }
    sizes.push(size);
    boxes.push([bx0, by0, bx1, by1]);
    next++;
  }
  return { labels, sizes, boxes };
}

/** Fill holes: pixels not in the component and not 4-connected to the outside of its bounding box. */
function filledComponent(
  labels: Int32Array,
  label: number,
  box: number[],
  w: number,
  h: number,
): { mask: Uint8Array; area: number; bbox: [number, number, number, number] } {
  const [x0, y0, x1, y1] = box;
  // padded box
  const bx0 = x0 - 1;
  const by0 = y0 - 1;
  const bw = x1 - x0 + 3;
  const bh = y1 - y0 + 3;
  const outside = new Uint8Array(bw * bh);
  const stack = new Int32Array(bw * bh);
  const inComp = (bx: number, by: number): boolean => {
    const x = bx + bx0;
    const y = by + by0;
    return x >= 0 && y >= 0 && x < w && y < h && labels[y * w + x] === label;
  };
  let sp = 0;
  stack[sp++] = 0;
  outside[0] = 1;
  while (sp > 0) {
    const k = stack[--sp];
    const x = k % bw;
    const y = (k / bw) | 0;
    // the 4 neighbours, in the order left, right, up, down
    for (let n = 0; n < 4; n++) {
      const xx = n === 0 ? x - 1 : n === 1 ? x + 1 : x;
      const yy = n === 2 ? y - 1 : n === 3 ? y + 1 : y;
      if (xx < 0 || yy < 0 || xx >= bw || yy >= bh) continue;
      const kk = yy * bw + xx;
      if (outside[kk] || inComp(xx, yy)) continue;
      outside[kk] = 1;
      stack[sp++] = kk;
    }
  }
  const mask = new Uint8Array(w * h);
  let area = 0;
  for (let y = y0; y <= y1; y++) {
    for (let x = x0; x <= x1; x++) {
      if (!outside[(y - by0) * bw + (x - bx0)]) {
        mask[y * w + x] = 1;
        area++;
      }
    }
  }
  return { mask, area, bbox: [x0, y0, x1, y1] };
}

/** Area of the convex hull of the pixel squares of each row's extreme pixels (monotone chain). */
function hullArea(mask: Uint8Array, w: number, bbox: [number, number, number, number]): number {
  const pts: Point[] = [];
  for (let y = bbox[1]; y <= bbox[3]; y++) {
    let l = -1;
    let r = -1;
    for (let x = bbox[0]; x <= bbox[2]; x++) {
      if (mask[y * w + x]) {
        if (l < 0) l = x;
        r = x;
      }
    }
    if (l < 0) continue;
    pts.push([l - 0.5, y - 0.5], [l - 0.5, y + 0.5], [r + 0.5, y - 0.5], [r + 0.5, y + 0.5]);
  }
  pts.sort((a, b) => a[0] - b[0] || a[1] - b[1]);
  const cross = (o: Point, a: Point, b: Point) => (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0]);
  const lower: Point[] = [];
  for (const p of pts) {
    while (lower.length >= 2 && cross(lower[lower.length - 2], lower[lower.length - 1], p) <= 0) lower.pop();
    lower.push(p);
  }
  const upper: Point[] = [];
  for (let i = pts.length - 1; i >= 0; i--) {
    const p = pts[i];
    while (upper.length >= 2 && cross(upper[upper.length - 2], upper[upper.length - 1], p) <= 0) upper.pop();
    upper.push(p);
  }
  const hull = lower.slice(0, -1).concat(upper.slice(0, -1));
  let a = 0;
  for (let i = 0; i < hull.length; i++) {
    const p = hull[i];
    const q = hull[(i + 1) % hull.length];
    a += p[0] * q[1] - q[0] * p[1];
  }
  return Math.abs(a) / 2;
}

/**
 * Mean log luminance in a band 2..3 pixels inside the outline minus the mean in a band 2..3 pixels outside
 * (chessboard distance), skipping the mixed pixels right on the outline.
 */
function outlineContrast(mask: Uint8Array, img: CoarseImage, bbox: [number, number, number, number]): number {
  const { width: w, height: h, logLum } = img;
  const pad = 4;
  const x0 = Math.max(0, bbox[0] - pad);
  const y0 = Math.max(0, bbox[1] - pad);
  const x1 = Math.min(w - 1, bbox[2] + pad);
  const y1 = Math.min(h - 1, bbox[3] + pad);
  const bw = x1 - x0 + 1;
  const bh = y1 - y0 + 1;
  // Two-pass chessboard distance to the nearest pixel of the other kind (capped), for both kinds at once.
  const cap = 4;
  const dist = new Uint8Array(bw * bh);
  const kind = new Uint8Array(bw * bh);
  for (let by = 0; by < bh; by++) {
    for (let bx = 0; bx < bw; bx++) kind[by * bw + bx] = mask[(by + y0) * w + (bx + x0)];
  }
  for (let by = 0; by < bh; by++) {
    for (let bx = 0; bx < bw; bx++) {
      const k = by * bw + bx;
      const me = kind[k];
      let d = cap;
      // neighbours already visited: left, up-left, up, up-right
      if (bx > 0) {
        const kk = k - 1;
        const dn = kind[kk] !== me ? 1 : dist[kk] + 1;
        if (dn < d) d = dn;
      }
      if (by > 0) {
        for (let dx = -1; dx <= 1; dx++) {
          const xx = bx + dx;
          if (xx < 0 || xx >= bw) continue;
          const kk = k - bw + dx;
          const dn = kind[kk] !== me ? 1 : dist[kk] + 1;
          if (dn < d) d = dn;
        }
      }
      dist[k] = d;
    }
  }
  for (let by = bh - 1; by >= 0; by--) {
    for (let bx = bw - 1; bx >= 0; bx--) {
      const k = by * bw + bx;
      const me = kind[k];
      let d = dist[k];
      // neighbours visited in this pass: right, down-right, down, down-left
      if (bx < bw - 1) {
        const kk = k + 1;
        const dn = kind[kk] !== me ? 1 : dist[kk] + 1;
        if (dn < d) d = dn;
      }
      if (by < bh - 1) {
        for (let dx = -1; dx <= 1; dx++) {
          const xx = bx + dx;
          if (xx < 0 || xx >= bw) continue;
          const kk = k + bw + dx;
          const dn = kind[kk] !== me ? 1 : dist[kk] + 1;
          if (dn < d) d = dn;
        }
      }
      dist[k] = d;
    }
  }
  let sIn = 0;
  let nIn = 0;
  let sOut = 0;
  let nOut = 0;
  for (let by = 0; by < bh; by++) {
    for (let bx = 0; bx < bw; bx++) {
      const d = dist[by * bw + bx];
      if (d !== 2 && d !== 3) continue;
      const v = logLum[(by + y0) * w + (bx + x0)];
      if (kind[by * bw + bx]) {
        sIn += v;
        nIn++;
      } else {
        sOut += v;
        nOut++;
      }
    }
  }
  if (nIn === 0 || nOut === 0) return 0;
  return sIn / nIn - sOut / nOut;
}

export function findCandidates(img: CoarseImage, opts: CoarseOptions): CoarseCandidate[] {
  const { width: w, height: h, logLum } = img;
  const minArea = Math.max(16, opts.minAreaFraction * w * h);
  const out: CoarseCandidate[] = [];
  const mask = new Uint8Array(w * h);
  const stack = new Int32Array(w * h);
  for (const t of candidateThresholds(img)) {
    for (let k = 0; k < w * h; k++) mask[k] = logLum[k] > t ? 1 : 0;
    const { labels, sizes, boxes } = labelComponents(mask, w, h, stack);
    for (let label = 1; label < sizes.length; label++) {
      if (sizes[label] < minArea) continue;
      // A region touching all four sides of the frame (the wall, the whole scene) has no outline of its
      // own to trace.
      const bx = boxes[label];
      if (bx[0] === 0 && bx[1] === 0 && bx[2] === w - 1 && bx[3] === h - 1) continue;
      const filled = filledComponent(labels, label, boxes[label], w, h);
      const [bx0, by0, bx1, by1] = filled.bbox;
      const touchesBorder = bx0 === 0 || by0 === 0 || bx1 === w - 1 || by1 === h - 1;
      const solidity = filled.area / hullArea(filled.mask, w, filled.bbox);
      if (solidity < opts.minSolidity) continue;
      const contrast = outlineContrast(filled.mask, img, filled.bbox);
      out.push({
        threshold: t,
        area: filled.area,
        solidity,
        contrast,
        touchesBorder,
        mask: filled.mask,
        bbox: filled.bbox,
      });
    }
  }
  return out;
}

/** Siegel's repeated-median line a*s + b through points (s, t); robust to just under half outliers. */
function repeatedMedianLine(s: number[], t: number[]): { a: number; b: number } {
  const n = s.length;
  const slopes = new Float64Array(n - 1);
  const perPoint = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let m = 0;
    for (let j = 0; j < n; j++) {
      if (j === i) continue;
      const ds = s[j] - s[i];
      slopes[m++] = ds === 0 ? 0 : (t[j] - t[i]) / ds;
    }
    perPoint[i] = median(slopes.subarray(0, m));
  }
  const a = median(perPoint);
  const resid = new Float64Array(n);
  for (let i = 0; i < n; i++) resid[i] = t[i] - a * s[i];
  return { a, b: median(resid) };
}

function median(v: Float64Array): number {
  const c = Float64Array.from(v).sort();
  const n = c.length;
  if (n === 0) return Number.NaN;
  return n % 2 ? c[(n - 1) / 2] : 0.5 * (c[n / 2 - 1] + c[n / 2]);
}

/**
 * Fit t = a s + b robustly: repeated median, then least squares on the points within
 * max(1, 3 * 1.4826 * MAD) of it.
 */
function robustAxisLine(s: number[], t: number[]): { a: number; b: number } {
  // Thin to at most 160 points: the repeated median is O(n^2).
  const step = Math.max(1, Math.ceil(s.length / 160));
  const ss: number[] = [];
  const tt: number[] = [];
  for (let i = 0; i < s.length; i += step) {
    ss.push(s[i]);
    tt.push(t[i]);
  }
  let { a, b } = repeatedMedianLine(ss, tt);
  const res = new Float64Array(s.length);
  for (let i = 0; i < s.length; i++) res[i] = Math.abs(t[i] - a * s[i] - b);
  const tol = Math.max(1, 3 * 1.4826 * median(res));
  let n = 0;
  let ms = 0;
  let mt = 0;
  for (let i = 0; i < s.length; i++) {
    if (res[i] <= tol) {
      n++;
      ms += s[i];
      mt += t[i];
    }
  }
  if (n >= 2) {
    ms /= n;
    mt /= n;
    let sst = 0;
    let sss = 0;
    for (let i = 0; i < s.length; i++) {
      if (res[i] > tol) continue;
      sst += (s[i] - ms) * (t[i] - mt);
      sss += (s[i] - ms) * (s[i] - ms);
    }
    if (sss > 0) {
      a = sst / sss;
      b = mt - a * ms;
    }
  }
  return { a, b };
}

/**
 * Rough quadrilateral of a candidate: the leftmost/rightmost pixel edge of every row and the topmost/
 * bottommost of every column are fitted with robust lines (outliers: rounded or cut corners, glare bumps),
 * adjacent lines intersected. Assumes the panel is upright (its sides within 45° of the image axes).
 * Returns corners in input-plane pixel coordinates, or null if the lines do not meet sensibly.
 */
export function coarseQuad(cand: CoarseCandidate, img: CoarseImage): [Point, Point, Point, Point] | null {
  const { width: w } = img;
  const [x0, y0, x1, y1] = cand.bbox;
  const ys: number[] = [];
  const lefts: number[] = [];
  const rights: number[] = [];
  for (let y = y0; y <= y1; y++) {
    let l = -1;
    let r = -1;
    for (let x = x0; x <= x1; x++) {
      if (cand.mask[y * w + x]) {
        if (l < 0) l = x;
        r = x;
      }
    }
    if (l < 0) continue;
    ys.push(y);
    lefts.push(l - 0.5);
    rights.push(r + 0.5);
  }
  const xs: number[] = [];
  const tops: number[] = [];
  const bottoms: number[] = [];
  for (let x = x0; x <= x1; x++) {
    let t = -1;
    let b = -1;
    for (let y = y0; y <= y1; y++) {
      if (cand.mask[y * w + x]) {
        if (t < 0) t = y;
        b = y;
      }
    }
    if (t < 0) continue;
    xs.push(x);
    tops.push(t - 0.5);
    bottoms.push(b + 0.5);
  }
  if (ys.length < 4 || xs.length < 4) return null;
  const left = robustAxisLine(ys, lefts); // x = a y + b
  const right = robustAxisLine(ys, rights);
  const top = robustAxisLine(xs, tops); // y = a x + b
  const bottom = robustAxisLine(xs, bottoms);
  const vLine = (p: { a: number; b: number }): Line => {
    const len = Math.hypot(1, p.a);
    return { nx: 1 / len, ny: -p.a / len, c: p.b / len };
  };
  const hLine = (p: { a: number; b: number }): Line => {
    const len = Math.hypot(1, p.a);
    return { nx: -p.a / len, ny: 1 / len, c: p.b / len };
  };
  const L = vLine(left);
  const R = vLine(right);
  const T = hLine(top);
  const B = hLine(bottom);
  const pts = [intersectLines(T, L), intersectLines(T, R), intersectLines(B, R), intersectLines(B, L)];
  if (pts.some((p) => p === null)) return null;
  const f = img.f;
  // coarse pixel edge coordinate e (pixel i spans i-0.5..i+0.5) -> input coordinate f (e + 0.5) - 0.5
  return pts.map((p) => [f * (p![0] + 0.5) - 0.5, f * (p![1] + 0.5) - 0.5] as Point) as [Point, Point, Point, Point];
}
