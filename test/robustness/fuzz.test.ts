// Property and fuzz tests (fast-check, fixed seeds): random bytes and random valid-but-odd inputs at the
// decoder's entry, the manifest and criteria parsers and the geometry never crash (every failure is an
// EvenfieldError with a code) and never lead to a `pass`. Over 10 000 cases in all, each tiny.
import { mkdirSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative, resolve, sep } from 'node:path';
import fc from 'fast-check';
import sharp from 'sharp';
import { stringify } from 'yaml';
import { beforeAll, describe, expect, it } from 'vitest';
import { decodePhotoBuffer } from '../../lib/io/index.js';
import { groupByManifest } from '../../lib/batch/grouping.js';
import { judgePanel, parseCriteria } from '../../lib/judge/index.js';
import { estimatePose, findPanel, rectifyPlane, solveHomography, applyHomography } from '../../lib/geometry/index.js';
import { DEFAULT_MEASURE_OPTIONS, measurePhoto } from '../../lib/pipeline/index.js';
import { isEvenfieldError } from '../../lib/errors.js';
import type { Corners, Plane, PhotoResult, Point } from '../../lib/types.js';

let cases = 0;
const count = (n: number) => {
  cases += n;
  return n;
};

/** A failure must be one of ours: an EvenfieldError with a code and a one-line message. */
function expectOurs(e: unknown, codes?: string[]): void {
  if (!isEvenfieldError(e)) throw new Error(`not an EvenfieldError: ${String(e instanceof Error ? e.stack : e)}`);
  if (codes && !codes.includes(e.code)) throw new Error(`unexpected code ${e.code}: ${e.message}`);
  if (e.message.length === 0) throw new Error('empty message');
}

let tmp: string;
const seeds: { name: string; buf: Buffer }[] = [];

beforeAll(async () => {
  tmp = mkdtempSync(join(tmpdir(), 'ef-fuzz-'));
  // tiny valid images of every accepted kind, to mutate
  const raw = Buffer.alloc(6 * 5 * 3);
  for (let i = 0; i < raw.length; i++) raw[i] = (i * 37) % 256;
  const img = () => sharp(raw, { raw: { width: 6, height: 5, channels: 3 } });
  seeds.push({ name: 'png', buf: await img().png().toBuffer() });
  seeds.push({ name: 'png16', buf: await img().toColourspace('rgb16').png().toBuffer() });
  seeds.push({ name: 'palette', buf: await img().png({ palette: true }).toBuffer() });
  seeds.push({ name: 'jpeg', buf: await img().jpeg().toBuffer() });
  seeds.push({ name: 'cmyk', buf: await img().toColourspace('cmyk').jpeg().toBuffer() });
  seeds.push({ name: 'webp', buf: await img().webp({ lossless: true }).toBuffer() });
  seeds.push({ name: 'webp-lossy', buf: await img().webp().toBuffer() });
  seeds.push({ name: 'tiff', buf: await img().tiff().toBuffer() });
  seeds.push({ name: 'gif', buf: await img().gif().toBuffer() });
});

async function decodeOrOurs(buf: Buffer): Promise<void> {
  try {
    const d = await decodePhotoBuffer(buf, 'fuzz.bin', { maxPixels: 1e6 });
    const { width, height, data } = d.image;
    if (!(width > 0 && height > 0 && data.length === width * height * 3)) throw new Error(`bad image ${width}x${height}`);
    for (const v of data) if (!(v >= 0 && v <= 1)) throw new Error(`linear value out of 0..1: ${v}`);
  } catch (e) {
    expectOurs(e, ['unreadable', 'too-large', 'lossy-format']);
  }
}

describe('decoder entry', () => {
  it('random bytes: decoded to finite linear light, or refused as unreadable', async () => {
    await fc.assert(
      fc.asyncProperty(fc.uint8Array({ minLength: 0, maxLength: 48 }), async (b) => decodeOrOurs(Buffer.from(b))),
      { numRuns: count(4000), seed: 801 },
    );
  });

  it('random bytes after a real signature: the same', async () => {
    const heads = [
      [0xff, 0xd8, 0xff],
      [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a],
      [0x49, 0x49, 0x2a, 0x00],
      [0x47, 0x49, 0x46, 0x38, 0x39, 0x61],
      [0x52, 0x49, 0x46, 0x46, 0, 0, 0, 0, 0x57, 0x45, 0x42, 0x50],
    ];
    await fc.assert(
      fc.asyncProperty(fc.constantFrom(...heads), fc.uint8Array({ maxLength: 40 }), async (h, b) => decodeOrOurs(Buffer.concat([Buffer.from(h), Buffer.from(b)]))),
      { numRuns: count(1500), seed: 802 },
    );
  });

  it('real tiny images truncated and with bytes changed: the same', async () => {
    const mutation = fc.record({
      which: fc.nat(),
      cut: fc.double({ min: 0, max: 1, noNaN: true }),
      flips: fc.array(fc.tuple(fc.nat(), fc.integer({ min: 0, max: 255 })), { maxLength: 6 }),
    });
    await fc.assert(
      fc.asyncProperty(mutation, async (m) => {
        const s = seeds[m.which % seeds.length].buf;
        const b = Buffer.from(s.subarray(0, Math.max(1, Math.round(s.length * (m.cut < 0.5 ? m.cut * 2 : 1)))));
        for (const [pos, v] of m.flips) b[pos % b.length] = v;
        await decodeOrOurs(b);
      }),
      { numRuns: count(2000), seed: 803 },
    );
  });
});

describe('manifest parser', () => {
  const cell = fc.oneof(
    fc.constantFrom('GOOD01_white.jpg', 'a/b.jpg', '../up.jpg', 'a/../../up.jpg', '/etc/passwd', 'C:\\x.jpg', '.', '..', ''),
    fc.constantFrom('P1', 'P-2.x', '=1+2', '+A1', '@x', '-1', 'white', 'black', 'gray50', 'grey', 'gray0', 'gray100', 'red'),
    fc.constantFrom('1,2 3,4 5,6 7,8', '1 2; 3 4; 5 6; 7 8', 'NaN,1 2,3 4,5 6,7', '1e309,0 1,0 1,1 0,1'),
    fc.string({ maxLength: 12 }),
  );
  const header = fc.oneof(
    fc.constant(['file', 'panel', 'pattern']),
    fc.constant(['file', 'panel', 'pattern', 'corners', 'note']),
    fc.shuffledSubarray(['file', 'panel', 'pattern', 'corners', 'note', 'FILE', 'extra'], { minLength: 1 }),
  );
  const quote = (s: string) => (/[",\n\r]/.test(s) || Math.abs(s.length % 3) === 1 ? `"${s.replace(/"/g, '""')}"` : s);

  it('random rows: refused with a manifest error, or every file inside the folder and every id and pattern valid', () => {
    const dir = join(tmp, 'manifest');
    const path = join(dir, 'm.csv');
    mkdirSync(dir, { recursive: true });
    fc.assert(
      fc.property(header, fc.array(fc.array(cell, { maxLength: 6 }), { maxLength: 5 }), fc.constantFrom('\n', '\r\n'), fc.boolean(), (h, rows, eol, raw) => {
        const text = [h, ...rows].map((r) => r.map(raw ? (x: string) => x : quote).join(',')).join(eol);
        writeFileSync(path, text);
        let g;
        try {
          g = groupByManifest(path);
        } catch (e) {
          expectOurs(e, ['manifest']);
          return;
        }
        for (const p of g.panels) {
          expect(p.panel).toMatch(/^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$/);
          for (const ph of p.photos) {
            const rel = relative(dir, resolve(ph.file));
            expect(rel.startsWith('..') || rel.split(sep).includes('..')).toBe(false);
            expect(['white', 'black', 'red', 'green', 'blue', 'gray']).toContain(ph.pattern);
            if (ph.corners) for (const c of ph.corners) expect(c.every(Number.isFinite)).toBe(true);
          }
        }
      }),
      { numRuns: count(1000), seed: 804 },
    );
  });
});

describe('criteria parser', () => {
  const keys = [
    'name', 'description', 'panel', 'widthMm', 'heightMm', 'grid', 'layout', 'placement', 'insetPct', 'spotRadiusPct',
    'uncertainty', 'mura', 'minFeatureMm', 'tileGrid', 'patterns', 'white', 'gray', 'black', 'red', 'required',
    'minOverMaxPctMin', 'maxOverMinMax', 'maxDeviationFromCentrePctMax', 'maxDuvFromCentreMax', 'maxSemu', 'blobs',
    'maxCount', 'countFromSemu', 'line', 'spot', 'glow', 'maxContrastPct', 'reportOnly', 'luminanceCdM2', 'min', 'at',
  ];
  const scalar = fc.oneof(
    fc.double(),
    fc.integer(),
    fc.constantFrom(0, -1, 75, 1.33, 9, 25, 1e308, Number.NaN, Number.POSITIVE_INFINITY),
    fc.boolean(),
    fc.constant(null),
    fc.string({ maxLength: 8 }),
    fc.constantFrom('cells', 'inset', 'centre', 'white', 'maxSemu'),
  );
  const tree = fc.letrec((tie) => ({
    node: fc.oneof({ maxDepth: 4 }, scalar, fc.array(tie('node'), { maxLength: 3 }), fc.dictionary(fc.constantFrom(...keys), tie('node'), { maxKeys: 5 })),
  })).node;
  const base = { name: 'fuzz', patterns: { white: { minOverMaxPctMin: 75 } } };
  const document = fc.oneof(
    tree.map((t) => stringify(t)),
    fc.dictionary(fc.constantFrom(...keys), tree, { maxKeys: 6 }).map((d) => stringify({ ...base, ...d })),
    fc.string({ maxLength: 80 }),
  );

  const errorPhoto = (pattern: PhotoResult['pattern']): PhotoResult => ({
    file: `x_${pattern}.jpg`, sha256: '', pattern, patternLevel: pattern === 'gray' ? 50 : null, status: 'error', error: 'x: unreadable',
    errorCode: 'unreadable', decode: null, exposure: null, exposureStats: null, corners: null, geometry: null, falloff: null, grid: null,
    uniformity: null, mura: null, blobs: [], warnings: [],
  });
  const nanPhoto = (pattern: PhotoResult['pattern']): PhotoResult => ({
    ...errorPhoto(pattern), status: 'ok', error: null, errorCode: null,
    uniformity: { minOverMaxPct: NaN, nonuniformityPct: NaN, maxOverMin: NaN, cvPct: NaN, maxDeviationFromCentrePct: NaN, maxDuvFromCentre: NaN, maxDuvAnyPair: NaN },
    grid: { layout: 9, placement: 'cells', insetPct: null, spotRadiusPct: 2, points: [] },
    mura: { blobs: [], maxSemu: NaN, noiseFloorPct: NaN, resolvableContrastPct: {}, backgroundModel: '' },
  });

  it('random documents: valid criteria or a criteria error, and no panel of unmeasured or non-finite photos passes', () => {
    let valid = 0;
    fc.assert(
      fc.property(document, (text) => {
        let c;
        try {
          c = parseCriteria(text, 'fuzz.yaml');
        } catch (e) {
          expectOurs(e, ['criteria']);
          for (const line of (e as Error).message.split('\n')) expect(line).toMatch(/^fuzz\.yaml:\d+: /);
          return;
        }
        valid++;
        const patterns = ['white', 'gray', 'black'] as const;
        expect(judgePanel(patterns.map(errorPhoto), c).verdict).toBe('error');
        expect(judgePanel(patterns.map(nanPhoto), c).verdict).not.toBe('pass');
      }),
      { numRuns: count(1500), seed: 805 },
    );
    // the generator must reach the valid side too, or the second half proves nothing
    expect(valid).toBeGreaterThan(50);
  });
});

describe('geometry', () => {
  const coord = fc.oneof(fc.double({ min: -1e4, max: 1e4, noNaN: true }), fc.constantFrom(0, 1, 1e-9, 1e12, Number.NaN, Number.POSITIVE_INFINITY));
  const point = fc.tuple(coord, coord) as fc.Arbitrary<Point>;
  const quad = fc.tuple(point, point, point, point) as fc.Arbitrary<Corners>;

  it('homography from random point pairs: maps the points, or refuses', () => {
    fc.assert(
      fc.property(quad, quad, (src, dst) => {
        let Hm;
        try {
          Hm = solveHomography(src, dst);
        } catch (e) {
          expectOurs(e);
          return;
        }
        expect(Hm.every(Number.isFinite)).toBe(true);
        const scale = Math.max(1, ...dst.flat().map(Math.abs));
        src.forEach((p, i) => {
          const q = applyHomography(Hm, p);
          expect(Math.hypot(q[0] - dst[i][0], q[1] - dst[i][1]) / scale).toBeLessThan(1e-6);
        });
      }),
      { numRuns: count(3000), seed: 806 },
    );
  });

  it('pose and rectification from random corners: finite figures, or refusal', () => {
    const plane: Plane = { width: 16, height: 12, data: new Float32Array(16 * 12).fill(0.5) };
    fc.assert(
      fc.property(quad, fc.double({ min: -10, max: 1e5, noNaN: true }), (c, f) => {
        try {
          const p = estimatePose(c, f, 8, 6);
          expect(Number.isFinite(p.tiltDeg) && Number.isFinite(p.viewAngleMaxDeg)).toBe(true);
          expect(p.viewAngleMaxDeg).toBeGreaterThanOrEqual(0);
          expect(p.viewAngleMaxDeg).toBeLessThanOrEqual(90);
        } catch (e) {
          expectOurs(e);
        }
        try {
          const r = rectifyPlane(plane, c, 4, 3);
          for (let k = 0; k < 12; k++) if (r.valid[k]) expect(r.plane.data[k]).toBeCloseTo(0.5, 5);
        } catch (e) {
          expectOurs(e);
        }
      }),
      { numRuns: count(1500), seed: 807 },
    );
  });

  it('findPanel on random planes: corners inside reach of the image, or no-panel / partly-outside', () => {
    const planeArb = fc.record({
      w: fc.integer({ min: 8, max: 40 }),
      h: fc.integer({ min: 8, max: 40 }),
      kind: fc.constantFrom('noise', 'flat', 'quad', 'nan'),
      seed: fc.nat(),
      q: fc.tuple(fc.double({ min: 0, max: 1, noNaN: true }), fc.double({ min: 0, max: 1, noNaN: true }), fc.double({ min: 0, max: 1, noNaN: true }), fc.double({ min: 0, max: 1, noNaN: true })),
    });
    fc.assert(
      fc.property(planeArb, ({ w, h, kind, seed, q }) => {
        const data = new Float32Array(w * h);
        let s = seed | 1;
        const rnd = () => ((s = (Math.imul(s, 1103515245) + 12345) >>> 0) / 4294967296);
        const [x0, y0, x1, y1] = [Math.min(q[0], q[2]) * w, Math.min(q[1], q[3]) * h, Math.max(q[0], q[2]) * w, Math.max(q[1], q[3]) * h];
        for (let y = 0; y < h; y++)
          for (let x = 0; x < w; x++) {
            const k = y * w + x;
            if (kind === 'noise') data[k] = rnd();
            else if (kind === 'flat') data[k] = 0.3;
            else if (kind === 'quad') data[k] = x >= x0 && x <= x1 && y >= y0 && y <= y1 ? 0.8 : 0.02 + 0.01 * rnd();
            else data[k] = rnd() < 0.1 ? Number.NaN : rnd();
          }
        try {
          const f = findPanel({ width: w, height: h, data });
          for (const c of f.corners) {
            expect(c.every(Number.isFinite)).toBe(true);
            expect(c[0]).toBeGreaterThan(-w);
            expect(c[0]).toBeLessThan(2 * w);
          }
        } catch (e) {
          expectOurs(e, ['no-panel', 'partly-outside']);
        }
      }),
      { numRuns: count(600), seed: 808 },
    );
  });
});

describe('the whole photo measurement', () => {
  it('random tiny images and random manual corners: never thrown, never a pass', async () => {
    const opts = {
      ...DEFAULT_MEASURE_OPTIONS,
      pattern: 'white' as const,
      patternLevel: null,
      grid: { layout: 9 as const, placement: 'cells' as const, insetFraction: 0.1, spotRadiusPct: 2 },
      mura: false,
      artifacts: false,
    };
    const criteria = parseCriteria('name: fuzz\npatterns:\n  white:\n    minOverMaxPctMin: 0\n', 'fuzz.yaml');
    await fc.assert(
      fc.asyncProperty(
        fc.record({
          w: fc.integer({ min: 1, max: 32 }),
          h: fc.integer({ min: 1, max: 32 }),
          bytes: fc.uint8Array({ minLength: 32 * 32 * 3, maxLength: 32 * 32 * 3 }),
          corners: fc.option(fc.tuple(...Array.from({ length: 8 }, () => fc.double({ min: -10, max: 45, noNaN: true }))), { nil: null }),
        }),
        async ({ w, h, bytes, corners }) => {
          const file = join(tmp, 'photo.png');
          writeFileSync(file, await sharp(Buffer.from(bytes.subarray(0, w * h * 3)), { raw: { width: w, height: h, channels: 3 } }).png().toBuffer());
          const c = corners ? ([[corners[0], corners[1]], [corners[2], corners[3]], [corners[4], corners[5]], [corners[6], corners[7]]] as Corners) : null;
          const m = await measurePhoto(file, { ...opts, corners: c, shared: null });
          // random pixels hold no panel: the photo must be refused, with a code that is not 'internal'
          if (m.result.status === 'ok') {
            expect(m.result.uniformity && Object.values(m.result.uniformity).every(Number.isFinite)).toBe(true);
          } else {
            expect(m.result.errorCode).not.toBe('internal');
            expect(m.result.error).toMatch(/photo\.png: /);
          }
          const v = judgePanel([m.result], criteria).verdict;
          if (c === null) expect(v).not.toBe('pass');
        },
      ),
      { numRuns: count(300), seed: 809 },
    );
  });

  it('ran over 10 000 cases in all', () => {
    expect(cases).toBeGreaterThanOrEqual(10_000);
  });
});
