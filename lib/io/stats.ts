// Order statistics of large Float32 arrays without sorting them: histogram passes narrow the
// search to one bin, then that bin's few values are sorted. Exact, O(n) passes, no copy of the data.

const BINS = 4096;
const SORT_LIMIT = 1 << 16;

/** The k-th smallest value (0-based) of data; NaN values are not allowed. */
export function kthSmallest(data: Float32Array, k: number): number {
  const n = data.length;
  if (n === 0) throw new RangeError('kthSmallest of an empty array');
  if (!(k >= 0 && k < n && Number.isInteger(k))) throw new RangeError(`rank ${k} outside 0..${n - 1}`);
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < n; i++) {
    const v = data[i]!;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  let rank = k; // rank within the values in [lo, hi]
  let count = n;
  const hist = new Float64Array(BINS);
  for (let iter = 0; iter < 64; iter++) {
    if (lo === hi) return lo;
    if (count <= SORT_LIMIT) break;
    const scale = BINS / (hi - lo);
    hist.fill(0);
    for (let i = 0; i < n; i++) {
      const v = data[i]!;
      if (v < lo || v > hi) continue;
      let b = Math.floor((v - lo) * scale);
      if (b >= BINS) b = BINS - 1;
      hist[b]!++;
    }
    let b = 0;
    let before = 0;
    while (before + hist[b]! <= rank) before += hist[b++]!;
    // the bin's exact value range: values in other bins lie strictly outside it (floor is monotone)
    let nlo = Infinity;
    let nhi = -Infinity;
    for (let i = 0; i < n; i++) {
      const v = data[i]!;
      if (v < lo || v > hi) continue;
      let bb = Math.floor((v - lo) * scale);
      if (bb >= BINS) bb = BINS - 1;
      if (bb !== b) continue;
      if (v < nlo) nlo = v;
      if (v > nhi) nhi = v;
    }
    rank -= before;
    count = hist[b]!;
    lo = nlo;
    hi = nhi;
  }
  const sel = new Float32Array(count);
  let m = 0;
  for (let i = 0; i < n && m < count; i++) {
    const v = data[i]!;
    if (v >= lo && v <= hi) sel[m++] = v;
  }
  sel.sort();
  return sel[rank]!;
}

/**
 * Quantile p (0..1) with linear interpolation between order statistics at h = (n − 1)·p
 * (Hyndman & Fan 1996, definition 7; the default of R and NumPy).
 */
export function quantile(data: Float32Array, p: number): number {
  if (!(p >= 0 && p <= 1)) throw new RangeError(`quantile p must be in 0..1, got ${p}`);
  const n = data.length;
  const h = (n - 1) * p;
  const i = Math.floor(h);
  const a = kthSmallest(data, i);
  if (h === i || i + 1 >= n) return a;
  const b = kthSmallest(data, i + 1);
  return a + (h - i) * (b - a);
}
