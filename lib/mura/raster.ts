// Raster helpers for the mura analysis: weighted pyramids, separable Gaussian filtering with
// normalised convolution (pixels without data carry weight 0), robust statistics, flood fill.
// Per-pixel loops are plain typed-array code; nothing here allocates per pixel.

/** A weighted raster: `m` is the mean value of each pixel, `n` its weight (valid working pixels it
 *  stands for; 0 = no data). At pyramid level l a pixel covers a 2^l x 2^l block of working pixels. */
export interface Level {
  w: number;
  h: number;
  /** working pixels per level pixel along each axis (2^l) */
  factor: number;
  m: Float32Array;
  n: Float32Array;
}

/** Halve a level by 2x2 weighted averaging (odd sizes: the last row/column stands alone). */
export function halve(src: Level): Level {
  const w = Math.ceil(src.w / 2);
  const h = Math.ceil(src.h / 2);
  const m = new Float32Array(w * h);
  const n = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    const y0 = 2 * y;
    const y1 = Math.min(y0 + 1, src.h - 1);
    for (let x = 0; x < w; x++) {
      const x0 = 2 * x;
      const x1 = Math.min(x0 + 1, src.w - 1);
      let s = 0;
      let c = 0;
      const a = y0 * src.w + x0;
      const b = y0 * src.w + x1;
      const d = y1 * src.w + x0;
      const e = y1 * src.w + x1;
      // a block at the border repeats indices; count each source pixel once
      s += src.m[a] * src.n[a];
      c += src.n[a];
      if (x1 !== x0) {
        s += src.m[b] * src.n[b];
        c += src.n[b];
      }
      if (y1 !== y0) {
        s += src.m[d] * src.n[d];
        c += src.n[d];
        if (x1 !== x0) {
          s += src.m[e] * src.n[e];
          c += src.n[e];
        }
      }
      const i = y * w + x;
      n[i] = c;
      m[i] = c > 0 ? s / c : 0;
    }
  }
  return { w, h, factor: src.factor * 2, m, n };
}

/** Sampled, normalised Gaussian kernel of standard deviation sigma (pixels), radius ceil(3 sigma). */
export function gaussianKernel(sigma: number): Float32Array {
  const r = Math.max(1, Math.ceil(3 * sigma));
  const k = new Float32Array(2 * r + 1);
  let s = 0;
  for (let i = -r; i <= r; i++) {
    const v = Math.exp((-i * i) / (2 * sigma * sigma));
    k[i + r] = v;
    s += v;
  }
  for (let i = 0; i < k.length; i++) k[i] /= s;
  return k;
}

/** Element-wise product of two odd-length kernels centred on each other (the shorter one is padded). */
export function kernelProduct(a: Float32Array, b: Float32Array): Float32Array {
  const ra = (a.length - 1) / 2;
  const rb = (b.length - 1) / 2;
  const r = Math.min(ra, rb);
  const out = new Float32Array(2 * r + 1);
  for (let i = -r; i <= r; i++) out[i + r] = a[i + ra] * b[i + rb];
  return out;
}

/** Separable convolution with zero padding: out = k (x) k * src. tmp must have src's length.
 *  Rows: interior pixels without bounds checks; columns: whole rows accumulated tap by tap, so the
 *  inner loop runs over contiguous memory. */
export function convolveSeparable(
  src: Float32Array,
  w: number,
  h: number,
  k: Float32Array,
  out: Float32Array,
  tmp: Float32Array,
): void {
  const r = (k.length - 1) / 2;
  for (let y = 0; y < h; y++) {
    const row = y * w;
    for (let x = 0; x < w; x++) {
      if (x >= r && x < w - r) {
        let s = 0;
        const base = row + x - r;
        for (let i = 0; i <= 2 * r; i++) s += k[i] * src[base + i];
        tmp[row + x] = s;
      } else {
        const lo = Math.max(-r, -x);
        const hi = Math.min(r, w - 1 - x);
        let s = 0;
        for (let i = lo; i <= hi; i++) s += k[i + r] * src[row + x + i];
        tmp[row + x] = s;
      }
    }
  }
  for (let y = 0; y < h; y++) {
    const lo = Math.max(-r, -y);
    const hi = Math.min(r, h - 1 - y);
    const row = y * w;
    out.fill(0, row, row + w);
    for (let i = lo; i <= hi; i++) {
      const kk = k[i + r];
      const src2 = (y + i) * w;
      for (let x = 0; x < w; x++) out[row + x] += kk * tmp[src2 + x];
    }
  }
}

/** 1-D convolution with zero padding. */
export function convolve1d(src: Float64Array | Float32Array, k: Float32Array, out: Float64Array): void {
  const n = src.length;
  const r = (k.length - 1) / 2;
  for (let x = 0; x < n; x++) {
    const lo = Math.max(-r, -x);
    const hi = Math.min(r, n - 1 - x);
    let s = 0;
    for (let i = lo; i <= hi; i++) s += k[i + r] * src[x + i];
    out[x] = s;
  }
}

/** Median of the finite values of an array (copies; does not modify the input). NaN when empty. */
export function median(values: ArrayLike<number>): number {
  const a = new Float64Array(values.length);
  let n = 0;
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) a[n++] = values[i];
  if (n === 0) return NaN;
  const h = n >> 1;
  const hi = select(a, n, h);
  if (n % 2) return hi;
  // the lower middle is the largest value left of h after selection
  let lo = -Infinity;
  for (let i = 0; i < h; i++) if (a[i] > lo) lo = a[i];
  return 0.5 * (lo + hi);
}

/** k-th smallest of a[0..n) (Hoare quickselect, median-of-three pivot); reorders a. */
function select(a: Float64Array, n: number, k: number): number {
  let lo = 0;
  let hi = n - 1;
  while (hi > lo) {
    const mid = (lo + hi) >> 1;
    // median of three as pivot
    let p = a[mid];
    const x = a[lo];
    const y = a[hi];
    if ((x <= p && p <= y) || (y <= p && p <= x)) {
      // p is the median
    } else if ((p <= x && x <= y) || (y <= x && x <= p)) p = x;
    else p = y;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < p) i++;
      while (a[j] > p) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k];
  }
  return a[k];
}

/** 1.4826 x median absolute deviation about the median: the standard deviation of Gaussian data,
 *  robust to up to half the values being outliers (common practice). */
export function robustSigma(values: ArrayLike<number>): number {
  const med = median(values);
  if (!Number.isFinite(med)) return NaN;
  const d = new Float64Array(values.length);
  let n = 0;
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) d[n++] = Math.abs(values[i] - med);
  return 1.4826 * median(d.subarray(0, n));
}

/** Pick at most `max` evenly spread indices of the pixels that pass `keep`, for robust statistics of
 *  large rasters without sorting millions of values. */
export function sampleIndices(count: number, keep: (i: number) => boolean, max = 200_000): Int32Array {
  const step = Math.max(1, Math.floor(count / max));
  const out: number[] = [];
  for (let i = 0; i < count; i += step) if (keep(i)) out.push(i);
  return Int32Array.from(out);
}

/**
 * 8-connected flood fill on a w x h raster from `seed`, over pixels where `inside(i)` holds.
 * `stamp` marks visited pixels with `id` (ids must differ between calls sharing the stamp array).
 * Stops (returns null) when more than maxPixels are reached.
 */
export function floodFill(
  w: number,
  h: number,
  seed: number,
  inside: (i: number) => boolean,
  stamp: Int32Array,
  id: number,
  maxPixels: number,
): Int32Array | null {
  if (!inside(seed)) return new Int32Array(0);
  const stack: number[] = [seed];
  const out: number[] = [];
  stamp[seed] = id;
  while (stack.length) {
    const i = stack.pop() as number;
    out.push(i);
    if (out.length > maxPixels) return null;
    const x = i % w;
    const y = (i - x) / w;
    for (let dy = -1; dy <= 1; dy++) {
      const yy = y + dy;
      if (yy < 0 || yy >= h) continue;
      for (let dx = -1; dx <= 1; dx++) {
        const xx = x + dx;
        if (xx < 0 || xx >= w || (dx === 0 && dy === 0)) continue;
        const j = yy * w + xx;
        if (stamp[j] === id) continue;
        if (inside(j)) {
          stamp[j] = id;
          stack.push(j);
        }
      }
    }
  }
  return Int32Array.from(out);
}

/** Euclidean-ish dilation of a binary mask by `radius` pixels (two-pass chamfer distance, 3-4 weights). */
export function dilateMask(mask: Uint8Array, w: number, h: number, radius: number): Uint8Array {
  const INF = 1e9;
  const d = new Float32Array(w * h);
  for (let i = 0; i < d.length; i++) d[i] = mask[i] ? 0 : INF;
  chamfer(d, w, h);
  const out = new Uint8Array(w * h);
  const r = radius;
  for (let i = 0; i < d.length; i++) out[i] = d[i] <= r ? 1 : 0;
  return out;
}

/** Distance (pixels, chamfer 1 / sqrt 2 weights) to the nearest zero of d (d = 0 on the set, large elsewhere). */
export function chamfer(d: Float32Array, w: number, h: number): void {
  const a = 1;
  const b = Math.SQRT2;
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const i = y * w + x;
      let v = d[i];
      if (x > 0) v = Math.min(v, d[i - 1] + a);
      if (y > 0) {
        v = Math.min(v, d[i - w] + a);
        if (x > 0) v = Math.min(v, d[i - w - 1] + b);
        if (x < w - 1) v = Math.min(v, d[i - w + 1] + b);
      }
      d[i] = v;
    }
  }
  for (let y = h - 1; y >= 0; y--) {
    for (let x = w - 1; x >= 0; x--) {
      const i = y * w + x;
      let v = d[i];
      if (x < w - 1) v = Math.min(v, d[i + 1] + a);
      if (y < h - 1) {
        v = Math.min(v, d[i + w] + a);
        if (x < w - 1) v = Math.min(v, d[i + w + 1] + b);
        if (x > 0) v = Math.min(v, d[i + w - 1] + b);
      }
      d[i] = v;
    }
  }
}
