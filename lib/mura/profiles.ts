// Measuring a thin feature across a 1-D profile (a tile seam, a line), to a fraction of a sample.

export interface ThinMeasure {
  /** sub-sample centre, width (samples), peak and mean over the half-peak interval, all against P */
  centre: number;
  width: number;
  peak: number;
  mean: number;
}

/**
 * Half-peak width, peak and mean of a thin feature on a 1-D profile, to a fraction of a sample.
 * `smooth` is the profile smoothed by a Gaussian of g samples (or the raw profile with g = 0), `raw`
 * the unsmoothed one. The peak is interpolated by a parabola through the three highest samples, the
 * crossings of the half level linearly; the widening by g is undone as for a Gaussian cross-profile
 * (FWHM² = FWHM_true² + 8 ln2 g², peak lowered by sigma / sigma_eff); the mean is the raw profile,
 * linearly interpolated, averaged over the true half-peak interval.
 */
export function thinMeasure(
  smooth: Float64Array,
  raw: Float64Array,
  wts: Float64Array,
  i: number,
  P: number,
  sign: 1 | -1,
  g: number,
): ThinMeasure {
  const n = smooth.length;
  let centre = i;
  let peak = smooth[i];
  if (i > 0 && i < n - 1 && wts[i - 1] > 0 && wts[i + 1] > 0) {
    const y0 = smooth[i - 1];
    const y1 = smooth[i];
    const y2 = smooth[i + 1];
    const den = y0 - 2 * y1 + y2;
    if (sign * den < 0) {
      const d = Math.max(-0.5, Math.min(0.5, (0.5 * (y0 - y2)) / den));
      centre = i + d;
      peak = y1 - 0.25 * (y0 - y2) * d;
    }
  }
  const half = P + (peak - P) / 2;
  const [b0, b1] = interval(smooth, wts, i, half, sign);
  const fr = (inside: number, outside: number): number => {
    if (outside < 0 || outside >= n || wts[outside] <= 0) return 0.5;
    const d = smooth[inside] - smooth[outside];
    return d !== 0 ? Math.min(1, Math.max(0, (smooth[inside] - half) / d)) : 0.5;
  };
  const wEff = Math.max(0.25, b1 - b0 + fr(b0, b0 - 1) + fr(b1, b1 + 1));
  const se2 = (wEff * wEff) / (8 * Math.LN2);
  const sb2 = Math.max(se2 - g * g, 0.25 * se2);
  const width = 2 * Math.sqrt(2 * Math.LN2 * sb2);
  const lo = centre - width / 2;
  let sum = 0;
  const nS = 32;
  for (let k = 0; k < nS; k++) {
    const a = lo + ((k + 0.5) * width) / nS;
    const i0 = Math.max(0, Math.min(n - 2, Math.floor(a)));
    const t = Math.max(0, Math.min(1, a - i0));
    sum += (1 - t) * raw[i0] + t * raw[i0 + 1];
  }
  return { centre, width, peak: P + (peak - P) * Math.sqrt(se2 / sb2), mean: sum / nS };
}

function interval(v: Float64Array, wts: Float64Array, i: number, thr: number, sign: 1 | -1): [number, number] {
  let lo = i;
  let hi = i;
  while (lo > 0 && wts[lo - 1] > 0 && sign * (v[lo - 1] - thr) >= 0) lo--;
  while (hi < v.length - 1 && wts[hi + 1] > 0 && sign * (v[hi + 1] - thr) >= 0) hi++;
  return [lo, hi];
}
