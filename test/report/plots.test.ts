import { describe, expect, it } from 'vitest';
import { histogramBins, niceTicks, tickLabel } from '../../lib/report/plots.js';
import { centreProfile, contrastRange, luminanceRange } from '../../lib/report/mapdata.js';
import { fmtExposureTime, fmtLimit, fmtRel, fmtSemu, placeWords, trim } from '../../lib/report/format.js';

describe('axes', () => {
  it('ticks are 1, 2 or 5 times a power of ten and cover the range', () => {
    expect(niceTicks(0.83, 1.02, 5).ticks).toEqual([0.8, 0.85, 0.9, 0.95, 1, 1.05]);
    expect(niceTicks(0, 27, 5).ticks).toEqual([0, 10, 20, 30]);
    expect(niceTicks(0, 27, 8).ticks).toEqual([0, 5, 10, 15, 20, 25, 30]);
    const t = niceTicks(-3.2, 3.2, 6);
    expect(t.lo).toBeLessThanOrEqual(-3.2);
    expect(t.hi).toBeGreaterThanOrEqual(3.2);
    expect(niceTicks(1, 1).ticks.length).toBeGreaterThan(1);
    expect(tickLabel(0.95, 0.05)).toBe('0.95');
    expect(tickLabel(-0, 1)).toBe('0');
  });

  it('histogram bins have an edge on the limit; a value on the limit counts inside', () => {
    const values = [10, 12, 25, 26, 30, 8.5];
    const { edges, counts } = histogramBins(values, 25, 'max');
    expect(edges.some((e) => Math.abs(e - 25) < 1e-9)).toBe(true);
    expect(counts.reduce((a, b) => a + b, 0)).toBe(values.length);
    const at = edges.findIndex((e) => Math.abs(e - 25) < 1e-9);
    expect(counts[at - 1]).toBeGreaterThanOrEqual(1); // 25 sits in the bar below the limit
    const beyond = counts.slice(at).reduce((a, b) => a + b, 0);
    expect(beyond).toBe(2); // 26 and 30
    const min = histogramBins([70, 74, 75, 80], 75, 'min');
    const at2 = min.edges.findIndex((e) => Math.abs(e - 75) < 1e-9);
    expect(min.counts.slice(0, at2).reduce((a, b) => a + b, 0)).toBe(2); // 70 and 74 beyond a minimum
  });
});

describe('map numbers', () => {
  const w = 40;
  const h = 20;
  const data = new Float32Array(w * h);
  for (let y = 0; y < h; y++) for (let x = 0; x < w; x++) data[y * w + x] = 1 - 0.01 * Math.abs(x - 19.5) + (y === 10 ? 0.5 : 0);
  data[0] = Number.NaN;
  const plane = { width: w, height: h, data };

  it('centre profiles average the band across the centre line', () => {
    const hp = centreProfile(plane, 'horizontal', 400, 0.001);
    expect(hp.pos[0]).toBeCloseTo(5, 9); // pixel centre 0.5 of 40 over 400 mm
    // rows 9 and 10 straddle the centre of 20 rows; row 10 carries +0.5
    expect(hp.value[0]).toBeCloseTo(1 - 0.195 + 0.25, 5);
    const vp = centreProfile(plane, 'vertical', 200, 0.001);
    expect(vp.value.length).toBe(h);
    expect(vp.value[10]).toBeCloseTo(1.5 - 0.005, 5);
  });

  it('colour ranges cover the data and grid values, rounded to ticks', () => {
    const { range } = luminanceRange(plane, [0.7]);
    expect(range[0]).toBeLessThanOrEqual(0.7);
    expect(range[1]).toBeGreaterThanOrEqual(1);
    const c = contrastRange({ width: 3, height: 1, data: new Float32Array([-0.2, 0.1, 0.3]) });
    expect(c.range).toEqual([-1, 1]);
  });
});

describe('number formats', () => {
  it('are fixed, without negative zero', () => {
    expect(fmtRel(0.95349)).toBe('0.953');
    expect(fmtRel(-0.0001)).toBe('0.000');
    expect(fmtSemu(2.305)).toBe('2.31');
    expect(fmtLimit(25)).toBe('25');
    expect(fmtLimit(0.004)).toBe('0.004');
    expect(trim(4, 2)).toBe('4');
    expect(fmtExposureTime(1 / 60)).toBe('1/60 s');
    expect(fmtExposureTime(2)).toBe('2 s');
    expect(fmtExposureTime(0.3)).toBe('0.3 s');
    expect(fmtRel(null)).toBe('–');
    expect(placeWords(0.1, 0.1)).toBe('upper left');
    expect(placeWords(0.5, 0.5)).toBe('centre');
    expect(placeWords(0.9, 0.5)).toBe('middle right');
  });
});
