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

const FINE_BINS = 65536;
const COLLECT_LIMIT = 1 << 20;

/**
 * Several order statistics (0-based ranks) in three passes: min/max, a fine histogram, then one pass
 * collecting the values of the bins that hold the ranks (each bin sorted on its own). A bin too full
 * to collect (heavy ties, very concentrated data) falls back to kthSmallest's narrowing passes.
 */
export function orderStatistics(data: Float32Array, ranks: readonly number[]): number[] {
  const n = data.length;
  if (n === 0) throw new RangeError('order statistics of an empty array');
  for (const k of ranks) if (!(k >= 0 && k < n && Number.isInteger(k))) throw new RangeError(`rank ${k} outside 0..${n - 1}`);
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < n; i++) {
    const v = data[i]!;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  if (lo === hi) return ranks.map(() => lo);
  const scale = FINE_BINS / (hi - lo);
  const hist = new Uint32Array(FINE_BINS);
  for (let i = 0; i < n; i++) {
    let b = Math.floor((data[i]! - lo) * scale);
    if (b >= FINE_BINS) b = FINE_BINS - 1;
    hist[b]!++;
  }
  // locate each rank's bin
  const order = ranks.map((k, i) => ({ k, i })).sort((a, b) => a.k - b.k);
  const where: Array<{ bin: number; offset: number }> = new Array(ranks.length);
  let b = 0;
  let before = 0;
  for (const { k, i } of order) {
    while (before + hist[b]! <= k) before += hist[b++]!;
    where[i] = { bin: b, offset: k - before };
  }
  // collect the values of the needed bins that are small enough
  const slot = new Int32Array(FINE_BINS).fill(-1);
  const bins: Float32Array[] = [];
  const fill: number[] = [];
  for (const w of where) {
    if (slot[w.bin] === -1 && hist[w.bin]! <= COLLECT_LIMIT) {
      slot[w.bin] = bins.length;
      bins.push(new Float32Array(hist[w.bin]!));
      fill.push(0);
    }
  }
  if (bins.length > 0) {
    for (let i = 0; i < n; i++) {
      const v = data[i]!;
      let bb = Math.floor((v - lo) * scale);
      if (bb >= FINE_BINS) bb = FINE_BINS - 1;
      const sIdx = slot[bb]!;
      if (sIdx >= 0) bins[sIdx]![fill[sIdx]!++] = v;
    }
    for (const arr of bins) arr.sort();
  }
  return ranks.map((k, i) => {
    const w = where[i]!;
    const sIdx = slot[w.bin]!;
    return sIdx >= 0 ? bins[sIdx]![w.offset]! : kthSmallest(data, k);
  });
}

/**
 * Quantiles p (0..1) with linear interpolation between order statistics at h = (n − 1)·p
 * (Hyndman & Fan 1996, definition 7; the default of R, NumPy and simple-statistics).
 */
export function quantiles(data: Float32Array, ps: readonly number[]): number[] {
  const n = data.length;
  const ranks: number[] = [];
  for (const p of ps) {
    if (!(p >= 0 && p <= 1)) throw new RangeError(`quantile p must be in 0..1, got ${p}`);
    const h = (n - 1) * p;
    const i = Math.floor(h);
    ranks.push(i, Math.min(i + 1, n - 1));
  }
  const values = orderStatistics(data, ranks);
  return ps.map((p, j) => {
    const h = (n - 1) * p;
    const a = values[2 * j]!;
    const b = values[2 * j + 1]!;
    return a + (h - Math.floor(h)) * (b - a);
  });
}

/** One quantile; see quantiles. */
export function quantile(data: Float32Array, p: number): number {
  return quantiles(data, [p])[0]!;
}
