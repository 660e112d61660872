// Truth of the generator against closed-form values.
import { errorFunction } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import { buildPanel } from '../../fixtures/generator/panel.js';
import { featureTruth, gridPositions, semuOf, trueGrid } from '../../fixtures/generator/truth.js';
import type { FeatureSpec, PanelSpec } from '../../fixtures/generator/types.js';

const W = 400;
const H = 250;
const panelWith = (features: FeatureSpec[], pattern: PanelSpec['pattern'] = 'white'): PanelSpec => ({
  widthMm: W,
  heightMm: H,
  pattern,
  features,
});
const truthOf = (f: FeatureSpec, pattern: PanelSpec['pattern'] = 'white') => {
  const p = buildPanel(panelWith([f], pattern));
  return featureTruth(p, p.parts[0]);
};

describe('feature truth (C = 100 (L - B) / B, half-peak region)', () => {
  // An elliptical Gaussian exp(-(a^2 / sa^2 + b^2 / sb^2) / 2) with sa = k s, sb = s / k is at least half
  // its peak over an ellipse of semi-axes k rh and rh / k (rh = s sqrt(2 ln 2)): the disc's area
  // pi 2 ln2 s^2 again, and the same mean P / (2 ln 2) (the map (a, b) -> (a / k, k b) has determinant 1).
  // Its extent along the long axis at angle theta is k times the disc's. (Derived by hand from the
  // Gaussian's formula; the change of variables is common practice.)
  for (const [aspect, angle] of [[2.5, 30], [3, 90], [1.4, 160]] as const) {
    it(`Gaussian spot stretched to aspect ${aspect} at ${angle} degrees: the disc's area and mean`, () => {
      const fwhm = 12;
      const s = fwhm / (2 * Math.sqrt(2 * Math.LN2));
      const t = truthOf({ kind: 'spot', u: 0.4, v: 0.55, sizeMm: fwhm, contrastPct: -3, aspect, angleDeg: angle });
      const area = Math.PI * 2 * Math.LN2 * s * s;
      expect(Math.abs(t.areaMm2 / area - 1)).toBeLessThan(3e-3);
      expect(Math.abs(t.contrastPct / (-3 / (2 * Math.LN2)) - 1)).toBeLessThan(2e-3);
      // the panel's value a long half-axis from the centre along the angle is half the peak
      const p = buildPanel(panelWith([{ kind: 'spot', u: 0.4, v: 0.55, sizeMm: fwhm, contrastPct: -3, aspect, angleDeg: angle }]));
      const r = Math.sqrt(aspect) * (fwhm / 2);
      const th = (angle * Math.PI) / 180;
      expect(p.parts[0].phi(0.4 * W + r * Math.cos(th), 0.55 * H + r * Math.sin(th))).toBeCloseTo(0.5, 9);
      expect(p.parts[0].phi(0.4 * W - (r / aspect) * Math.sin(th), 0.55 * H + (r / aspect) * Math.cos(th))).toBeCloseTo(0.5, 9);
    });
  }

  // Gaussian spot of standard deviation s and peak P: C(r) = P exp(-r^2 / 2 s^2).
  // |C| >= |P|/2  <=>  r^2 <= 2 s^2 ln 2, so the region is a disc of area pi 2 ln2 s^2 (= pi FWHM^2 / 4).
  // Mean over it: (1/A) int_0^rh P exp(-r^2/2s^2) 2 pi r dr = P 2 pi s^2 (1 - 1/2) / (2 pi ln2 s^2) = P / (2 ln 2).
  for (const peak of [2, -0.5, -40, 150]) {
    it(`Gaussian spot, peak ${peak} %: area pi 2 ln2 sigma^2, mean peak/(2 ln 2), SEMU from both`, () => {
      const fwhm = 12;
      const s = fwhm / (2 * Math.sqrt(2 * Math.LN2));
      const t = truthOf({ kind: 'spot', u: 0.4, v: 0.55, sizeMm: fwhm, contrastPct: peak });
      const area = Math.PI * 2 * Math.LN2 * s * s;
      // sampling at ~fwhm/100: the half-peak boundary cells give ~1e-3 relative area error
      expect(t.areaMm2 / area - 1).toBeLessThan(2e-3);
      expect(t.areaMm2 / area - 1).toBeGreaterThan(-2e-3);
      expect(t.contrastPct / (peak / (2 * Math.LN2)) - 1).toBeLessThan(1e-3);
      expect(t.contrastPct / (peak / (2 * Math.LN2)) - 1).toBeGreaterThan(-1e-3);
      expect(t.peakContrastPct).toBeCloseTo(peak, 9);
      expect(t.u).toBeCloseTo(0.4, 4);
      expect(t.v).toBeCloseTo(0.55, 4);
      expect(t.polarity).toBe(peak > 0 ? 'bright' : 'dark');
      expect(t.semu).toBeCloseTo(Math.abs(t.contrastPct) / (1.97 / Math.pow(t.areaMm2, 0.33) + 0.72), 9);
    });
  }

  it('feature contrast is what the emitted field shows: 100 (L - B) / B at the spot centre and flank', () => {
    // multiplicative model: exact at any contrast, no small-contrast approximation (checked at 30 %)
    const spec = panelWith([{ kind: 'spot', u: 0.5, v: 0.5, sizeMm: 20, contrastPct: 30 }]);
    spec.luminance = [{ kind: 'radial', loss: 0.25 }];
    const withF = buildPanel(spec);
    const without = buildPanel({ ...spec, features: [] });
    const a = new Float64Array(3);
    const b = new Float64Array(3);
    const s = 20 / (2 * Math.sqrt(2 * Math.LN2));
    for (const r of [0, 5, 10, 17]) {
      withF.emit(W / 2 + r, H / 2, a);
      without.emit(W / 2 + r, H / 2, b);
      const C = (100 * (a[1] - b[1])) / b[1];
      expect(C).toBeCloseTo(30 * Math.exp((-r * r) / (2 * s * s)), 9);
    }
  });

  it('SEMU of a 2 % mura: 1.738 at 100 mm², Cjnd 2.69 % at 1 mm² (field notes §3 table, computed)', () => {
    expect(semuOf(2, 100)).toBeCloseTo(1.738, 3);
    expect(semuOf(-2, 1000)).toBeCloseTo(2.17, 3);
    expect(2 / semuOf(2, 1)).toBeCloseTo(2.69, 4);
    // settable constants (from memory in the field notes): a = 2, b = 1, exponent 0.5 at 100 mm² -> 2 / 1.2
    expect(semuOf(2, 100, { a: 2, b: 1, exponent: 0.5 })).toBeCloseTo(2 / 1.2, 12);
  });

  it('full-span line (Gaussian profile): area = length x FWHM, mean = peak sqrt(2 pi) erf(sqrt(ln2)) / (2 sqrt(2 ln2))', () => {
    // mean of exp(-d^2/2s^2) over |d| <= h = s sqrt(2 ln2): s sqrt(2 pi) erf(h / (s sqrt 2)) / (2 h)
    const t = truthOf({ kind: 'line', axis: 'vertical', position: 0.3, widthMm: 2, contrastPct: -3 });
    const meanFactor = (Math.sqrt(2 * Math.PI) * errorFunction(Math.sqrt(Math.LN2))) / (2 * Math.sqrt(2 * Math.LN2));
    expect(t.areaMm2 / (H * 2) - 1).toBeLessThan(3e-3);
    expect(t.areaMm2 / (H * 2) - 1).toBeGreaterThan(-3e-3);
    expect(t.contrastPct / (-3 * meanFactor) - 1).toBeLessThan(2e-3);
    expect(t.contrastPct / (-3 * meanFactor) - 1).toBeGreaterThan(-2e-3);
    expect(t.u).toBeCloseTo(0.3, 4);
    expect(t.v).toBeCloseTo(0.5, 3);
  });

  it('band (raised cosine): area = length x FWHM, mean = peak (1/2 + 1/pi)', () => {
    // (2/w) int_0^{w/2} cos^2(pi d / 2w) dd = (2/w)(w/4 + w/(2 pi)) = 1/2 + 1/pi
    const t = truthOf({ kind: 'band', axis: 'horizontal', position: 0.6, widthMm: 30, contrastPct: 1.5 });
    expect(t.areaMm2 / (W * 30) - 1).toBeLessThan(3e-3);
    expect(t.areaMm2 / (W * 30) - 1).toBeGreaterThan(-3e-3);
    expect(t.contrastPct / (1.5 * (0.5 + 1 / Math.PI)) - 1).toBeLessThan(2e-3);
    expect(t.contrastPct / (1.5 * (0.5 + 1 / Math.PI)) - 1).toBeGreaterThan(-2e-3);
  });

  it('edge glow along a whole edge: region depth lambda ln2, mean = peak / (2 ln 2)', () => {
    // C = P exp(-d/l): |C| >= P/2 <=> d <= l ln2; mean = P (1 - 1/2) / ln2
    const t = truthOf({ kind: 'edge-glow', edge: 'left', decayMm: 15, contrastPct: 400 }, 'black');
    expect(t.visible).toBe(true);
    expect(t.areaMm2 / (H * 15 * Math.LN2) - 1).toBeLessThan(3e-3);
    expect(t.areaMm2 / (H * 15 * Math.LN2) - 1).toBeGreaterThan(-3e-3);
    expect(t.contrastPct / (400 / (2 * Math.LN2)) - 1).toBeLessThan(2e-3);
    expect(t.contrastPct / (400 / (2 * Math.LN2)) - 1).toBeGreaterThan(-2e-3);
    expect(t.peakContrastPct).toBeCloseTo(400, 9);
    expect(t.detail.edge).toBe('left');
    // glows show on black only unless told otherwise
    expect(truthOf({ kind: 'edge-glow', edge: 'left', decayMm: 15, contrastPct: 400 }, 'white').visible).toBe(false);
  });

  it('corner glow: quarter disc of radius lambda ln2, mean = peak (1 - ln2) / ln2^2', () => {
    // (2 / a^2) int_0^a exp(-r/l) r dr with a = l ln2: l^2 (1 - (1 + ln2)/2) * 2 / (l ln2)^2 = (1 - ln2) / ln2^2
    const l = 20;
    const t = truthOf({ kind: 'corner-glow', corner: 'bottom-right', decayMm: l, contrastPct: 900 }, 'black');
    const area = (Math.PI * (l * Math.LN2) ** 2) / 4;
    expect(t.areaMm2 / area - 1).toBeLessThan(3e-3);
    expect(t.areaMm2 / area - 1).toBeGreaterThan(-3e-3);
    const m = (900 * (1 - Math.LN2)) / Math.LN2 ** 2;
    expect(t.contrastPct / m - 1).toBeLessThan(2e-3);
    expect(t.contrastPct / m - 1).toBeGreaterThan(-2e-3);
  });

  it('hot-spot array of well separated Gaussians: area = count x pi FWHM²/4', () => {
    const t = truthOf({ kind: 'hotspot-array', pitchMm: 60, sizeMm: 10, contrastPct: 4 });
    const count = Number(t.detail.count);
    // centred lattice of pitch 60 on 400 x 250: x at 200 +- 60k within 0..400 (7), y at 125 +- 60k (5)
    expect(count).toBe(35);
    const area = (count * Math.PI * 10 * 10) / 4;
    // coarser lattice here (the part spans the whole panel): 1 % area tolerance
    expect(t.areaMm2 / area - 1).toBeLessThan(1e-2);
    expect(t.areaMm2 / area - 1).toBeGreaterThan(-1e-2);
    expect(t.contrastPct / (4 / (2 * Math.LN2)) - 1).toBeLessThan(5e-3);
    expect(t.contrastPct / (4 / (2 * Math.LN2)) - 1).toBeGreaterThan(-5e-3);
  });

  it('tiles: each stepped tile is its own region with its step as contrast; seams are lines', () => {
    const p = buildPanel(panelWith([{ kind: 'tiles', cols: 2, rows: 2, stepsPct: [0, 2, -1, 0], seamWidthMm: 1, contrastPct: -5 }]));
    const parts = p.parts.map((q) => featureTruth(p, q));
    const tile = parts.find((q) => q.part === 'tile r1c2')!;
    expect(tile.contrastPct).toBeCloseTo(2, 2);
    expect(tile.areaMm2 / ((W / 2) * (H / 2)) - 1).toBeLessThan(5e-3);
    expect(tile.areaMm2 / ((W / 2) * (H / 2)) - 1).toBeGreaterThan(-5e-3);
    expect(parts.filter((q) => q.kind === 'seam').length).toBe(2);
  });
});

describe('true grid', () => {
  it('layout positions follow the project convention', () => {
    expect(gridPositions(25, 'cells').map((p) => p[0]).slice(0, 5)).toEqual([0.1, 0.3, 0.5, 0.7, 0.9]);
    expect(gridPositions(9, 'cells')[0]).toEqual([1 / 6, 1 / 6]);
    const c13 = gridPositions(13, 'cells');
    expect(c13.length).toBe(13);
    expect(c13[3]).toEqual([0.25, 0.25]); // reading order: row v = 1/6 (3 points) first, then v = 0.25
    expect(gridPositions(5, 'cells')).toEqual([
      [0.25, 0.25],
      [0.75, 0.25],
      [0.5, 0.5],
      [0.25, 0.75],
      [0.75, 0.75],
    ]);
    expect(gridPositions(9, 'inset', 0.1).map((p) => p[0]).slice(0, 3)).toEqual([0.1, 0.5, 0.9]);
    gridPositions(25, 'inset', 0.1)
      .map((p) => p[0])
      .slice(0, 5)
      .forEach((u, k) => expect(u).toBeCloseTo([0.1, 0.3, 0.5, 0.7, 0.9][k], 12));
    const i13 = gridPositions(13, 'inset', 0.1);
    expect(i13).toContainEqual([0.3, 0.3]);
    expect(i13).toContainEqual([0.7, 0.7]);
    expect(gridPositions(5, 'inset', 0.1)).toContainEqual([0.9, 0.1]);
  });

  it('uniform field: every relative = 1, no colour difference, uniformity 100 %', () => {
    for (const layout of [5, 9, 13, 25] as const) {
      for (const placement of ['cells', 'inset'] as const) {
        const g = trueGrid({ widthMm: W, heightMm: H, pattern: 'gray', level: 0.5 }, layout, placement, 0.1, 2.0);
        expect(g.points.length).toBe(layout);
        for (const p of g.points) {
          expect(p.relative).toBeCloseTo(1, 12);
          expect(p.duvFromCentre).toBeCloseTo(0, 12);
          // gray 50 %: Y = sRGB decode(0.5) = 0.2140411 (IEC 61966-2-1, field notes §7)
          expect(p.Y).toBeCloseTo(0.2140411, 7);
          // D65 white point u'v' (0.19783, 0.46832), field notes §1
          expect(p.uprime).toBeCloseTo(0.19783, 5);
          expect(p.vprime).toBeCloseTo(0.46832, 5);
        }
        expect(g.uniformity.nonuniformityPct).toBeCloseTo(0, 10);
        expect(g.uniformity.maxOverMin).toBeCloseTo(1, 12);
      }
    }
  });

  it('disc means are exact for linear and quadratic fields: mean of |p - c|^2 over a disc = d^2 + R^2/2', () => {
    // linear: the mean over a disc is the value at its centre; quadratic radial term adds R^2/2
    const spec: PanelSpec = {
      widthMm: W,
      heightMm: H,
      pattern: 'white',
      luminance: [
        { kind: 'linear', gx: 0.06, gy: -0.04 },
        { kind: 'radial', loss: 0.2, power: 2 },
      ],
    };
    const g = trueGrid(spec, 9, 'inset', 0.1, 3.0);
    const R = 0.03 * Math.hypot(W, H);
    expect(g.spotRadiusMm).toBeCloseTo(R, 12);
    const dmax2 = (W / 2) ** 2 + (H / 2) ** 2;
    for (const p of g.points) {
      const d2 = (p.xMm - W / 2) ** 2 + (p.yMm - H / 2) ** 2;
      const Y = 1 + 0.06 * (2 * p.u - 1) - 0.04 * (2 * p.v - 1) - (0.2 * (d2 + (R * R) / 2)) / dmax2;
      // equal-area ring quadrature: ~1e-5 relative on a quadratic
      expect(p.Y).toBeCloseTo(Y, 5);
    }
  });

  it("per-channel gains give u'v' shifts while neutral luminance stays S(u, v)", () => {
    const spec: PanelSpec = { widthMm: W, heightMm: H, pattern: 'white', colour: { r: { x: 0.04 }, b: { x: -0.04 } } };
    const g = trueGrid(spec, 9, 'cells');
    for (const p of g.points) expect(p.relative).toBeCloseTo(1, 9);
    expect(g.uniformity.maxDuvAnyPair).toBeGreaterThan(0.003);
    expect(g.uniformity.maxDuvAnyPair).toBeLessThan(0.03);
  });
});
