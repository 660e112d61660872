// TEST DATA ONLY: fabricated panel results and report artifacts for the report tests. The numbers
// are made up to look like a measurement; nothing here was measured.

import type { Blob, GridPoint, PanelResult, Pattern, PhotoResult, Plane } from '../../lib/types.js';
import type { PanelReportInput, PhotoArtifacts, ReportThumbnail } from '../../lib/report/types.js';

/** Small deterministic PRNG (mulberry32) so fabricated noise is the same on every run. */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

function gauss(r: () => number): number {
  const u = Math.max(1e-12, r());
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * r());
}

export interface FakeBlobSpec {
  kind: Blob['kind'];
  u: number;
  v: number;
  /** gaussian sigma as a fraction of panel width */
  sigma: number;
  contrastPct: number;
  semu: number;
}

export interface FakePhotoSpec {
  pattern: Pattern;
  level?: number | null;
  falloff: number; // relative drop at the corners
  noisePct: number;
  blobs: FakeBlobSpec[];
  layout: 5 | 9 | 13 | 25;
  status?: 'ok' | 'error';
}

const PANEL_W_MM = 527;
const PANEL_H_MM = 296.5;

/** A synthetic relative-luminance map: smooth falloff, gaussian blobs, noise; centre ≈ 1. */
export function fakeRelMap(spec: FakePhotoSpec, width: number, height: number, seed: number): { rel: Plane; contrast: Plane } {
  const r = rng(seed);
  const rel = new Float32Array(width * height);
  const con = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const u = (x + 0.5) / width;
      const v = (y + 0.5) / height;
      const d2 = ((u - 0.5) ** 2 + (v - 0.5) ** 2) / 0.5;
      const base = 1 - spec.falloff * d2 + 0.02 * (u - 0.5);
      let c = 0;
      for (const b of spec.blobs) {
        const du = u - b.u;
        const dv = ((v - b.v) * height) / width;
        c += b.contrastPct * Math.exp(-(du * du + dv * dv) / (2 * b.sigma * b.sigma));
      }
      const noise = (spec.noisePct / 100) * gauss(r);
      rel[y * width + x] = base * (1 + c / 100) + noise;
      con[y * width + x] = c + spec.noisePct * gauss(r);
    }
  }
  // a strip with no data along the bottom-right corner, as when the photo cut the corner off
  for (let y = height - 6; y < height; y++) for (let x = width - 30; x < width; x++) {
    rel[y * width + x] = NaN;
    con[y * width + x] = NaN;
  }
  return { rel: { width, height, data: rel }, contrast: { width, height, data: con } };
}

function layoutPositions(layout: 5 | 9 | 13 | 25): Array<[number, number]> {
  const ring = (ks: number[]): Array<[number, number]> => ks.flatMap((v) => ks.map((u) => [u, v] as [number, number]));
  if (layout === 25) return ring([0.1, 0.3, 0.5, 0.7, 0.9]);
  if (layout === 9) return ring([1 / 6, 0.5, 5 / 6]);
  if (layout === 5) return [[0.25, 0.25], [0.75, 0.25], [0.5, 0.5], [0.25, 0.75], [0.75, 0.75]];
  const nine = ring([0.1, 0.5, 0.9]);
  const four: Array<[number, number]> = [[0.3, 0.3], [0.7, 0.3], [0.3, 0.7], [0.7, 0.7]];
  return [...nine, ...four].sort((a, b) => a[1] - b[1] || a[0] - b[0]);
}

function sampleSpot(p: Plane, u: number, v: number, radius: number): { mean: number; n: number } {
  const cx = u * p.width - 0.5;
  const cy = v * p.height - 0.5;
  const rr = radius * p.height;
  let s = 0;
  let n = 0;
  for (let y = Math.floor(cy - rr); y <= Math.ceil(cy + rr); y++) {
    for (let x = Math.floor(cx - rr); x <= Math.ceil(cx + rr); x++) {
      if (x < 0 || y < 0 || x >= p.width || y >= p.height) continue;
      if ((x - cx) ** 2 + (y - cy) ** 2 > rr * rr) continue;
      const val = p.data[y * p.width + x]!;
      if (Number.isFinite(val)) {
        s += val;
        n++;
      }
    }
  }
  return { mean: n ? s / n : NaN, n };
}

export function fakeGrid(rel: Plane, layout: 5 | 9 | 13 | 25, seed: number): GridPoint[] {
  const r = rng(seed);
  const pos = layoutPositions(layout);
  const raw = pos.map(([u, v]) => sampleSpot(rel, u, v, 0.03));
  const centre = raw[pos.findIndex(([u, v]) => u === 0.5 && v === 0.5)]!.mean;
  const scale = 0.42; // photo units
  return pos.map(([u, v], i) => {
    const up = 0.1978 + 0.002 * (r() - 0.5);
    const vp = 0.4683 + 0.002 * (r() - 0.5);
    return {
      index: i + 1,
      u,
      v,
      xMm: u * PANEL_W_MM,
      yMm: v * PANEL_H_MM,
      Y: (raw[i]!.mean / centre) * scale,
      relative: raw[i]!.mean / centre,
      uprime: up,
      vprime: vp,
      duvFromCentre: 0,
      pixels: raw[i]!.n,
    };
  }).map((g, _i, all) => {
    const c = all.find((x) => x.u === 0.5 && x.v === 0.5)!;
    return { ...g, duvFromCentre: Math.hypot(g.uprime - c.uprime, g.vprime - c.vprime) };
  });
}

/** A fabricated photo of a panel in a dark room, 8-bit sRGB, with the panel's corners. */
export function fakeThumbnail(level: number, seed: number, width = 720, height = 480): { thumb: ReportThumbnail; corners: [[number, number], [number, number], [number, number], [number, number]] } {
  const r = rng(seed);
  const scaleToFull = 6000 / width;
  // corners in full-size camera pixels (6000 x 4000), slight perspective
  const corners: [[number, number], [number, number], [number, number], [number, number]] = [
    [1130, 905],
    [4890, 960],
    [4850, 3080],
    [1160, 3120],
  ];
  const thumb = new Uint8Array(width * height * 3);
  const tc = corners.map(([x, y]) => [(x + 0.5) / scaleToFull - 0.5, (y + 0.5) / scaleToFull - 0.5] as [number, number]);
  // x-range of a convex quadrilateral on a row, from its edges
  const span = (y: number): [number, number] => {
    let lo = Infinity;
    let hi = -Infinity;
    for (let i = 0; i < 4; i++) {
      const [ax, ay] = tc[i]!;
      const [bx, by] = tc[(i + 1) % 4]!;
      if ((y < ay && y < by) || (y > ay && y > by) || ay === by) continue;
      const x = ax + ((y - ay) / (by - ay)) * (bx - ax);
      lo = Math.min(lo, x);
      hi = Math.max(hi, x);
    }
    return [lo, hi];
  };
  for (let y = 0; y < height; y++) {
    const [lo, hi] = span(y);
    const [blo, bhi] = [Math.min(span(y - 6)[0], span(y + 6)[0]) - 6, Math.max(span(y - 6)[1], span(y + 6)[1]) + 6];
    for (let x = 0; x < width; x++) {
      const o = (y * width + x) * 3;
      let val = 18 + 6 * r();
      if (x >= lo && x <= hi) {
        const d2 = ((x - width / 2) ** 2 + (y - height / 2) ** 2) / (width * width * 0.25);
        val = level * (1 - 0.25 * d2) + 3 * r();
      } else if (x >= blo && x <= bhi) {
        val = 35; // bezel
      }
      const c = Math.max(0, Math.min(255, Math.round(val)));
      thumb[o] = c;
      thumb[o + 1] = c;
      thumb[o + 2] = Math.min(255, c + 3);
    }
  }
  return { thumb: { width, height, rgb: thumb, scaleToFull }, corners };
}

export function fakePhoto(spec: FakePhotoSpec, index: number, mapW = 600): { photo: PhotoResult; art: PhotoArtifacts } {
  const mapH = Math.round((mapW * PANEL_H_MM) / PANEL_W_MM);
  const seed = 1000 + index * 17;
  const { rel, contrast } = fakeRelMap(spec, mapW, mapH, seed);
  const points = fakeGrid(rel, spec.layout, seed + 1);
  const relVals = points.map((p) => p.relative);
  const lmax = Math.max(...relVals);
  const lmin = Math.min(...relVals);
  const mean = relVals.reduce((a, b) => a + b, 0) / relVals.length;
  const sd = Math.sqrt(relVals.reduce((a, b) => a + (b - mean) ** 2, 0) / relVals.length);
  const level = spec.pattern === 'white' ? 235 : spec.pattern === 'black' ? 22 : 120;
  const { thumb, corners } = fakeThumbnail(level, seed + 2);
  const blobs: Blob[] = spec.blobs.map((b, i) => {
    const half = 2 * b.sigma;
    const halfV = (2 * b.sigma * mapW) / mapH;
    const area = Math.PI * (1.18 * b.sigma * PANEL_W_MM) ** 2;
    return {
      id: i + 1,
      kind: b.kind,
      polarity: b.contrastPct < 0 ? 'dark' : 'bright',
      u: b.u,
      v: b.v,
      xMm: b.u * PANEL_W_MM,
      yMm: b.v * PANEL_H_MM,
      bbox: [Math.max(0, b.u - half), Math.max(0, b.v - halfV), Math.min(1, b.u + half), Math.min(1, b.v + halfV)],
      areaMm2: area,
      contrastPct: b.contrastPct * 0.72,
      peakContrastPct: b.contrastPct,
      semu: b.semu,
      // an edge glow as the analysis gives it: the peak where the map begins and how far it was carried;
      // the first photo's spot as one reaching the strip left out along the edges
      detail: (b.kind === 'edge-glow'
        ? { edge: 'left', depthMm: 9.2, seenPeakPct: 12.5, carriedToEdgeMm: 2.56 }
        : b.kind === 'spot' && index === 0
          ? { diameterMm: 12.4, borderStripMm2: 31.5 }
          : {}) as Record<string, string | number>,
    };
  });
  const photo: PhotoResult = {
    file: `photos/panel-A17/${String(index + 1).padStart(2, '0')}-${spec.pattern}.jpg`,
    sha256: (index + 1).toString(16).repeat(64).slice(0, 64).replace(/^./, 'a'),
    pattern: spec.pattern,
    patternLevel: spec.level ?? null,
    status: spec.status ?? 'ok',
    error: spec.status === 'error' ? 'panel signal lost in the noise floor' : null,
    errorCode: spec.status === 'error' ? 'too-dark' : null,
    decode: { format: 'jpeg', width: 6000, height: 4000, bitDepth: 8, channels: 3, transfer: 'srgb', scale: 4, jpegSamples: 'float', levelStepCodes: 0.375, jpegCoded: true },
    exposure: {
      make: 'FakeCam',
      model: 'Model 7',
      lens: '50 mm f/1.8',
      exposureTimeS: spec.pattern === 'black' ? 1 / 4 : 1 / 60,
      fNumber: 8,
      iso: 100,
      focalLengthMm: 50,
      focalLength35mm: 75,
      dateTime: `2025-03-14T10:1${index}:00`,
    },
    exposureStats: { clippedFraction: 0, darkFraction: spec.pattern === 'black' ? 0.004 : 0, p999: 0.61, median: 0.42 },
    corners,
    geometry: { cornersSource: 'auto', edgeResidualPx: 0.62, edgeBowPx: 0.4, tiltDeg: 3.4, viewAngleMaxDeg: 12.8, mapWidth: 1200, mapHeight: Math.round(1200 * PANEL_H_MM / PANEL_W_MM), pxPerMm: 1200 / PANEL_W_MM, cameraPxPerMapPx: 3.1 },
    falloff: { applied: true, method: 'flat-frames', source: 'falloff/fakecam-50mm-f8.json', cornerFalloff: 0.71, warnings: [] },
    grid: { layout: spec.layout, placement: 'cells', insetPct: null, spotRadiusPct: 3, points },
    uniformity: {
      minOverMaxPct: (100 * lmin) / lmax,
      nonuniformityPct: (100 * (lmax - lmin)) / lmax,
      maxOverMin: lmax / lmin,
      cvPct: (100 * sd) / mean,
      maxDeviationFromCentrePct: Math.max(...relVals.map((x) => Math.abs(x - 1) * 100)),
      maxDuvFromCentre: Math.max(...points.map((p) => p.duvFromCentre)),
      maxDuvAnyPair: Math.max(...points.flatMap((a) => points.map((b) => Math.hypot(a.uprime - b.uprime, a.vprime - b.vprime)))),
    },
    mura: { blobs, maxSemu: Math.max(0, ...blobs.map((b) => b.semu)), noiseFloorPct: spec.noisePct, resolvableContrastPct: { '5': 0.9, '20': 0.35, '80': 0.12 }, backgroundModel: 'robust polynomial surface, order 3' },
    blobs,
    warnings: spec.pattern === 'black' ? ['black field: SEMU on a dark field is an extrapolation'] : [],
  };
  return {
    photo,
    art: { thumbnail: thumb, relMap: rel, contrastMap: contrast, panelSizeMm: { width: PANEL_W_MM, height: PANEL_H_MM, known: true } },
  };
}

export const THREE_PATTERNS: FakePhotoSpec[] = [
  {
    pattern: 'white',
    falloff: 0.3,
    noisePct: 0.25,
    layout: 9,
    blobs: [
      { kind: 'cloud', u: 0.32, v: 0.4, sigma: 0.05, contrastPct: -2.4, semu: 2.31 },
      { kind: 'spot', u: 0.74, v: 0.62, sigma: 0.012, contrastPct: 3.1, semu: 1.26 },
    ],
  },
  { pattern: 'gray', level: 50, falloff: 0.22, noisePct: 0.3, layout: 25, blobs: [{ kind: 'cloud', u: 0.3, v: 0.42, sigma: 0.05, contrastPct: -2.0, semu: 1.93 }] },
  {
    pattern: 'black',
    falloff: 0.1,
    noisePct: 0.8,
    layout: 9,
    blobs: [
      { kind: 'edge-glow', u: 0.03, v: 0.5, sigma: 0.03, contrastPct: 14, semu: 5.7 },
      { kind: 'corner-glow', u: 0.95, v: 0.08, sigma: 0.025, contrastPct: 9, semu: 3.8 },
      { kind: 'spot', u: 0.6, v: 0.75, sigma: 0.01, contrastPct: 6, semu: 2.02 },
    ],
  },
];

export function fakePanel(specs: FakePhotoSpec[] = THREE_PATTERNS, mapW = 600): PanelReportInput {
  const photos = specs.map((s, i) => fakePhoto(s, i, mapW));
  const white = photos[0]!.photo;
  const nonu = white.uniformity!.nonuniformityPct;
  const reasonDetails: PanelResult['reasonDetails'] = [
    {
      pattern: 'white',
      figure: 'nonuniformityPct',
      value: nonu,
      limit: 25,
      margin: 25 - nonu,
      text: `white: luminance non-uniformity ${nonu.toFixed(1)} % ≤ 25 % maximum (margin ${(25 - nonu).toFixed(1)} points)`,
      severity: nonu > 25 ? 'fail' : 'note',
    },
    {
      pattern: 'white',
      figure: 'maxSemu',
      value: 2.31,
      limit: 1.5,
      margin: -0.81,
      text: 'white: largest mura 2.31 SEMU (blob 1, cloud) > 1.5 maximum (over by 0.81)',
      severity: 'fail',
    },
    {
      pattern: 'black',
      figure: 'maxSemu',
      value: 5.7,
      limit: 6,
      margin: 0.3,
      text: 'black: largest mura 5.70 SEMU (blob 1, edge-glow) ≤ 6 maximum (margin 0.30)',
      severity: 'note',
    },
  ];
  const fails = reasonDetails.filter((r) => r.severity === 'fail');
  const panel: PanelResult = {
    panel: 'A17-0042',
    verdict: fails.length > 0 ? 'fail' : 'pass',
    reasons: fails.map((r) => r.text),
    reasonDetails,
    photos: photos.map((p) => p.photo),
  };
  const artifacts: Record<string, PhotoArtifacts> = {};
  for (const p of photos) artifacts[p.photo.file] = p.art;
  return {
    panel,
    artifacts,
    criteria: {
      name: 'Fabricated test criteria (not a real specification)',
      hash: 'c0ffee'.repeat(10) + 'abcd',
      lines: [
        { text: 'White, 9 points: luminance non-uniformity at most 25 %', source: 'test criteria §1; formula: non-uniformity = 100 (Lmax − Lmin)/Lmax' },
        { text: 'Any light field: no mura above 1.5 SEMU', source: 'test criteria §2' },
        { text: 'Black field: no mura above 6 SEMU', source: 'test criteria §3' },
      ],
    },
    toolVersion: '0.1.0-test',
    generated: new Date('2025-03-14T12:00:00Z'),
    lot: { lot: 'LOT-2025-03-A', date: '2025-03-14', station: 'Bench 2', operator: 'J. Doe' },
  };
}

/** TEST DATA ONLY: a lot of panels with made-up figures spread around the limits. */
export function fakeLot(count = 40): import('../../lib/report/types.js').LotReportInput {
  const r = rng(77);
  const panels: PanelResult[] = [];
  for (let i = 0; i < count; i++) {
    const nonu = 8 + 20 * r() ** 1.6;
    const semu = 0.2 + 2.2 * r() ** 2;
    const duv = 0.001 + 0.006 * r();
    const error = i === 7;
    const photo = (pattern: Pattern, scale: number): PhotoResult => {
      const base = fakePhotoStub(`lot/P${String(i + 1).padStart(3, '0')}_${pattern}.jpg`, pattern);
      if (error && pattern === 'black') return { ...base, status: 'error', error: 'no panel outline found', errorCode: 'no-panel' };
      return {
        ...base,
        uniformity: {
          minOverMaxPct: 100 - nonu * scale,
          nonuniformityPct: nonu * scale,
          maxOverMin: 1 / (1 - (nonu * scale) / 100),
          cvPct: nonu * scale * 0.3,
          maxDeviationFromCentrePct: nonu * scale * 0.9,
          maxDuvFromCentre: duv * scale,
          maxDuvAnyPair: duv * scale * 1.4,
        },
        mura: { blobs: [], maxSemu: semu * scale, noiseFloorPct: 0.3, resolvableContrastPct: {}, backgroundModel: 'test' },
      };
    };
    const photos = [photo('white', 1), photo('black', 1.3)];
    const reasonDetails: PanelResult['reasonDetails'] = [
      { pattern: 'white', figure: 'nonuniformityPct', value: nonu, limit: 25, margin: 25 - nonu, text: `white: luminance non-uniformity ${nonu.toFixed(1)} % ${nonu > 25 ? '>' : '≤'} 25 % maximum`, severity: nonu > 25 ? 'fail' : 'note' },
      { pattern: 'white', figure: 'maxSemu', value: semu, limit: 1.5, margin: 1.5 - semu, text: `white: largest mura ${semu.toFixed(2)} SEMU ${semu > 1.5 ? '>' : '≤'} 1.5 maximum`, severity: semu > 1.5 ? 'fail' : 'note' },
    ];
    if (error) reasonDetails.unshift({ pattern: 'black', figure: 'photo', value: null, limit: null, margin: null, text: 'black: cannot be measured: no panel outline found', severity: 'error' });
    const fails = reasonDetails.filter((x) => x.severity !== 'note');
    panels.push({
      panel: `P${String(i + 1).padStart(3, '0')}`,
      verdict: reasonDetails.some((x) => x.severity === 'fail') ? 'fail' : error ? 'error' : 'pass',
      reasons: fails.map((x) => x.text),
      reasonDetails,
      photos,
    });
  }
  return {
    lot: { lot: 'LOT-2025-03-A', date: '2025-03-14', station: 'Bench 2', operator: 'J. Doe' },
    panels,
    criteria: { name: 'Fabricated test criteria (not a real specification)', hash: 'c0ffee'.repeat(10) + 'abcd', lines: [] },
    toolVersion: '0.1.0-test',
    generated: new Date('2025-03-14T12:00:00Z'),
    unassigned: [{ file: 'lot/stray.jpg', reason: 'file name does not follow <panel>_<pattern>.<ext>' }],
  };
}

function fakePhotoStub(file: string, pattern: Pattern): PhotoResult {
  return {
    file,
    sha256: '0'.repeat(64),
    pattern,
    patternLevel: null,
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
