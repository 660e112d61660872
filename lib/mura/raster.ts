// Raster helpers for the mura analysis: robust statistics, distance transform.
// Per-pixel loops are plain typed-array code; nothing here allocates per pixel.

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
