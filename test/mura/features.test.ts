// Found, right kind, contrast and area against analytical half-peak truths, on synthetic panel maps:
// features multiply a smooth 2nd-order background, plus white noise. Acceptance tolerances of the
// mura issue: mean contrast within +-25 %, area within +-30 % (for features of SEMU >= 2).
import { describe, expect, it } from 'vitest';
import { analyseMura, semu } from '../../lib/mura/index.js';
import { FWHM_PER_SIGMA, synthMap, type SynthFeature } from '../../scripts/mura-synth.js';
import { gaussTruth, meanOverHalfPeak, nearest, relErr } from './helpers.js';

const W = 240;
const H = 150;
const SMOOTH = [
  [0, 0.03, -0.05],
  [0.04, 0.01],
  [-0.06],
];

/** A Gaussian feature of the synthetic map from its sigma (mm), peak (%) and centre (mm). */
function gauss(f: { sigma: number; peak: number; x: number; y: number }): SynthFeature {
  return { kind: 'gauss', xMm: f.x, yMm: f.y, sigmaMm: f.sigma, contrastPct: f.peak };
}

function run(features: SynthFeature[], seed: number, noisePct = 0.5) {
  const map = synthMap({ widthMm: W, heightMm: H, pxPerMm: 2, noisePct, seed, smooth: SMOOTH, features });
  return analyseMura(map, { pattern: 'gray' });
}

/** The same on a larger map, 400 x 250 mm. */
function big(features: SynthFeature[], seed: number) {
  return analyseMura(synthMap({ widthMm: 400, heightMm: 250, pxPerMm: 2, noisePct: 0.5, seed, smooth: SMOOTH, features }), { pattern: 'gray' });
}

describe('round features', () => {
  it('finds a bright Gaussian spot and a dark Gaussian cloud with the analytical half-peak figures', () => {
    const spot = { sigma: 4, peak: 4, x: 60, y: 50 };
    const cloud = { sigma: 24, peak: -2.5, x: 160, y: 85 };
    const r = run([gauss(spot), gauss(cloud)], 11);
    expect(r.blobs.length).toBe(2);
    const s = nearest(r.blobs, spot.x, spot.y)!;
    const c = nearest(r.blobs, cloud.x, cloud.y)!;
    expect(s).not.toBe(c);

    const ts = gaussTruth(spot.sigma, spot.peak); // area 69.7 mm², mean 2.885 %
    expect(s.kind).toBe('spot');
    expect(s.polarity).toBe('bright');
    expect(Math.hypot(s.xMm - spot.x, s.yMm - spot.y)).toBeLessThan(1);
    expect(relErr(s.contrastPct, ts.contrastPct)).toBeLessThan(0.25);
    expect(relErr(s.areaMm2, ts.areaMm2)).toBeLessThan(0.3);
    expect(relErr(s.peakContrastPct, spot.peak)).toBeLessThan(0.25);

    const tc = gaussTruth(cloud.sigma, cloud.peak); // area 2508 mm² (56.5 mm across), mean -1.803 %
    expect(c.kind).toBe('cloud');
    expect(c.polarity).toBe('dark');
    expect(Math.hypot(c.xMm - cloud.x, c.yMm - cloud.y)).toBeLessThan(3);
    expect(relErr(c.contrastPct, tc.contrastPct)).toBeLessThan(0.25);
    expect(relErr(c.areaMm2, tc.areaMm2)).toBeLessThan(0.3);

    // SEMU of each finding is the published form applied to its own figures, and the list is ranked
    for (const b of r.blobs) expect(b.semu).toBeCloseTo(semu(b.contrastPct, b.areaMm2), 2);
    expect(r.blobs[0].semu).toBeGreaterThanOrEqual(r.blobs[1].semu);
    expect(r.blobs.map((b) => b.id)).toEqual([1, 2]);
    expect(r.maxSemu).toBe(r.blobs[0].semu);
  });

  it('measures oval clouds, long along either axis, with the analytical half-peak figures', () => {
    // exp(-(x²/2sx² + y²/2sy²)): the half-peak region is an ellipse of semi-axes s sqrt(2 ln2), area
    // pi 2 ln2 sx sy, and the mean over it is 1 / (2 ln2) of the peak, as for the round one (the same
    // integral after scaling an axis; by hand). Another generator may draw clouds oval; issue 4's
    // tolerances. On a 600 x 340 mm map, as the study's panel.
    const ovals = [
      { sx: 50, sy: 20, peak: -3 },
      { sx: 20, sy: 40, peak: 2.5 },
      { sx: 60, sy: 25, peak: 2.5 },
    ];
    for (const [k, o] of ovals.entries()) {
      const map = synthMap({ widthMm: 600, heightMm: 340, pxPerMm: 2, noisePct: 0.5, seed: 40 + k, smooth: SMOOTH, features: [{ kind: 'gauss', xMm: 280, yMm: 160, sigmaMm: o.sx, sigmaYMm: o.sy, contrastPct: o.peak }] });
      const r = analyseMura(map, { pattern: 'gray' });
      const what = `oval ${o.sx} x ${o.sy} mm, ${o.peak} %: ${r.blobs.map((b) => `${b.kind} A ${b.areaMm2} C ${b.contrastPct}`).join('; ')}`;
      expect(r.blobs.length, what).toBe(1);
      const b = r.blobs[0];
      expect(b.kind, what).toBe('cloud');
      expect(relErr(b.areaMm2, Math.PI * 2 * Math.LN2 * o.sx * o.sy), what).toBeLessThan(0.3);
      expect(relErr(b.contrastPct, o.peak / (2 * Math.LN2)), what).toBeLessThan(0.25);
    }
  });
});

describe('features on features', () => {
  it('finds a cloud whose flank carries a sharper spot, and measures the cloud without the spot', () => {
    // The spot stands one cloud sigma from the cloud's top, where the cloud is at exp(-1/2) = 61 % of its
    // peak: the two share one region above half the cloud's height and the spot is its highest point.
    const cloud = { sigma: 25, peak: 6, x: 150, y: 90 };
    const spot = { sigma: 4, peak: 12, x: 170, y: 105 };
    const map = synthMap({
      widthMm: 300,
      heightMm: 180,
      pxPerMm: 2,
      noisePct: 0.5,
      seed: 21,
      smooth: SMOOTH,
      features: [gauss(cloud), gauss(spot)],
    });
    const r = analyseMura(map, { pattern: 'gray' });
    const clouds = r.blobs.filter((b) => b.kind === 'cloud');
    const spots = r.blobs.filter((b) => b.kind === 'spot');
    expect(clouds).toHaveLength(1);
    expect(spots).toHaveLength(1);
    const c = clouds[0];
    // analytic truth of a Gaussian's half-peak disc (helpers.ts, derived by hand): 2722 mm² (58.9 mm across), mean 4.33 %
    const tc = gaussTruth(cloud.sigma, cloud.peak);
    expect(Math.hypot(c.xMm - cloud.x, c.yMm - cloud.y)).toBeLessThan(5);
    expect(relErr(c.contrastPct, tc.contrastPct)).toBeLessThan(0.25);
    expect(relErr(c.areaMm2, tc.areaMm2)).toBeLessThan(0.3);
    expect(Math.hypot(spots[0].xMm - spot.x, spots[0].yMm - spot.y)).toBeLessThan(1);
  });

  it('measures a dark spot standing on a bright cloud against the cloud', () => {
    // The cloud lifts the spot's surroundings by 1.5 %: against the smooth background the spot's dip is
    // only 2.5 % deep and its half-peak region the part where the spot is below -1.25 %, which took
    // 0.54 of its area (phi >= 0.69 instead of 0.5, ln(1/0.69) / ln 2) and 63 % of its contrast.
    const cloud = { sigma: 30, peak: 1.5, x: 120, y: 75 };
    const spot = { sigma: 4, peak: -4, x: 122, y: 77 };
    const r = run([gauss(cloud), gauss(spot)], 41);
    const s = r.blobs.find((b) => b.polarity === 'dark');
    expect(s?.kind).toBe('spot');
    // analytic truth of a Gaussian's half-peak disc (helpers.ts): 69.7 mm², mean -2.885 % (the spot's own
    // modulation; against the cloud's top it is -4 / 1.015, within 2 % of that)
    const ts = gaussTruth(spot.sigma, spot.peak);
    expect(Math.hypot(s!.xMm - spot.x, s!.yMm - spot.y)).toBeLessThan(1);
    expect(relErr(s!.contrastPct, ts.contrastPct)).toBeLessThan(0.25);
    expect(relErr(s!.areaMm2, ts.areaMm2)).toBeLessThan(0.3);
    expect(r.blobs.some((b) => b.polarity === 'bright' && b.kind === 'cloud')).toBe(true);
  });

  it('measures a spot on the upper flank of a cloud against the cloud under it', () => {
    // The cloud is at 6.7 % under the spot, 30 mm from its top, and falls across the spot's surroundings:
    // measured against the median of a ring around it (which stands far below the cloud's level at the
    // spot) the spot came out at +34 % contrast and +65 % area.
    const cloud = { sigma: 50, peak: 8, x: 200, y: 80 };
    const spot = { sigma: 14, peak: 12, x: 200, y: 110 };
    const r = big([gauss(cloud), gauss(spot)], 3);
    const s = nearest(r.blobs, spot.x, spot.y)!;
    // analytic truth of a Gaussian's half-peak disc (helpers.ts): 854 mm², mean 8.66 %
    const ts = gaussTruth(spot.sigma, spot.peak);
    expect(s.kind).toBe('spot');
    expect(Math.hypot(s.xMm - spot.x, s.yMm - spot.y)).toBeLessThan(3);
    expect(relErr(s.contrastPct, ts.contrastPct)).toBeLessThan(0.25);
    expect(relErr(s.areaMm2, ts.areaMm2)).toBeLessThan(0.3);
  });

  it('measures a faint cloud on a noisy map at its true size (the top taken from a fitted surface)', () => {
    // peak 1.5 % on 1 % pixel noise: the largest pixel of the smoothed level it is measured on stands
    // several noise sigmas above the true top, and a half-peak level taken from it shrinks the region
    // (to 0.66 of the true area on this map, before the top was fitted)
    const cloud = { sigma: 20, peak: 1.5, x: 120, y: 75 };
    const r = run([gauss(cloud)], 31, 1.0);
    const c = nearest(r.blobs, cloud.x, cloud.y)!;
    // analytic truth (helpers.ts, derived by hand): 1742 mm², mean 1.08 %
    const tc = gaussTruth(cloud.sigma, cloud.peak);
    expect(relErr(c.areaMm2, tc.areaMm2)).toBeLessThan(0.3);
    expect(relErr(c.contrastPct, tc.contrastPct)).toBeLessThan(0.25);
    expect(relErr(c.peakContrastPct, cloud.peak)).toBeLessThan(0.15);
  });
});

describe('features against the panel edge or crossing others', () => {
  it('measures a band across a strong cloud from its profile along it, not the plain mean over its pixels', () => {
    // the cloud adds its own light to the stretch of the band it covers; measured as the plain mean over
    // the band's pixels the band came out at 3.55 % (+74 %)
    const r = big(
      [
        { kind: 'band', axis: 'horizontal', posMm: 110, fwhmMm: 20, profile: 'cos', contrastPct: 2.5 },
        { kind: 'gauss', xMm: 200, yMm: 120, sigmaMm: 35, contrastPct: 8 },
      ],
      41,
    );
    const bands = r.blobs.filter((b) => b.kind === 'band');
    expect(bands).toHaveLength(1);
    // raised cosine: mean over its half-peak width 1/2 + 1/pi of the peak (as above)
    expect(relErr(bands[0].contrastPct, 2.5 * (0.5 + 1 / Math.PI))).toBeLessThan(0.25);
    expect(relErr(bands[0].areaMm2, 20 * 400)).toBeLessThan(0.3);
    expect(Math.abs(bands[0].yMm - 110)).toBeLessThan(3);
  });

  it('keeps a cloud that stands out of a wide band it sits on', () => {
    // a dark cloud (sigma 30 mm, half-peak 71 mm across) on the middle of a dark band 60 mm wide across
    // the whole panel: the search runs with the band's profile taken out, so the cloud is found against
    // the band; being nearly the band's width, it had been dropped as the band seen again
    const cloud = { sigma: 30, peak: -6, x: 200, y: 90 };
    const bandPeak = -2;
    const r = big([{ kind: 'band', axis: 'vertical', posMm: 200, fwhmMm: 60, profile: 'cos', contrastPct: bandPeak }, gauss(cloud)], 41);
    expect(r.blobs.some((b) => b.kind === 'band' && b.detail.axis === 'vertical' && Math.abs(b.xMm - 200) < 5)).toBe(true);
    const c = r.blobs.find((b) => b.kind === 'cloud' && Math.hypot(b.xMm - cloud.x, b.yMm - cloud.y) < 15);
    expect(c).toBeDefined();
    // against the band's level at its centre the cloud's peak is -6 / (1 - 0.02) % (features multiply
    // the field, scripts/mura-synth.ts); analytic half-peak truth (helpers.ts, derived by hand): 3920 mm²,
    // mean -4.42 %
    const tc = gaussTruth(cloud.sigma, cloud.peak / (1 + bandPeak / 100));
    expect(relErr(c!.areaMm2, tc.areaMm2)).toBeLessThan(0.3);
    expect(relErr(c!.contrastPct, tc.contrastPct)).toBeLessThan(0.25);
  });

  it('keeps a round spot on a band of its sign, fainter than the band', () => {
    // a bright Gaussian spot (sigma 15 mm, 35 mm across at half peak) on a bright band 30 mm wide, well
    // inside the panel: found against the band (the band's profile is taken out for the search), it stands
    // out by less than the band's own contrast and had been dropped as a remnant of the band
    const spot = { sigma: 15, peak: 2.5, x: 150, y: 110 };
    const bandPeak = 3.6;
    const r = big([{ kind: 'band', axis: 'horizontal', posMm: 110, fwhmMm: 30, profile: 'cos', contrastPct: bandPeak }, gauss(spot)], 43);
    expect(r.blobs.some((b) => b.kind === 'band' && b.detail.axis === 'horizontal' && Math.abs(b.yMm - 110) < 5)).toBe(true);
    const s = r.blobs.find((b) => b.kind !== 'band' && b.polarity === 'bright' && Math.hypot(b.xMm - spot.x, b.yMm - spot.y) < 10);
    expect(s).toBeDefined();
    // against the band's level at its centre the spot's peak is 2.5 / (1 + 0.036) % (features multiply
    // the field, scripts/mura-synth.ts); analytic half-peak mean (helpers.ts, derived by hand): 1.74 %
    const ts = gaussTruth(spot.sigma, spot.peak / (1 + bandPeak / 100));
    expect(relErr(s!.contrastPct, ts.contrastPct)).toBeLessThan(0.25);
    // no other finding of the band's sign beside the band itself and the spot
    expect(r.blobs.filter((b) => b.polarity === 'bright' && b.semu >= 1).length).toBe(2);
  });

  it("finds a spot on a cloud's flank whose top stays below the cloud's", () => {
    // a bright cloud (sigma 30 mm, +8 %) and 42 mm from its centre, where the cloud is still 3 % up, a
    // bright Gaussian spot (sigma 7 mm, +4.5 %): the spot's top (about 7.5 %) stays below the cloud's and
    // the two meet above half the spot's height, so no half-peak region of the spot's own stops short of
    // the cloud; it is measured above the level it meets the cloud at
    const cloud = { sigma: 30, peak: 8, x: 180, y: 125 };
    const spot = { sigma: 7, peak: 4.5, x: 222, y: 125 };
    const r = big([gauss(cloud), gauss(spot)], 45);
    const c = r.blobs.find((b) => b.kind === 'cloud' && Math.hypot(b.xMm - cloud.x, b.yMm - cloud.y) < 10);
    expect(c).toBeDefined();
    const s = r.blobs.find((b) => b !== c && b.polarity === 'bright' && Math.hypot(b.xMm - spot.x, b.yMm - spot.y) < 5);
    expect(s).toBeDefined();
    expect(s!.kind).toBe('spot');
    // smaller than the spot's analytic half-peak disc would be on a flat field (helpers.ts: 2 pi ln2
    // sigma^2 = 213 mm^2) at most by the part of it the flank covers; never the cloud's size
    expect(s!.areaMm2).toBeGreaterThan(0.3 * gaussTruth(spot.sigma, spot.peak).areaMm2);
    expect(s!.areaMm2).toBeLessThan(2 * gaussTruth(spot.sigma, spot.peak).areaMm2);
  });

  it('masks a cloud that reaches the panel edge from the surface fit when its top lies inside', () => {
    // centred 45 mm from the bottom edge (1.1 sigma): left in the surface fit as an edge effect, the
    // surface bent into it and its half-peak region came out at 0.63 of the true area
    const cloud = { sigma: 40, peak: -2.5, x: 220, y: 205 };
    const r = big([gauss(cloud)], 41);
    const c = nearest(r.blobs, cloud.x, cloud.y)!;
    // analytic truth (helpers.ts, derived by hand): 6970 mm², mean -1.80 %
    const tc = gaussTruth(cloud.sigma, cloud.peak);
    expect(c.kind).toBe('cloud');
    expect(relErr(c.areaMm2, tc.areaMm2)).toBeLessThan(0.3);
    expect(relErr(c.contrastPct, tc.contrastPct)).toBeLessThan(0.25);
  });
});

describe('lines and bands', () => {
  it('finds a vertical band and a partial horizontal line with their half-peak figures', () => {
    const bandW = 15; // raised-cosine FWHM, mm
    const lineW = 1.5; // Gaussian FWHM, mm
    const r = run(
      [
        { kind: 'band', axis: 'vertical', posMm: 170, fwhmMm: bandW, profile: 'cos', contrastPct: 1.5 },
        { kind: 'band', axis: 'horizontal', posMm: 40, fwhmMm: lineW, profile: 'gauss', contrastPct: -3, fromMm: 30, toMm: 130 },
      ],
      12,
    );
    expect(r.blobs.length).toBe(2);
    const band = nearest(r.blobs, 170, 75)!;
    const line = nearest(r.blobs, 80, 40)!;

    // raised cosine cos²(pi d / 2w): half-peak at |d| = w/2, mean over it 1/2 + 1/pi (integral by hand)
    expect(band.kind).toBe('band');
    expect(band.detail.axis).toBe('vertical');
    expect(relErr(band.contrastPct, 1.5 * (0.5 + 1 / Math.PI))).toBeLessThan(0.25);
    expect(relErr(band.areaMm2, bandW * H)).toBeLessThan(0.3);

    // Gaussian line: mean over its FWHM by Simpson's rule (0.8101 of the peak); length 100 mm with soft
    // ends centred on 30 and 130 mm (0.5 there)
    const s = lineW / FWHM_PER_SIGMA;
    const lineMean = -3 * meanOverHalfPeak((d) => Math.exp((-d * d) / (2 * s * s)), lineW);
    expect(line.kind).toBe('line');
    expect(line.polarity).toBe('dark');
    expect(line.detail.axis).toBe('horizontal');
    expect(relErr(line.contrastPct, lineMean)).toBeLessThan(0.25);
    expect(relErr(line.areaMm2, lineW * 100)).toBeLessThan(0.3);
    expect(Math.abs(line.xMm - 80)).toBeLessThan(3);
    expect(Math.abs(line.yMm - 40)).toBeLessThan(0.5);
  });

  it('finds two stretches of line on one row, with a gap between them, as two lines', () => {
    // 4 mm wide (Gaussian FWHM), -2 % from 40 to 150 mm and -1.4 % from 240 to 360 mm, on one row of a
    // 400 mm panel. Lying on one line, they were taken for one feature and the fainter was lost (all four
    // seeds). Each is reported, a line in its place; the first with its half-peak mean (0.8101 of the
    // peak for a Gaussian, Simpson's rule by hand) within issue 4's 25 %
    const lineW = 4;
    const s = lineW / FWHM_PER_SIGMA;
    const mean = meanOverHalfPeak((d) => Math.exp((-d * d) / (2 * s * s)), lineW);
    for (const seed of [1, 2, 3, 4]) {
      const r = big(
        [
          { kind: 'band', axis: 'horizontal', posMm: 120, fwhmMm: lineW, profile: 'gauss', contrastPct: -2, fromMm: 40, toMm: 150 },
          { kind: 'band', axis: 'horizontal', posMm: 120, fwhmMm: lineW, profile: 'gauss', contrastPct: -1.4, fromMm: 240, toMm: 360 },
        ],
        seed,
      );
      const what = `seed ${seed}: ${r.blobs.map((b) => `${b.kind} at ${b.xMm}, ${b.yMm}`).join('; ')}`;
      expect(r.blobs.length, what).toBe(2);
      const first = nearest(r.blobs, 95, 120)!;
      const second = nearest(r.blobs, 300, 120)!;
      expect(first, what).not.toBe(second);
      for (const [b, x] of [
        [first, 95],
        [second, 300],
      ] as const) {
        expect(b.kind, what).toBe('line');
        expect(b.detail.axis, what).toBe('horizontal');
        expect(Math.abs(b.xMm - x), what).toBeLessThan(10);
        expect(Math.abs(b.yMm - 120), what).toBeLessThan(1);
      }
      expect(relErr(first.contrastPct, -2 * mean), what).toBeLessThan(0.25);
    }
  });

  it('tells a band spanning the panel from a short elongated blob', () => {
    const r = run(
      [
        { kind: 'band', axis: 'horizontal', posMm: 100, fwhmMm: 10, profile: 'cos', contrastPct: 2 },
        { kind: 'gauss', xMm: 60, yMm: 40, sigmaMm: 5, sigmaYMm: 5, contrastPct: 3 },
      ],
      13,
    );
    const band = nearest(r.blobs, 120, 100)!;
    expect(band.kind).toBe('band');
    expect(band.detail.axis).toBe('horizontal');
    // spans the panel: bbox from u ~ 0 to u ~ 1
    expect(band.bbox[0]).toBeLessThan(0.05);
    expect(band.bbox[2]).toBeGreaterThan(0.95);
    expect(nearest(r.blobs, 60, 40)!.kind).toBe('spot');
  });

  it('calls a short streak along an axis a band, and an oval cloud a cloud', () => {
    // 10 mm (Gaussian FWHM) by 110 mm along x, -2 %, on a 400 mm panel: it spans under the 40 % a band
    // across the panel needs, and had been called a spot 34 mm across. A streak five times as long as
    // wide or more is a band (a line when thinner than 4 mm); an oval Gaussian cloud of 3 : 1 (sigmas 36
    // and 12 mm) along x, as short, stays a cloud. Width and length against the drawn ones within issue
    // 4's 30 % (the half-peak width of a Gaussian is its FWHM; the ends are at half height)
    const r = big(
      [
        { kind: 'band', axis: 'horizontal', posMm: 60, fwhmMm: 10, profile: 'gauss', contrastPct: -2, fromMm: 100, toMm: 210 },
        { kind: 'gauss', xMm: 250, yMm: 170, sigmaMm: 36, sigmaYMm: 12, contrastPct: 3 },
      ],
      3,
    );
    expect(r.blobs).toHaveLength(2);
    const streak = nearest(r.blobs, 155, 60)!;
    expect(streak.kind).toBe('band');
    expect(streak.detail.axis).toBe('horizontal');
    expect(relErr(streak.detail.widthMm as number, 10)).toBeLessThan(0.3);
    expect(relErr(streak.detail.lengthMm as number, 110)).toBeLessThan(0.3);
    expect(nearest(r.blobs, 250, 170)!.kind).toBe('cloud');
  });
});

describe('neighbouring bands', () => {
  it('measures a wide band beside a narrower one of the same sign at its own width', () => {
    // raised-cosine bands (FWHM w, support 2w) on a 400 x 250 mm map: the wide one spans 24..96 mm, the
    // narrow one 94..142 mm. The strip beside the wide band where its pedestal is looked for lies on the
    // narrow band; taken for a pedestal it narrowed the wide band to 0.66 of its true area.
    const r = big(
      [
        { kind: 'band', axis: 'horizontal', posMm: 60, fwhmMm: 36, profile: 'cos', contrastPct: -8 },
        { kind: 'band', axis: 'horizontal', posMm: 118, fwhmMm: 24, profile: 'cos', contrastPct: -6 },
      ],
      17,
    );
    expect(r.blobs).toHaveLength(2);
    const [wide, narrow] = [...r.blobs].sort((a, b) => a.yMm - b.yMm);
    // half-peak strip w wide across the panel, mean 1/2 + 1/pi of the peak (integral by hand, as above)
    for (const [b, pos, w, peak] of [
      [wide, 60, 36, -8],
      [narrow, 118, 24, -6],
    ] as const) {
      expect(b.kind).toBe('band');
      expect(Math.abs(b.yMm - pos)).toBeLessThan(2);
      expect(relErr(b.areaMm2, w * 400)).toBeLessThan(0.3);
      expect(relErr(b.contrastPct, peak * (0.5 + 1 / Math.PI))).toBeLessThan(0.25);
    }
  });
});

describe('features of the other sign on a band', () => {
  it('keeps a dark round feature lying across a bright band (not a re-detection of the band)', () => {
    // The feature's half-peak disc lies mostly inside the band's strip and is within 8x of its size:
    // taken for the band seen again, it was dropped.
    const r = big(
      [
        { kind: 'band', axis: 'vertical', posMm: 200, fwhmMm: 30, profile: 'cos', contrastPct: 3 },
        { kind: 'gauss', xMm: 205, yMm: 120, sigmaMm: 18, contrastPct: -6 },
      ],
      7,
    );
    // (a speck of noise may be reported below SEMU 1, the issue's threshold for a false finding)
    const dark = r.blobs.filter((b) => b.polarity === 'dark' && b.semu >= 1);
    expect(dark).toHaveLength(1);
    // analytic truth of a Gaussian's half-peak disc (helpers.ts): 1411 mm², mean -4.33 %
    const t = gaussTruth(18, -6);
    expect(Math.hypot(dark[0].xMm - 205, dark[0].yMm - 120)).toBeLessThan(3);
    expect(relErr(dark[0].contrastPct, t.contrastPct)).toBeLessThan(0.25);
    expect(relErr(dark[0].areaMm2, t.areaMm2)).toBeLessThan(0.3);
    const band = r.blobs.find((b) => b.kind === 'band');
    expect(band?.polarity).toBe('bright');
  });
});

describe('crossing bands', () => {
  it('measures two bands that cross each other as two whole bands', () => {
    // raised-cosine bands (FWHM w): half-peak strip w wide across the panel, mean 1/2 + 1/pi of the peak
    // (integral by hand, as for the single band above)
    const r = run(
      [
        { kind: 'band', axis: 'horizontal', posMm: 60, fwhmMm: 12, profile: 'cos', contrastPct: -4 },
        { kind: 'band', axis: 'vertical', posMm: 150, fwhmMm: 20, profile: 'cos', contrastPct: 3 },
      ],
      13,
    );
    const h = r.blobs.find((b) => b.kind === 'band' && b.detail.axis === 'horizontal');
    const v = r.blobs.find((b) => b.kind === 'band' && b.detail.axis === 'vertical');
    expect(h?.polarity).toBe('dark');
    expect(v?.polarity).toBe('bright');
    expect(relErr(h!.areaMm2, 12 * W)).toBeLessThan(0.3);
    expect(relErr(v!.areaMm2, 20 * H)).toBeLessThan(0.3);
    expect(relErr(h!.contrastPct, -4 * (0.5 + 1 / Math.PI))).toBeLessThan(0.25);
    expect(relErr(v!.contrastPct, 3 * (0.5 + 1 / Math.PI))).toBeLessThan(0.25);
    expect(Math.abs(h!.yMm - 60)).toBeLessThan(2);
    expect(Math.abs(v!.xMm - 150)).toBeLessThan(2);
  });
});
