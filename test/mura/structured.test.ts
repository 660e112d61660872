// Periodic and tiled structure: a backlight's hot-spot array is one finding with its pitch; a tiled
// display's level steps and seams are reported per tile and per seam.
import { describe, expect, it } from 'vitest';
import { analyseMura } from '../../lib/mura/index.js';
import { FWHM_PER_SIGMA, synthMap } from '../../scripts/mura-synth.js';
import { meanOverHalfPeak, relErr } from './helpers.js';

const W = 240;
const H = 150;

/** A panel map with a centred lattice of bright Gaussian zones (14 mm FWHM, +3 %) on a smooth field. */
function hotspotMap(widthMm: number, seed: number, pitchMm: number) {
  return synthMap({
    widthMm,
    heightMm: H,
    pxPerMm: 2,
    noisePct: 0.5,
    seed,
    smooth: [[0, 0.02], [0.03], [-0.05]],
    features: [{ kind: 'hotspots', pitchMm, fwhmMm: 14, contrastPct: 3 }],
  });
}

/** The map with a border of b pixels marked as without data, as the pipeline leaves the edge transition. */
function withoutBorder<M extends { width: number; height: number; valid: Uint8Array }>(map: M, b: number): M {
  const valid = map.valid.slice();
  for (let y = 0; y < map.height; y++) {
    for (let x = 0; x < map.width; x++) if (x < b || y < b || x >= map.width - b || y >= map.height - b) valid[y * map.width + x] = 0;
  }
  return { ...map, valid };
}

describe('hot-spot arrays', () => {
  it('reports a lattice of bright zones as one finding with its pitch', () => {
    const pitch = 40;
    const map = hotspotMap(W, 31, pitch);
    const r = analyseMura(map, { pattern: 'white' });
    const arrays = r.blobs.filter((b) => b.kind === 'hotspot-array');
    expect(arrays.length).toBe(1);
    // no zone is left over as a separate spot
    expect(r.blobs.filter((b) => b.kind === 'spot').length).toBe(0);
    const a = arrays[0];
    expect(Math.abs(Number(a.detail.pitchUMm) - pitch)).toBeLessThan(2);
    expect(Math.abs(Number(a.detail.pitchVMm) - pitch)).toBeLessThan(2);
    // lattice centred on the panel: 6 x 4 nodes inside 240 x 150 mm at 40 mm pitch (x = 0 .. 240, y = 15 .. 135)
    expect(Number(a.detail.zones)).toBeGreaterThanOrEqual(20);
    // one zone: a Gaussian of FWHM 14 mm, half-peak area pi 7² = 154 mm² (neighbours add little at 40 mm)
    expect(relErr(a.areaMm2, Math.PI * 49)).toBeLessThan(0.3);
  });

  it('counts the zones cut by the edge into the array when the map border is left out, as photos have it', () => {
    // the pipeline leaves a few map pixels along the edge out of the analysis (the edge transition); the
    // lattice runs off the left and right edges (nodes at x = 0 and 240 mm), so those zones are cut
    const map = hotspotMap(W, 33, 40);
    const r = analyseMura(withoutBorder(map, 4), { pattern: 'white' });
    expect(r.blobs.filter((x) => x.kind === 'hotspot-array')).toHaveLength(1);
    expect(r.blobs.filter((x) => x.kind === 'spot')).toHaveLength(0);
  });

  it('counts a zone centred just beyond the edge, of which a sliver is left, into the array', () => {
    // 234 x 150 mm: lattice rows at y = -5 and 155 mm, 5 mm outside the top and bottom edges; what is
    // left of those zones inside the analysed border is a strip about 2 mm wide, a "line" on its own
    // (one was reported, SEMU 0.76, before edge zones could be lines)
    const Wn = 234;
    const map = hotspotMap(Wn, 34, 40);
    const r = analyseMura(withoutBorder(map, 4), { pattern: 'white' });
    expect(r.blobs.filter((x) => x.kind === 'hotspot-array')).toHaveLength(1);
    expect(r.blobs.filter((x) => x.kind === 'line')).toHaveLength(0);
  });
});

describe('tiled displays', () => {
  it('measures a tile step against the other tiles and the seams along the tile boundaries', () => {
    const seamW = 1.5;
    const map = synthMap({
      widthMm: W,
      heightMm: H,
      pxPerMm: 2,
      noisePct: 0.5,
      seed: 32,
      smooth: [[0, 0.02], [0.03], [-0.05]],
      features: [{ kind: 'tiles', cols: 3, rows: 2, stepsPct: [0, 0, 0, 0, 2, 0], seamFwhmMm: seamW, seamContrastPct: -4 }],
    });
    const r = analyseMura(map, { pattern: 'white', tileGrid: [3, 2] });
    const steps = r.blobs.filter((b) => b.detail.form === 'tile-step');
    expect(steps.length).toBe(1);
    expect(steps[0].detail.tile).toBe('r2c2');
    expect(relErr(steps[0].contrastPct, 2)).toBeLessThan(0.1);
    // the tile is the step's region: 80 x 75 mm
    expect(relErr(steps[0].areaMm2, 80 * 75)).toBeLessThan(0.02);

    const seams = r.blobs.filter((b) => b.detail.form === 'line');
    expect(seams.map((b) => b.detail.seam).sort()).toEqual(['x=1/3', 'x=2/3', 'y=1/2']);
    const s = seamW / FWHM_PER_SIGMA;
    const truth = -4 * meanOverHalfPeak((d) => Math.exp((-d * d) / (2 * s * s)), seamW);
    for (const b of seams) {
      expect(b.kind).toBe('seam');
      expect(b.polarity).toBe('dark');
      expect(relErr(b.contrastPct, truth)).toBeLessThan(0.25);
      expect(relErr(Number(b.detail.widthMm), seamW)).toBeLessThan(0.3);
    }
    // no line finding duplicates a seam
    expect(r.blobs.filter((b) => b.kind === 'line').length).toBe(0);
  });
});
