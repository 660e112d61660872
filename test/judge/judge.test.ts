// Verdicts and reasons on fabricated photo results.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { judgePanel, parseCriteria, patternLabel, worstMargin } from '../../lib/judge/index.js';
import type { Criteria, JudgeablePhoto, JudgedReason } from '../../lib/judge/index.js';
import type { Blob, GridPoint, Pattern } from '../../lib/types.js';

// D65 white in u'v' (0.197830, 0.468320) [CIE 1976 UCS of xy (0.3127, 0.3290); computed].
const D65_U = 0.19783;
const D65_V = 0.46832;

interface PhotoSpec {
  level?: number | null;
  /** relative luminance of the 9 points in reading order (index 4 = centre) */
  rel?: number[];
  /** Δv' added to each point's chromaticity (a shift along v' only) */
  dv?: number[];
  blobs?: Partial<Blob>[];
  mura?: boolean;
  uniformity?: boolean;
  error?: string;
  file?: string;
  cdPerUnit?: number;
  layout?: 5 | 9 | 13 | 25;
}

const FLAT = [1, 1, 1, 1, 1, 1, 1, 1, 1];

function blob(b: Partial<Blob>, i: number): Blob {
  return {
    id: i + 1,
    kind: 'spot',
    polarity: 'bright',
    u: 0.5,
    v: 0.5,
    xMm: 100,
    yMm: 100,
    bbox: [0.45, 0.45, 0.55, 0.55],
    areaMm2: 25,
    contrastPct: 1,
    peakContrastPct: 2,
    semu: 0.5,
    detail: {},
    ...b,
  };
}

/**
 * A PhotoResult for a 3×3 cell-centre grid (1/6, 1/2, 5/6), with the uniformity figures computed
 * from the points by the usual formulas: uniformity 100·Lmin/Lmax, δW = Lmax/Lmin, non-uniformity
 * 100·(Lmax−Lmin)/Lmax, deviation 100·(Li−Lc)/Lc, Δu'v' = √(Δu'²+Δv'²).
 */
function photo(pattern: Pattern, spec: PhotoSpec = {}): JudgeablePhoto {
  const file = spec.file ?? `/photos/P1_${pattern}${spec.level ?? ''}.jpg`;
  if (spec.error) {
    return {
      ...base(pattern, file, spec.level ?? null),
      status: 'error',
      error: spec.error,
      errorCode: 'clipped',
    };
  }
  const rel = spec.rel ?? FLAT;
  const dv = spec.dv ?? rel.map(() => 0);
  const axis = [1 / 6, 1 / 2, 5 / 6];
  const points: GridPoint[] = rel.map((r, i) => ({
    index: i + 1,
    u: axis[i % 3],
    v: axis[Math.floor(i / 3)],
    xMm: null,
    yMm: null,
    Y: 0.5 * r,
    relative: r,
    uprime: D65_U,
    vprime: D65_V + dv[i],
    duvFromCentre: Math.abs(dv[i] - dv[4]),
    pixels: 1000,
  }));
  const max = Math.max(...rel);
  const min = Math.min(...rel);
  let dev = 0;
  for (const r of rel) {
    const d = (100 * (r - rel[4])) / rel[4];
    if (Math.abs(d) > Math.abs(dev)) dev = d;
  }
  const mean = rel.reduce((a, b) => a + b, 0) / rel.length;
  const blobs = (spec.blobs ?? []).map(blob);
  return {
    ...base(pattern, file, spec.level ?? null),
    grid: { layout: spec.layout ?? 9, placement: 'cells', insetPct: null, spotRadiusPct: 2, points },
    uniformity:
      spec.uniformity === false
        ? null
        : {
            minOverMaxPct: (100 * min) / max,
            nonuniformityPct: (100 * (max - min)) / max,
            maxOverMin: max / min,
            cvPct: (100 * Math.sqrt(rel.reduce((a, b) => a + (b - mean) ** 2, 0) / rel.length)) / mean,
            maxDeviationFromCentrePct: dev,
            maxDuvFromCentre: Math.max(...points.map((p) => p.duvFromCentre)),
            maxDuvAnyPair: Math.max(...dv) - Math.min(...dv),
          },
    mura:
      spec.mura === false
        ? null
        : {
            blobs,
            maxSemu: Math.max(0, ...blobs.map((b) => b.semu)),
            noiseFloorPct: 0.1,
            resolvableContrastPct: {},
            backgroundModel: 'test',
          },
    blobs,
    luminanceCdM2PerUnit: spec.cdPerUnit ?? null,
  };
}

function base(pattern: Pattern, file: string, level: number | null): JudgeablePhoto {
  return {
    file,
    sha256: '0'.repeat(64),
    pattern,
    patternLevel: level,
    status: 'ok',
    error: null,
    errorCode: null,
    decode: null,
    exposure: null,
    exposureStats: null,
    corners: null,
    geometry: null,
    falloff: null,
    grid: null,
    uniformity: null,
    mura: null,
    blobs: [],
    warnings: [],
  };
}

/** Centre 1, one corner low: Lmin/Lmax = low. */
function withLow(low: number): number[] {
  return [1, 1, 1, 1, 1, 1, 1, 1, low];
}

// Limits as in the shipped default, each from its stated source: 75 % and 1.33 [22-inch monitor
// service manual §8.9-8.11], Δu'v' 0.01 [ISO 12646:2013], 1 SEMU [SEMI D31-1102]; allowances are
// the default's [common practice / computed].
const CRITERIA_TEXT = `
name: test
panel: { widthMm: 527.04, heightMm: 296.46 }
patterns:
  white:
    required: true
    minOverMaxPctMin: 75
    maxOverMinMax: 1.33
    maxDeviationFromCentrePctMax: 10
    maxDuvFromCentreMax: 0.01
    maxDuvAnyPairMax: 0.01
    maxSemu: 1
    blobs:
      countFromSemu: 0.5
      maxCount: { line: 0, any: 2 }
    reportOnly: [maxDuvAnyPairMax]
  gray:
    minOverMaxPctMin: 75
  black:
    maxSemu: 3
    glow:
      maxContrastPct: 100
      maxSemu: 3
      maxAreaMm2: 400
`;
const criteria: Criteria = parseCriteria(CRITERIA_TEXT, 'test.yaml');

function texts(rs: JudgedReason[], severity?: JudgedReason['severity']): string[] {
  return rs.filter((r) => severity === undefined || r.severity === severity).map((r) => r.text);
}

describe('judgePanel', () => {
  it('a flat panel passes, with a note and its margin for every judged figure', () => {
    const j = judgePanel([photo('white'), photo('gray', { level: 50 }), photo('black')], criteria);
    expect(j.verdict).toBe('pass');
    expect(j.reasons).toEqual([]);
    const w = j.reasonDetails.filter((r) => r.pattern === 'white');
    expect(texts(w)).toEqual([
      'white: uniformity 100.0 % ≥ 75 % minimum (margin 25.0 points)',
      'white: max/min ratio 1.00 ≤ 1.33 maximum (margin 0.33)',
      'white: largest deviation from centre 0.0 % within ±10 % maximum (margin 10.0 points)',
      "white: largest Δu'v' from centre 0.0000 ≤ 0.01 maximum (margin 0.0100)",
      "white: largest Δu'v' between points 0.0000 ≤ 0.01 maximum (margin 0.0100; report only, not judged)",
      'white: largest SEMU 0.00 ≤ 1 maximum (margin 1.00)',
      'white: line blobs of 0.5 SEMU or more: 0 ≤ 0 allowed (margin 0)',
      'white: blobs of any kind of 0.5 SEMU or more: 0 ≤ 2 allowed (margin 2)',
    ]);
    expect(w.every((r) => r.severity === 'note')).toBe(true);
    expect(w[0]).toMatchObject({ figure: 'minOverMaxPct', value: 100, limit: 75, margin: 25, unit: '%' });
    expect(texts(j.reasonDetails.filter((r) => r.pattern === 'gray'))).toEqual([
      'gray 50 %: uniformity 100.0 % ≥ 75 % minimum (margin 25.0 points)',
    ]);
  });

  it('gray 50 % below the uniformity minimum fails with the exact sentence and margin', () => {
    const j = judgePanel([photo('white'), photo('gray', { level: 50, rel: withLow(0.718) })], criteria);
    expect(j.verdict).toBe('fail');
    expect(j.reasons).toEqual(['gray 50 %: uniformity 71.8 % < 75 % minimum (short by 3.2 points)']);
    const r = j.reasonDetails.find((x) => x.severity === 'fail')!;
    expect(r.pattern).toBe('gray');
    expect(r.figure).toBe('minOverMaxPct');
    expect(r.value).toBeCloseTo(71.8, 10);
    expect(r.limit).toBe(75);
    expect(r.margin).toBeCloseTo(-3.2, 10);
  });

  it('white failing several figures: one sentence each, margins negative', () => {
    const j = judgePanel(
      [
        photo('white', {
          rel: withLow(0.7),
          dv: [0, 0, 0, 0, 0, 0, 0, 0, 0.012],
          blobs: [
            { kind: 'cloud', semu: 1.8 },
            { kind: 'line', semu: 0.6 },
          ],
        }),
      ],
      criteria,
    );
    expect(j.verdict).toBe('fail');
    expect(j.reasons).toEqual([
      'white: uniformity 70.0 % < 75 % minimum (short by 5.0 points)',
      'white: max/min ratio 1.43 > 1.33 maximum (over by 0.10)',
      'white: largest deviation from centre -30.0 % outside ±10 % maximum (over by 20.0 points)',
      "white: largest Δu'v' from centre 0.0120 > 0.01 maximum (over by 0.0020)",
      'white: largest SEMU 1.80 (blob 1, cloud) > 1 maximum (over by 0.80)',
      'white: line blobs of 0.5 SEMU or more: 1 > 0 allowed (over by 1)',
      // borderline: Δu'v' 0.012 is within ±0.003 of 0.01
      "white: largest Δu'v' from centre 0.0120 is borderline: within the ±0.003 measurement allowance of the 0.01 maximum",
    ]);
    const ratio = j.reasonDetails.find((r) => r.figure === 'maxOverMin' && !r.borderline)!;
    expect(ratio.margin).toBeCloseTo(1.33 - 1 / 0.7, 12);
    // the report-only figure is over its limit but only noted
    const pair = j.reasonDetails.find((r) => r.figure === 'maxDuvAnyPair')!;
    expect(pair.severity).toBe('note');
    expect(pair.reportOnly).toBe(true);
    expect(pair.margin).toBeCloseTo(-0.002, 12);
  });

  it('a limit is inclusive: a figure exactly at it passes', () => {
    const j = judgePanel([photo('white', { rel: withLow(0.75) })], criteria);
    const u = j.reasonDetails.find((r) => r.figure === 'minOverMaxPct' && !r.borderline)!;
    expect(u.severity).toBe('note');
    expect(u.margin).toBe(0);
  });

  it('borderline notes on either side of a limit, within the allowance', () => {
    // uniformity alone (a low corner also moves the deviation from centre)
    const criteria = parseCriteria('name: t\npatterns:\n  white:\n    minOverMaxPctMin: 75\n', 't');
    const pass = judgePanel([photo('white', { rel: withLow(0.756) })], criteria);
    expect(pass.verdict).toBe('pass');
    expect(pass.reasons).toEqual([
      'white: uniformity 75.6 % is borderline: within the ±1 point measurement allowance of the 75 % minimum',
    ]);
    const b = pass.reasonDetails.find((r) => r.borderline)!;
    expect(b).toMatchObject({ severity: 'note', figure: 'minOverMaxPct', limit: 75 });
    expect(b.margin).toBeCloseTo(0.6, 10);

    const fail = judgePanel([photo('white', { rel: withLow(0.745) })], criteria);
    expect(fail.verdict).toBe('fail');
    expect(fail.reasons).toEqual([
      'white: uniformity 74.5 % < 75 % minimum (short by 0.5 points)',
      'white: uniformity 74.5 % is borderline: within the ±1 point measurement allowance of the 75 % minimum',
    ]);

    // 1.5 points short is beyond the ±1 point allowance: no borderline note
    const clear = judgePanel([photo('white', { rel: withLow(0.735) })], criteria);
    expect(clear.reasonDetails.some((r) => r.borderline)).toBe(false);
  });

  it('values that round onto their limit are shown with more decimals', () => {
    const j = judgePanel([photo('white', { rel: withLow(0.7496) })], criteria);
    expect(j.reasons[0]).toBe('white: uniformity 74.96 % < 75 % minimum (short by 0.04 points)');
  });

  it('a photo that could not be measured makes the panel an error, never a pass', () => {
    const j = judgePanel(
      [photo('white'), photo('black', { error: 'highlights clipped on 4 % of the panel', file: '/p/P1_black.jpg' })],
      criteria,
    );
    expect(j.verdict).toBe('error');
    expect(j.reasons).toEqual(['black: cannot be measured: P1_black.jpg: highlights clipped on 4 % of the panel']);
    expect(j.reasonDetails.find((r) => r.severity === 'error')).toMatchObject({ pattern: 'black', figure: 'photo', file: '/p/P1_black.jpg' });
    // the only photo in error: still an error
    expect(judgePanel([photo('white', { error: 'no panel outline found' })], criteria).verdict).toBe('error');
  });

  it('a measured failure stands even when another photo is in error', () => {
    const j = judgePanel([photo('white', { rel: withLow(0.6) }), photo('black', { error: 'out of focus' })], criteria);
    expect(j.verdict).toBe('fail');
    expect(j.reasons[0]).toMatch(/^black: cannot be measured: /);
    expect(j.reasons[1]).toMatch(/^white: uniformity 60\.0 % < 75 % minimum/);
  });

  it('a missing required pattern is an error; a missing optional one a note', () => {
    const j = judgePanel([photo('gray', { level: 50 })], criteria);
    expect(j.verdict).toBe('error');
    expect(j.reasons).toEqual(['white: required photo is missing']);
    expect(texts(j.reasonDetails, 'note')).toContain('black: no photo, not judged');
  });

  it('a figure the criteria need but the photo lacks is an error', () => {
    const noUniformity = judgePanel([photo('white', { uniformity: false })], criteria);
    expect(noUniformity.verdict).toBe('error');
    expect(noUniformity.reasons).toEqual(['white: grid uniformity was not measured, so its limits cannot be judged']);
    const noMura = judgePanel([photo('white', { mura: false })], criteria);
    expect(noMura.verdict).toBe('error');
    expect(noMura.reasons).toEqual(['white: mura was not measured, so its limits cannot be judged']);
  });

  it('a figure that came out as no number is an error, not a failure', () => {
    const p = photo('white', { rel: withLow(0.8) });
    p.uniformity!.maxOverMin = Number.POSITIVE_INFINITY; // a point at zero luminance
    const j = judgePanel([p], parseCriteria('name: t\npatterns:\n  white:\n    minOverMaxPctMin: 75\n    maxOverMinMax: 1.33\n', 't'));
    expect(j.verdict).toBe('error');
    expect(j.reasons).toEqual(['white: max/min ratio could not be computed (Infinity), so it cannot be judged']);
  });

  it('photos on a grid other than the criteria name are judged, with a note saying so', () => {
    const j = judgePanel([photo('white', { layout: 5 })], criteria);
    expect(j.verdict).toBe('pass');
    expect(texts(j.reasonDetails, 'note')[0]).toBe('white: measured on a 5-point grid, but the criteria were written for 9 points');
  });

  it('patterns without limits are noted, and a panel with nothing judged is an error', () => {
    const j = judgePanel([photo('red')], parseCriteria('name: t\npatterns:\n  white:\n    maxSemu: 1\n', 't'));
    expect(j.verdict).toBe('error');
    expect(texts(j.reasonDetails, 'note')).toEqual([
      'white: no photo, not judged',
      'red: not judged: the criteria set no limits for red',
    ]);
    expect(j.reasons).toEqual(['panel: nothing was judged: no photo of a pattern the criteria set limits for']);
  });

  it('black: glow has its own limits and the SEMU limit covers the other kinds', () => {
    const glowing = [
      { kind: 'corner-glow' as const, semu: 5, peakContrastPct: 140, areaMm2: 300 },
      { kind: 'cloud' as const, semu: 2.5, peakContrastPct: 8, areaMm2: 900 },
    ];
    const j = judgePanel([photo('white'), photo('black', { blobs: glowing })], criteria);
    expect(j.verdict).toBe('fail');
    expect(j.reasons).toEqual([
      'black: largest glow contrast 140.0 % (blob 1, corner-glow) > 100 % maximum (over by 40.0 points)',
      'black: largest glow SEMU 5.00 (blob 1, corner-glow) > 3 maximum (over by 2.00)',
    ]);
    const notes = texts(j.reasonDetails.filter((r) => r.pattern === 'black'), 'note');
    expect(notes).toEqual([
      'black: largest SEMU (glow aside) 2.50 (blob 2, cloud) ≤ 3 maximum (margin 0.50)',
      'black: largest glow area 300.0 mm² (blob 1, corner-glow) ≤ 400 mm² maximum (margin 100.0 mm²)',
    ]);
  });

  it('without glow limits, glow blobs count toward the SEMU limit', () => {
    const c = parseCriteria('name: t\npatterns:\n  black:\n    maxSemu: 3\n', 't');
    const j = judgePanel([photo('black', { blobs: [{ kind: 'edge-glow', semu: 4 }] })], c);
    expect(j.reasons).toEqual(['black: largest SEMU 4.00 (blob 1, edge-glow) > 3 maximum (over by 1.00)']);
  });

  it('blob counts use only blobs at or above countFromSemu', () => {
    const spots = [0.4, 0.5, 0.9, 0.3].map((semu) => ({ kind: 'spot' as const, semu }));
    const ok = judgePanel([photo('white', { blobs: spots })], criteria);
    expect(texts(ok.reasonDetails)).toContain('white: blobs of any kind of 0.5 SEMU or more: 2 ≤ 2 allowed (margin 0)');
    const more = judgePanel([photo('white', { blobs: [...spots, { kind: 'band', semu: 0.7 }] })], criteria);
    expect(more.reasons).toEqual([
      'white: blobs of any kind of 0.5 SEMU or more: 3 > 2 allowed (over by 1)',
      'white: largest SEMU 0.90 is borderline: within the ±0.2 SEMU measurement allowance of the 1 maximum',
    ]);
  });

  it('absolute luminance is judged only for calibrated photos', () => {
    const c = parseCriteria(
      'name: t\npatterns:\n  white:\n    luminanceCdM2: { min: 250, max: 400 }\n  black:\n    luminanceCdM2: { max: 0.5, at: every-point }\n',
      't',
    );
    // Y of the centre = 0.5 (relative) × 440 cd/m² per unit = 220 cd/m²
    const j = judgePanel([photo('white', { cdPerUnit: 440 }), photo('black', { rel: withLow(0.5), cdPerUnit: 0.9 })], c);
    expect(j.verdict).toBe('fail');
    expect(texts(j.reasonDetails)).toEqual([
      'white: centre luminance 220.0 cd/m² < 250 cd/m² minimum (short by 30.0 cd/m²)',
      'white: centre luminance 220.0 cd/m² ≤ 400 cd/m² maximum (margin 180.0 cd/m²)',
      'black: highest point luminance (point 1) 0.450 cd/m² ≤ 0.5 cd/m² maximum (margin 0.050 cd/m²)',
      // ±10 % of 0.5 cd/m² = ±0.05 cd/m²
      'black: highest point luminance (point 1) 0.450 cd/m² is borderline: within the ±0.05 cd/m² measurement allowance of the 0.5 cd/m² maximum',
    ]);
    const uncal = judgePanel([photo('white')], c);
    expect(uncal.verdict).toBe('error'); // nothing else was judged
    expect(texts(uncal.reasonDetails, 'note')).toContain(
      'white: absolute luminance not judged: the photo has no luminance reference',
    );
  });

  it('photos of the same pattern and level are told apart by file name', () => {
    const j = judgePanel(
      [photo('white', { file: '/a/left.jpg', rel: withLow(0.5) }), photo('white', { file: '/a/right.jpg' })],
      criteria,
    );
    expect(j.reasons[0]).toBe('white (left.jpg): uniformity 50.0 % < 75 % minimum (short by 25.0 points)');
    expect(texts(j.reasonDetails)).toContain('white (right.jpg): uniformity 100.0 % ≥ 75 % minimum (margin 25.0 points)');
  });

  it('notes that SEMU rests on an assumed size when the panel size is unknown', () => {
    const c = parseCriteria('name: t\npatterns:\n  white:\n    maxSemu: 1\n', 't');
    const j = judgePanel([photo('white')], c);
    expect(texts(j.reasonDetails, 'note')).toContain(
      'white: blob areas and SEMU rest on an assumed panel size; give the panel size in the criteria',
    );
  });
});

describe('findings narrower than the photo resolves', () => {
  // Their SEMU is a lower bound (the map spreads them over its own resolution): under a maximum it does
  // not show that the panel is within it (common practice), so the pass is marked borderline.
  const c = parseCriteria('name: t\npatterns:\n  white:\n    maxSemu: 1\n', 't');
  it('a line under the limit as measured: pass, with a borderline note saying why', () => {
    const j = judgePanel([photo('white', { blobs: [{ kind: 'line', semu: 0.45, detail: { belowResolution: 'width' } }] })], c);
    expect(j.verdict).toBe('pass');
    const note = j.reasonDetails.find((r) => r.borderline)!;
    expect(note.text).toBe('white: blob 1 (line) is narrower than the photo resolves, so its SEMU 0.45 is a lower bound on the 1 maximum: confirm it with a closer photo');
    expect(j.reasons).toContain(note.text);
  });
  it('over the limit as measured: a fail, and no such note (a lower bound over a maximum is beyond it)', () => {
    const j = judgePanel([photo('white', { blobs: [{ kind: 'spot', semu: 1.6, detail: { belowResolution: 'size' } }] })], c);
    expect(j.verdict).toBe('fail');
    expect(j.reasonDetails.filter((r) => r.borderline)).toEqual([]);
  });
  it('a resolved finding of the same SEMU gets no note', () => {
    const j = judgePanel([photo('white', { blobs: [{ kind: 'line', semu: 0.45 }] })], c);
    expect(j.reasonDetails.filter((r) => r.borderline)).toEqual([]);
  });
});

describe('worstMargin', () => {
  it('picks the judged figure nearest its limit, relative to the limit, skipping report-only figures', () => {
    const j = judgePanel([photo('white', { rel: withLow(0.77), dv: [0, 0, 0, 0, 0, 0, 0, 0, 0.03], blobs: [{ semu: 0.9, kind: 'cloud' }] })], criteria);
    const w = worstMargin(j.reasonDetails)!;
    // Δu'v' from centre 0.03 > 0.01: margin −0.02, relative −2; the report-only pair figure (also −2) is skipped
    expect(w.reason.figure).toBe('maxDuvFromCentre');
    expect(w.relative).toBeCloseTo(-2, 10);

    // the same panel without the colour shift: the deviation from centre, −23 % against ±10 %, is worst (−13/10)
    const j2 = judgePanel([photo('white', { rel: withLow(0.77), blobs: [{ semu: 0.9, kind: 'cloud' }] })], criteria);
    const w2 = worstMargin(j2.reasonDetails)!;
    expect(w2.reason.figure).toBe('maxDeviationFromCentrePct');
    expect(w2.relative).toBeCloseTo(-1.3, 10);

    // a flat panel with one 0.9 SEMU cloud: SEMU margin 0.1 of 1 is the smallest; the count of
    // line blobs (0 of 0 allowed) is not taken as the worst
    const j3 = judgePanel([photo('white', { blobs: [{ semu: 0.9, kind: 'cloud' }] })], criteria);
    const w3 = worstMargin(j3.reasonDetails)!;
    expect(w3.reason.figure).toBe('maxSemu');
    expect(w3.relative).toBeCloseTo(0.1, 10);
  });

  it('is null when nothing was judged', () => {
    expect(worstMargin([])).toBeNull();
    expect(worstMargin(judgePanel([photo('white', { error: 'x' })], criteria).reasonDetails)).toBeNull();
  });
});

describe('equivalent figures', () => {
  // Uniformity 75 % ⇔ Lmax/Lmin 1.333 ⇔ non-uniformity 25 % [computed from the formulas:
  // 100·Lmin/Lmax (22-inch monitor service manual), Lmax/Lmin (14-inch panel datasheet),
  // 100·(Lmax−Lmin)/Lmax (IDMS §8.1, from memory)].
  it('the three figures of one panel agree', () => {
    const p = photo('white', { rel: withLow(0.75) });
    expect(p.uniformity!.minOverMaxPct).toBeCloseTo(75, 12);
    expect(p.uniformity!.maxOverMin).toBeCloseTo(1.3333333, 7);
    expect(p.uniformity!.nonuniformityPct).toBeCloseTo(25, 12);
  });

  it('a uniformity minimum of U % and a max/min maximum of 100/U give the same verdict', () => {
    fc.assert(
      fc.property(fc.double({ min: 0.3, max: 1, noNaN: true }), fc.double({ min: 30, max: 99, noNaN: true }), (low, U) => {
        const c = parseCriteria(`name: t\npatterns:\n  white:\n    minOverMaxPctMin: ${U}\n    maxOverMinMax: ${100 / U}\n`, 't');
        const j = judgePanel([photo('white', { rel: withLow(low) })], c);
        const u = j.reasonDetails.find((r) => r.figure === 'minOverMaxPct' && !r.borderline)!;
        const m = j.reasonDetails.find((r) => r.figure === 'maxOverMin' && !r.borderline)!;
        // away from the limit (floating-point rounding right at it aside) the two verdicts match
        if (Math.abs(100 * low - U) > 1e-9) expect(u.severity).toBe(m.severity);
      }),
      { numRuns: 100 },
    );
  });
});

describe('patternLabel', () => {
  it('names gray with its level', () => {
    expect(patternLabel('gray', 50)).toBe('gray 50 %');
    expect(patternLabel('gray', 12.5)).toBe('gray 12.5 %');
    expect(patternLabel('gray', null)).toBe('gray');
    expect(patternLabel('white', null)).toBe('white');
  });
});
