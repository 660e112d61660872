// Flicker bands: the display's light pulsing while a rolling shutter reads the sensor.
//
// Many displays dim by pulse-width modulation: LCD backlights below full brightness, most OLEDs, the
// scanning drivers of LED tiles switch the light on and off a few hundred to some tens of thousands of
// times a second. A camera with a rolling shutter (nearly every phone and mirrorless camera, and any
// camera in live view or video) exposes its sensor rows one after another, so each row collects a
// different share of the on-time: the photo shows bands along the sensor rows that are not on the
// panel. Their period is the modulation period over the readout time of one row; their depth falls as
// the exposure spans more periods (a whole number of periods leaves none). Measured as mura they are
// lines and bands, and a photo with them cannot be graded (common practice).
//
// What tells them from the panel's own bands, in one photo:
//   - they are periodic, with several cycles across the panel (a band mura is not);
//   - they lie along the sensor rows, which are the stored image rows (the decoder keeps the sensor
//     orientation): the ripple is the same in phase across the whole width of the panel; a panel's
//     stripes follow the panel's edges, so when the panel is turned in the frame their phase drifts
//     across its width (turning the camera about its axis by 10–20° tells the two apart);
//   - they have no counterpart along the rows: a direct-lit backlight's array of hot spots and a tiled
//     display's seams are periodic both ways.
// A panel's stripes lying exactly along the camera's rows (a striped backlight or one row of tiles
// photographed square and level) look the same: the message says how to tell them apart, and the
// limit can be raised or the check turned off (--max-flicker).

import { bilinear, fft, quadRowRun, robustLogSurface, shrink } from './quality.js';
import type { Corners, Plane } from '../types.js';

export interface FlickerFinding {
  /** peak-to-peak of the ripple's fundamental, fraction of the mean level (2 × its amplitude) */
  peakToPeak: number;
  /** period, working pixels (image rows) */
  periodPx: number;
  /** period in rows of the full-size photo */
  periodSensorRows: number;
  /** cycles of the ripple over the rows analysed */
  cycles: number;
  /** |Σ X_s| / Σ |X_s| over the strips at the ripple's frequency: 1 = in phase across the whole width */
  coherence: number;
  /** the strongest periodic ripple along the rows (a function of x), peak to peak, fraction; 0 = none */
  acrossPeakToPeak: number;
  /** power of the peak over the larger of the median powers just below and just above it */
  prominence: number;
}

export interface FlickerOptions {
  /** the photo's rows are working pixels of this many full-size rows */
  scale: number;
  /** with a tile grid (columns, rows): ripples at the seams' pitch along the rows are the tiles' own */
  tileGrid?: [number, number] | null;
}

/** Fewest cycles of a ripple over the rows analysed for it to count as periodic (two band mura side by
 *  side can pass for two cycles; three whole cycles, each as strong as the others, cannot). */
export const FLICKER_MIN_CYCLES = 3;
/** Shortest period looked at, working pixels (shorter ripples are moiré's: that gate looks at them). */
export const FLICKER_MIN_PERIOD_PX = 4;
/** Strips across the width whose ripples must agree in phase. */
const STRIPS = 4;
/** Agreement in phase the strips need (1 = identical). */
const MIN_COHERENCE = 0.8;
/** A spectral line, not a broad bump: power over the median power beside it. */
const MIN_PROMINENCE = 10;
/** Each whole cycle's amplitude at least this share of the strongest cycle's (a flicker keeps on). */
const MIN_CYCLE_SHARE = 0.6;

/** Each line's run inside the quadrilateral (lines are rows when `alongY`, else columns), kept where it
 *  is at least half the longest run: [first line, starts, ends], or null. */
function runs(q: Corners, w: number, h: number, alongY: boolean): { first: number; a: Int32Array; b: Int32Array } | null {
  const quad = alongY ? q : (q.map(([x, y]) => [y, x]) as Corners);
  const lines = alongY ? h : w;
  const across = alongY ? w : h;
  const a = new Int32Array(lines).fill(-1);
  const b = new Int32Array(lines).fill(-2);
  let longest = 0;
  for (let i = 0; i < lines; i++) {
    const r = quadRowRun(quad, i, 0, across - 1, 1);
    if (!r) continue;
    a[i] = r[0];
    b[i] = r[1];
    longest = Math.max(longest, r[1] - r[0] + 1);
  }
  let first = -1;
  let last = -1;
  for (let i = 0; i < lines; i++) {
    if (b[i] - a[i] + 1 >= 0.5 * longest && longest >= 4 * STRIPS) {
      if (first < 0) first = i;
      last = i;
    }
  }
  if (first < 0) return null;
  return { first, a: a.slice(first, last + 1), b: b.slice(first, last + 1) };
}

/** A smooth surface over the image: its level at the centres of square cells of `c` pixels. */
interface Level {
  c: number;
  cells: Plane;
}

/** The surface's level at (x, y), bilinear between the cells' centres (held at the outer centres). */
function levelAt(L: Level, x: number, y: number): number {
  const { width, height } = L.cells;
  return bilinear(L.cells, Math.min(width - 1, Math.max(0, x / L.c - 0.5)), Math.min(height - 1, Math.max(0, y / L.c - 0.5)));
}

/** Samples taken across the lines: every SAMPLE_STEP-th pixel (the ripple sought is the same along a
 *  line, so this loses only noise averaging, of which there is plenty). */
const SAMPLE_STEP = 2;

/**
 * Profiles of the panel's mean luminance over the smooth surface `L`, line by line, one per strip:
 * along y (rows; each row's run on the panel cut into STRIPS equal parts) when `alongY`, else along x
 * (columns, cut the same way). Natural logarithm of the means, so that the ripple is relative to the
 * level.
 */
function profiles(lum: Plane, L: Level, q: Corners, alongY: boolean): Float64Array[] | null {
  const W = lum.width;
  const H = lum.height;
  const rr = runs(q, W, H, alongY);
  if (!rr) return null;
  const n = rr.a.length;
  const sums = Array.from({ length: STRIPS }, () => new Float64Array(n));
  const counts = Array.from({ length: STRIPS }, () => new Float64Array(n));
  const d = lum.data;
  if (alongY) {
    for (let i = 0; i < n; i++) {
      const y = rr.first + i;
      const a = rr.a[i];
      const len = rr.b[i] - a + 1;
      for (let x = a; x <= rr.b[i]; x += SAMPLE_STEP) {
        const s = Math.min(STRIPS - 1, Math.floor(((x - a) * STRIPS) / len));
        sums[s][i] += d[y * W + x] / levelAt(L, x, y);
        counts[s][i]++;
      }
    }
  } else {
    const last = rr.first + n - 1;
    let y0 = H;
    let y1 = -1;
    for (let i = 0; i < n; i++) {
      y0 = Math.min(y0, rr.a[i]);
      y1 = Math.max(y1, rr.b[i]);
    }
    for (let y = y0; y <= y1; y += SAMPLE_STEP) {
      for (let x = rr.first, k = y * W + rr.first; x <= last; x++, k++) {
        const i = x - rr.first;
        const a = rr.a[i];
        if (y < a || y > rr.b[i]) continue;
        const s = Math.min(STRIPS - 1, Math.floor(((y - a) * STRIPS) / (rr.b[i] - a + 1)));
        sums[s][i] += d[k] / levelAt(L, x, y);
        counts[s][i]++;
      }
    }
  }
  for (let s = 0; s < STRIPS; s++) {
    const p = sums[s];
    const c = counts[s];
    for (let i = 0; i < n; i++) p[i] = Math.log(Math.max(p[i] / Math.max(c[i], 1), 1e-12));
  }
  return sums;
}

/** Order of the smooth surface divided out of the panel first (falloff, the panel's own variation). */
const SURFACE_ORDER = 4;

/**
 * A smooth surface under the panel: a robust polynomial of SURFACE_ORDER in the image coordinates,
 * fitted to the logarithm of cell means over the panel (cells about a fiftieth of the image's short
 * side, every SAMPLE_STEP-th pixel each way). Without it, a panel turned in the frame puts its own
 * corners' falloff into the rows' strips, a little more each row.
 */
function smoothLevel(lum: Plane, q: Corners): Level {
  const W = lum.width;
  const H = lum.height;
  const c = Math.max(4, Math.round(Math.min(W, H) / 50));
  const gw = Math.ceil(W / c);
  const gh = Math.ceil(H / c);
  const sum = new Float64Array(gw * gh);
  const cnt = new Float64Array(gw * gh);
  const d = lum.data;
  let ylo = H;
  let yhi = 0;
  for (const p of q) {
    ylo = Math.min(ylo, p[1]);
    yhi = Math.max(yhi, p[1]);
  }
  for (let y = Math.max(0, Math.floor(ylo)); y <= Math.min(H - 1, Math.ceil(yhi)); y += SAMPLE_STEP) {
    const run = quadRowRun(q, y, 0, W - 1, SAMPLE_STEP);
    if (!run) continue;
    const row = Math.floor(y / c) * gw;
    for (let x = run[0]; x <= run[1]; x += SAMPLE_STEP) {
      sum[row + Math.floor(x / c)] += d[y * W + x];
      cnt[row + Math.floor(x / c)]++;
    }
  }
  const logv = new Float64Array(gw * gh);
  const use = new Uint8Array(gw * gh);
  for (let k = 0; k < gw * gh; k++) {
    const m = cnt[k] > 0 ? sum[k] / cnt[k] : 0;
    logv[k] = Math.log(Math.max(m, 1e-12));
    use[k] = m > 0 && cnt[k] >= 0.5 * (c / SAMPLE_STEP) ** 2 ? 1 : 0;
  }
  const fit = robustLogSurface(logv, gw, gh, use, SURFACE_ORDER);
  const level = new Float32Array(gw * gh);
  for (let k = 0; k < level.length; k++) level[k] = Math.exp(fit[k]);
  return { c, cells: { width: gw, height: gh, data: level } };
}

/** Order of the polynomial in the line index taken out of each profile before looking for a ripple
 *  (the smooth level: falloff, the panel's own variation, a rotated panel's changing runs). Order 4 has
 *  at most three turns, a ripple of three cycles six. */
const DETREND_ORDER = 4;

/** Remove the least-squares polynomial of DETREND_ORDER in the line index, in place (the basis made
 *  orthonormal over the lines by Gram-Schmidt, so each coefficient is one projection). */
function detrend(p: Float64Array): void {
  const n = p.length;
  const basis: Float64Array[] = [];
  for (let d = 0; d <= DETREND_ORDER; d++) {
    const v = new Float64Array(n);
    for (let i = 0; i < n; i++) v[i] = ((2 * i) / (n - 1) - 1) ** d;
    for (const u of basis) {
      let dot = 0;
      for (let i = 0; i < n; i++) dot += v[i] * u[i];
      for (let i = 0; i < n; i++) v[i] -= dot * u[i];
    }
    let norm = 0;
    for (let i = 0; i < n; i++) norm += v[i] * v[i];
    norm = Math.sqrt(norm);
    for (let i = 0; i < n; i++) v[i] /= norm;
    basis.push(v);
  }
  for (const u of basis) {
    let dot = 0;
    for (let i = 0; i < n; i++) dot += p[i] * u[i];
    for (let i = 0; i < n; i++) p[i] -= dot * u[i];
  }
}

/**
 * Whether the ripple keeps on through the record, cycle after cycle, as a flicker does (a band mura and
 * its neighbour give one or two strong cycles): the strips' mean profile projected on the ripple's
 * frequency over each whole cycle in turn. `spread` is the weakest cycle's amplitude over the strongest
 * cycle's, `phase` the cycles' agreement in phase (|Σ z| / Σ |z|, 1 = the same phase in every cycle).
 */
function steadiness(ps: Float64Array[], periodPx: number): { spread: number; phase: number } {
  const n = ps[0].length;
  const cycles = Math.floor(n / periodPx);
  if (cycles < 2) return { spread: 0, phase: 0 };
  const w = (2 * Math.PI) / periodPx;
  const mags: number[] = [];
  let sr = 0;
  let si = 0;
  let sa = 0;
  for (let c = 0; c < cycles; c++) {
    const a = Math.round(c * periodPx);
    const b = Math.round((c + 1) * periodPx);
    let zr = 0;
    let zi = 0;
    for (let i = a; i < b; i++) {
      let v = 0;
      for (const p of ps) v += p[i];
      zr += v * Math.cos(w * i);
      zi -= v * Math.sin(w * i);
    }
    const m = Math.hypot(zr, zi);
    mags.push(m);
    sr += zr;
    si += zi;
    sa += m;
  }
  const top = Math.max(...mags);
  return { spread: top > 0 ? Math.min(...mags) / top : 0, phase: sa > 0 ? Math.hypot(sr, si) / sa : 0 };
}

interface Spectrum {
  /** the strips' detrended profiles */
  profiles: Float64Array[];
  /** complex spectrum of each strip (zero-padded to M) */
  re: Float64Array[];
  im: Float64Array[];
  /** the strips' mean spectrum's amplitude of a sinusoid at each frequency bin (fraction of the level) */
  amp: Float64Array;
  n: number;
  M: number;
}

/** Hann-windowed, zero-padded (4× at least) spectra of the strips' detrended profiles. */
function spectrum(ps: Float64Array[]): Spectrum {
  const n = ps[0].length;
  let M = 1;
  while (M < 4 * n) M <<= 1;
  let wsum = 0;
  const win = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    win[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / (n - 1));
    wsum += win[i];
  }
  const re: Float64Array[] = [];
  const im: Float64Array[] = [];
  for (const p of ps) {
    detrend(p);
    const r = new Float64Array(M);
    const q = new Float64Array(M);
    for (let i = 0; i < n; i++) r[i] = p[i] * win[i];
    fft(r, q);
    re.push(r);
    im.push(q);
  }
  const amp = new Float64Array(M >> 1);
  for (let k = 0; k < M >> 1; k++) {
    let sr = 0;
    let si = 0;
    for (let s = 0; s < ps.length; s++) {
      sr += re[s][k];
      si += im[s][k];
    }
    // a sinusoid of amplitude A gives |X| = A Σw / 2 at its frequency
    amp[k] = (2 * Math.hypot(sr, si)) / ps.length / wsum;
  }
  return { profiles: ps, re, im, amp, n, M };
}

function median(a: number[]): number {
  if (a.length === 0) return 0;
  const s = a.slice().sort((x, y) => x - y);
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : 0.5 * (s[m - 1] + s[m]);
}

/** The strongest spectral line between the shortest and longest periods allowed: bin, amplitude and
 *  prominence (null when no local maximum stands out at all). */
function strongestLine(sp: Spectrum): { k: number; amp: number; prominence: number } | null {
  const { amp, n, M } = sp;
  const kmin = Math.ceil((FLICKER_MIN_CYCLES * M) / n);
  const kmax = Math.floor(M / FLICKER_MIN_PERIOD_PX);
  // the Hann window's main lobe is ±2 bins of the unpadded length
  const lobe = Math.ceil((2 * M) / n);
  let best: { k: number; amp: number; prominence: number } | null = null;
  for (let k = Math.max(kmin, 1); k <= Math.min(kmax, (M >> 1) - 2); k++) {
    if (!(amp[k] >= amp[k - 1] && amp[k] >= amp[k + 1])) continue;
    if (best && amp[k] <= best.amp) continue;
    // median power beside the line, below and above it (a falling trend's leakage is no line); the
    // line's own harmonics are left out (narrow pulses have them as strong as the fundamental, and with
    // few cycles the second lies within three lobes)
    const harmonic = (j: number): boolean => {
      const m = Math.round(j / k);
      return m >= 2 && Math.abs(j - m * k) < lobe;
    };
    const below: number[] = [];
    const above: number[] = [];
    for (let j = Math.max(1, k - 3 * lobe); j <= k - lobe; j++) below.push(amp[j] * amp[j]);
    for (let j = k + lobe; j <= Math.min((M >> 1) - 1, k + 3 * lobe); j++) if (!harmonic(j)) above.push(amp[j] * amp[j]);
    if (below.length + above.length === 0) continue;
    const side = Math.max(median(below), median(above), 1e-30);
    best = { k, amp: amp[k], prominence: (amp[k] * amp[k]) / side };
  }
  return best;
}

/**
 * Look for flicker bands on the panel (see the file's head): null when the panel shows no periodic
 * ripple along the image rows that is the same across its width and has no counterpart along them.
 * `lum` is linear luminance at working scale, `corners` the active area's outline on it.
 */
export function findFlicker(lum: Plane, corners: Corners, o: FlickerOptions): FlickerFinding | null {
  const q = shrink(corners, 0.9);
  if (lum.width < 8 || lum.height < 8) return null;
  const level = smoothLevel(lum, q);
  const ps = profiles(lum, level, q, true);
  if (!ps) return null;
  const rows = ps[0].length;
  if (rows < FLICKER_MIN_CYCLES * 2 * FLICKER_MIN_PERIOD_PX) return null;
  const along = spectrum(ps);
  const line = strongestLine(along);
  if (!line || line.prominence < MIN_PROMINENCE) return null;
  let sr = 0;
  let si = 0;
  let sa = 0;
  for (let s = 0; s < along.re.length; s++) {
    sr += along.re[s][line.k];
    si += along.im[s][line.k];
    sa += Math.hypot(along.re[s][line.k], along.im[s][line.k]);
  }
  const coherence = sa > 0 ? Math.hypot(sr, si) / sa : 0;
  if (coherence < MIN_COHERENCE) return null;
  // the peak between the bins: a parabola through the logarithms of the three amplitudes about it
  const la = Math.log(along.amp[line.k - 1]);
  const lb = Math.log(along.amp[line.k]);
  const lc = Math.log(along.amp[line.k + 1]);
  const den = la - 2 * lb + lc;
  const delta = den < 0 ? Math.max(-0.5, Math.min(0.5, (0.5 * (la - lc)) / den)) : 0;
  const periodPx = along.M / (line.k + delta);
  const peakAmp = Math.exp(lb - 0.25 * (la - lc) * delta);
  const steady = steadiness(along.profiles, periodPx);
  if (steady.spread < MIN_CYCLE_SHARE || steady.phase < MIN_COHERENCE) return null;
  // a tiled display's seams along the rows, at the tiles' pitch or a harmonic of it
  const tileRows = o.tileGrid?.[1] ?? 0;
  if (tileRows >= 2) {
    const pitch = (corners[3][1] - corners[0][1] + (corners[2][1] - corners[1][1])) / 2 / tileRows;
    const h = pitch / periodPx;
    if (Math.abs(h - Math.round(h)) < 0.1 * Math.round(h) && Math.round(h) >= 1) return null;
  }
  // the counterpart along the rows: a periodic pattern both ways is the panel's own (hot spots, tiles)
  const pc = profiles(lum, level, q, false);
  const other = pc && pc[0].length >= FLICKER_MIN_CYCLES * 2 * FLICKER_MIN_PERIOD_PX ? strongestLine(spectrum(pc)) : null;
  const acrossAmp = other && other.prominence >= MIN_PROMINENCE ? other.amp : 0;
  if (acrossAmp >= 0.5 * line.amp) return null;
  return {
    peakToPeak: 2 * peakAmp,
    periodPx,
    periodSensorRows: periodPx * o.scale,
    cycles: rows / periodPx,
    coherence,
    acrossPeakToPeak: 2 * acrossAmp,
    prominence: line.prominence,
  };
}

