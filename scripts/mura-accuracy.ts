// Accuracy study of the full-field mura analysis on generated photos, through the whole pipeline
// (decode, cos⁴ falloff correction, rectification, mura). The acceptance figures of the mura issue:
//
//  - gray fields with 1-4 features each (spots 5-40 mm, clouds 50-200 mm, bands 5-60 mm across at half
//    peak, contrast 0.5-20 % log-uniform, either polarity, random poses): recall >= 95 % for features
//    of SEMU >= 1.5; kind right for >= 90 % of the found ones; mean contrast within +-25 % and area
//    within +-30 % of the truth for features of SEMU >= 2;
//  - clean gray fields (smooth variation only): at most 0.2 false findings of SEMU >= 1 per photo;
//  - black fields with edge or corner glow: each glow found, as glow, on its edge or corner.
//
// Truth is the generator's (per feature part in isolation, half-peak region of C = 100 (L - B) / B).
// The generator's cloud size is an envelope; its half-peak region is about 0.5-0.65 of it, so each
// cloud's envelope is scaled until its half-peak region has the drawn diameter (equal-area disc).
// Corners are the generator's true ones, so that a geometry miss does not count as a mura miss.
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/mura-accuracy.js [gray] [clean] [black] [width] [height] [--big] [--render] [--seeds=N] [--panel=WxH]
//     [--distortion=K] [--no-noise] [--full-well=N] [--mosaic] [--denoise=K,S] [--sharpen=A,S] [--varied] [--edges] [--elliptic] [--stacked[=other]] [--smooth=steep|hump] [--exposure=P] [--glow=weak]
//
// Rendered photos and their truth are kept under .cache/ and reused (--render draws them again).

import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { buildPanel, renderPhoto } from '../fixtures/generator/index.js';
import type { FeatureTruth, PanelModel, PhotoSpec, PhotoTruth } from '../fixtures/generator/index.js';
import { blackSpec, graySpec, otherSmooth } from './mura-scenes.js';
import { DEFAULT_MEASURE_OPTIONS, DEFAULT_QUALITY_LIMITS, measurePhoto } from '../lib/pipeline/index.js';
import type { Blob, MuraResult } from '../lib/types.js';

const args = process.argv.slice(2).filter((a) => !a.startsWith('--'));
const nGray = Number(args[0] ?? 60);
const nClean = Number(args[1] ?? 30);
const nBlack = Number(args[2] ?? 20);
const width = Number(args[3] ?? 2400);
const height = Number(args[4] ?? 1600);
const big = process.argv.includes('--big');
// --seeds N: another set of scenes (seeds shifted by N), to check that a change holds beyond the usual set
const seedArg = process.argv.find((a) => a.startsWith('--seeds='));
const seedOffset = seedArg ? Number(seedArg.slice('--seeds='.length)) : 0;
if (!Number.isInteger(seedOffset) || seedOffset < 0 || seedOffset > 900) throw new Error('--seeds=N needs an integer 0..900');
// --no-falloff: leave the lens falloff in the photo (no correction), as a run without a profile does
const noFalloff = process.argv.includes('--no-falloff');
// --distortion=K: photos drawn through a lens with radial distortion K (the generator's
// CameraSpec.distortion; 0.03 bowed a study panel's edges by 4.8 px in a 2400 x 1600 photo), the panel
// found by the tool; --found-corners: the panel found by the tool instead of given by the truth's corners
const distArg = process.argv.find((a) => a.startsWith('--distortion='));
const distortion = distArg ? Number(distArg.slice('--distortion='.length)) : 0;
if (!Number.isFinite(distortion) || Math.abs(distortion) > 0.2) throw new Error('--distortion=K needs a number from -0.2 to 0.2');
const foundCorners = process.argv.includes('--found-corners');
// --mosaic: a colour filter mosaic on the sensor (the generator's CameraSpec.mosaic: noise on RGGB
// photosites, bilinear interpolation, white balance and a colour matrix); --sharpen=A,S: the camera's
// unsharp masking of its output, amount A and radius S px (OutputSpec.sharpen)
const mosaic = process.argv.includes('--mosaic');
// --no-noise: photos without sensor noise (the 8-bit coding's steps then lie bare on smooth gradients)
const noNoise = process.argv.includes('--no-noise');
// --full-well=N: sensor noise of N electrons at full scale (the generator's default 20000; more is quieter)
const fwArg = process.argv.find((a) => a.startsWith('--full-well='));
const fullWell = fwArg ? Number(fwArg.slice('--full-well='.length)) : null;
if (fullWell !== null && !(fullWell >= 100)) throw new Error('--full-well=N needs a number of electrons >= 100');
const sharpArg = process.argv.find((a) => a.startsWith('--sharpen='));
const sharpen = sharpArg ? (([a, sg]) => ({ amount: a, sigmaPx: sg }))(sharpArg.slice('--sharpen='.length).split(',').map(Number)) : null;
if (sharpen && !(sharpen.amount >= 0 && sharpen.sigmaPx > 0)) throw new Error('--sharpen=A,S needs an amount >= 0 and a radius > 0 px, e.g. --sharpen=0.8,1');
// --denoise=K,S: the camera's noise reduction, strength K (0-1) and radius S px (OutputSpec.denoise)
const denoiseArg = process.argv.find((a) => a.startsWith('--denoise='));
const denoise = denoiseArg ? (([k, sg]) => ({ strength: k, sigmaPx: sg }))(denoiseArg.slice('--denoise='.length).split(',').map(Number)) : null;
if (denoise && !(denoise.strength >= 0 && denoise.strength <= 1 && denoise.sigmaPx > 0)) throw new Error('--denoise=K,S needs a strength 0..1 and a radius > 0 px, e.g. --denoise=0.8,1.5');
const cloudSizes = process.argv.includes('--nominal') ? 'nominal' : 'half-peak';
// --varied: the same scenes with other feature shapes (mura-scenes.ts varyShape: flat-topped spots,
// clouds of 1-6 lobes, Gaussian and flat-topped bands, bands ending inside the panel)
const varied = process.argv.includes('--varied');
// --lines: other scenes, drawn from spots, clouds, bands and lines 0.3-3 mm wide (Gaussian cross-profile);
// lines narrower than two pixels of the analysed map are tallied apart (their figures are bounds)
const withLines = process.argv.includes('--lines');
// --edges: the same scenes with the features moved against the panel's edges and into its corners
// (mura-scenes.ts toEdges)
const edges = process.argv.includes('--edges');
// --elliptic: the same scenes with the spots and clouds stretched into ellipses of aspect 1-3 at any
// angle, keeping their area (mura-scenes.ts toEllipses)
const elliptic = process.argv.includes('--elliptic');
// --stacked, --stacked=other: the same scenes with a spot added on the first cloud of each, of its
// polarity or the other (mura-scenes.ts addStackedSpot)
const stackedArg = process.argv.find((a) => a === '--stacked' || a.startsWith('--stacked='));
const stacked: false | 'same' | 'other' = !stackedArg ? false : stackedArg === '--stacked' ? 'same' : stackedArg === '--stacked=other' ? 'other' : false;
if (stackedArg && !stacked) throw new Error('--stacked= takes other (or nothing: a spot of the cloud\'s polarity)');
// --smooth=steep|hump: the gray and clean scenes with other smooth variation (mura-scenes.ts otherSmooth:
// a plateau falling steeply into the corners, or a broad rise or hollow)
const smoothArg = process.argv.find((a) => a.startsWith('--smooth='));
const smooth = smoothArg ? smoothArg.slice('--smooth='.length) : null;
if (smooth !== null && smooth !== 'steep' && smooth !== 'hump') throw new Error('--smooth= takes steep or hump');
// --exposure=P: the gray and clean fields exposed so the pattern's centre is at P of full scale, linear
// (the generator's scenes expose for a white field at 0.5-0.85, which puts 50 % gray at about 0.1-0.2,
// code 90-125 of 255; one who exposes each field for itself puts gray near the top, one who keeps the
// white field's exposure for a dimmer panel lower)
const exposureArg = process.argv.find((a) => a.startsWith('--exposure='));
const grayExposure = exposureArg ? Number(exposureArg.slice('--exposure='.length)) : null;
if (grayExposure !== null && !(grayExposure > 0 && grayExposure < 1)) throw new Error('--exposure=P needs a fraction of full scale between 0 and 1, e.g. --exposure=0.5');
const withSmooth = (spec: PhotoSpec): PhotoSpec => {
  if (smooth) otherSmooth(spec, smooth as 'steep' | 'hump');
  if (grayExposure !== null) spec.exposure = { patternCentre: grayExposure };
  return spec;
};
// --glow=weak: black fields whose glows are 1.15-2 x the field at their edge (15-100 %) instead of the
// generator's 2-20 x: mild bleed and clouding, as a panel near its limit shows
const glowArg = process.argv.find((a) => a.startsWith('--glow='));
const glow = glowArg ? glowArg.slice('--glow='.length) : null;
if (glow !== null && glow !== 'weak') throw new Error('--glow= takes weak');
const glowFactor: [number, number] | null = glow === 'weak' ? [1.15, 2] : null;
// --panel=WxH: another panel size in mm (default the generator's 597.9 x 336.3, a 27-inch 16:9 monitor)
const panelArg = process.argv.find((a) => a.startsWith('--panel='));
const panelMm = panelArg ? (([w, h]) => ({ width: w, height: h }))(panelArg.slice('--panel='.length).split('x').map(Number)) : null;
if (panelMm && !(panelMm.width > 0 && panelMm.height > 0)) throw new Error('--panel=WxH needs two sizes in mm, e.g. --panel=708.5x398.5');
const dir = join(
  '.cache',
  (process.argv.includes('--nominal') ? 'mura-accuracy-nominal' : 'mura-accuracy') +
    (panelMm ? `-panel-${panelMm.width}x${panelMm.height}-${width}x${height}` : '') +
    // another photo size in its own folder too (the cached photos are reused by name)
    (!panelMm && (width !== 2400 || height !== 1600) ? `-${width}x${height}` : '') +
    (distortion ? `-distortion-${distortion}` : '') +
    (noNoise ? '-no-noise' : '') +
    (fullWell !== null ? `-full-well-${fullWell}` : '') +
    (mosaic ? '-mosaic' : '') +
    (denoise ? `-denoise-${denoise.strength}-${denoise.sigmaPx}` : '') +
    (sharpen ? `-sharpen-${sharpen.amount}-${sharpen.sigmaPx}` : '') +
    (varied ? '-varied' : '') +
    (withLines ? '-lines' : '') +
    (edges ? '-edges' : '') +
    (elliptic ? '-elliptic' : '') +
    (stacked === 'same' ? '-stacked' : stacked === 'other' ? '-stacked-other' : '') +
    (smooth ? `-smooth-${smooth}` : '') +
    (grayExposure !== null ? `-exposure-${grayExposure}` : '') +
    (glow ? `-glow-${glow}` : ''),
);
mkdirSync(dir, { recursive: true });

interface Measured {
  truth: FeatureTruth[];
  mura: MuraResult | null;
  error: string | null;
  ms: number;
  rssMb: number;
}

async function measure(name: string, spec: PhotoSpec): Promise<Measured> {
  if (distortion) spec.camera.distortion = distortion;
  if (noNoise) spec.noise = null;
  else if (fullWell !== null) spec.noise = { ...spec.noise, fullWell };
  if (mosaic) spec.camera.mosaic = {};
  if (sharpen) spec.output = { ...spec.output, sharpen };
  if (denoise) spec.output = { ...spec.output, denoise };
  // rendered photos are kept (with their truth) and reused: the scenes are deterministic from the seed
  const cached = join(dir, `${name}.jpg`);
  const cachedTruth = join(dir, `${name}.truth.json`);
  let file: string;
  let truth: PhotoTruth;
  const reused = !process.argv.includes('--render') && existsSync(cached) && existsSync(cachedTruth) ? (JSON.parse(readFileSync(cachedTruth, 'utf8')) as PhotoTruth) : null;
  // a cached photo of another size (a folder from before sizes had their own) is drawn again
  if (reused && reused.image.width === spec.camera.width && reused.image.height === spec.camera.height) {
    file = cached;
    truth = reused;
  } else {
    const r = await renderPhoto(spec);
    file = join(dir, `${name}.${r.ext}`);
    truth = r.truth;
    writeFileSync(file, r.buffer);
    writeFileSync(join(dir, `${name}.truth.json`), JSON.stringify(truth));
  }
  const t0 = Date.now();
  let peakRss = process.memoryUsage().rss;
  const timer = setInterval(() => {
    peakRss = Math.max(peakRss, process.memoryUsage().rss);
  }, 50);
  const m = await measurePhoto(file, {
    ...DEFAULT_MEASURE_OPTIONS,
    pattern: spec.panel.pattern,
    patternLevel: spec.panel.pattern === 'gray' ? 50 : null,
    panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
    grid: { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
    corners: distortion || foundCorners ? null : truth.corners,
    falloff: noFalloff ? { kind: 'none' } : { kind: 'cos4', focal35mm: spec.camera.focal35 },
    // the generator renders no angular emission unless asked; the viewing-angle gate is about that
    quality: { ...DEFAULT_QUALITY_LIMITS, maxViewAngleDeg: 90, warnViewAngleDeg: 90 },
    mura: true,
    muraOptions: process.env.MURA_OPTS ? JSON.parse(process.env.MURA_OPTS) : {},
    artifacts: false,
  });
  clearInterval(timer);
  peakRss = Math.max(peakRss, process.memoryUsage().rss);
  return {
    truth: truth.features.filter((f) => f.visible),
    mura: m.result.mura,
    error: m.result.status === 'ok' ? null : m.result.error,
    ms: Date.now() - t0,
    rssMb: peakRss / 1e6,
  };
}

/** Does a reported blob stand for this truth part? Same polarity and place. */
function matches(b: Blob, t: FeatureTruth, W: number, H: number): boolean {
  if (b.polarity !== t.polarity) return false;
  if (t.kind === 'band' || t.kind === 'line') {
    const vertical = t.detail.axis === 'vertical';
    const across = vertical ? Math.abs(b.xMm - t.xMm) : Math.abs(b.yMm - t.yMm);
    const w = Number(t.detail.widthMm);
    // the blob must lie on the band and run along it
    const along = vertical ? (b.bbox[3] - b.bbox[1]) * H : (b.bbox[2] - b.bbox[0]) * W;
    return across <= Math.max(5, w / 2) && along >= 0.3 * (vertical ? H : W);
  }
  const r = Math.sqrt(t.areaMm2 / Math.PI);
  return Math.hypot(b.xMm - t.xMm, b.yMm - t.yMm) <= Math.max(10, 0.5 * r);
}

/** No other visible feature's half-peak bounding box meets this one's. */
function standsAlone(t: FeatureTruth, all: FeatureTruth[]): boolean {
  const [a0, b0, a1, b1] = t.bbox;
  return all.every((o) => o === t || o.bbox[2] < a0 || o.bbox[0] > a1 || o.bbox[3] < b0 || o.bbox[1] > b1);
}

/**
 * Whether a truth part shows in the photo as the truth describes it alone. The truth's contrast is the
 * part's own (100 c phi against the feature-free field); in the scene every visible feature adds to the
 * field's cofactor F = 1 + sum c phi, so a part under another of the other sign can vanish from the
 * photo. Compared here: the part's local contrast, the mean over its own half-peak region
 * (|100 c phi| >= half its peak, the truth's convention) less the mean over a ring around it (where its
 * own contrast is 10-30 % of its peak), once for the part alone and once with the features of the
 * other sign added (same-sign neighbours only merge with it, which the pairing and the tallies judge).
 * Local, so that a spot on a larger cloud of the other sign, which the photo shows plainly, does not
 * count. Cancelled: the local contrast with them is under half the part's own, or of the other sign.
 * Sampled on a lattice of 300 x 300 points over the part's support box.
 */
function compositeOf(panel: PanelModel, t: FeatureTruth): { own: number; composite: number; cancelled: boolean } | null {
  const part = panel.visibleParts.find((q) => q.featureIndex === t.featureIndex && q.part === t.part);
  if (!part) return null;
  const [x0, y0, x1, y1] = part.box;
  const others = panel.visibleParts.filter((q) => q !== part && Math.sign(q.c) === -Math.sign(part.c));
  const withOthers = (x: number, y: number, own: number): number => {
    let c = own;
    for (const q of others) {
      const b = q.box;
      if (x >= b[0] && x <= b[2] && y >= b[1] && y <= b[3]) c += 100 * q.c * q.phi(x, y);
    }
    // the generator clamps the field's cofactor at 0
    return Math.max(c, -100);
  };
  const n = 300;
  const peak = Math.abs(t.peakContrastPct);
  let ownIn = 0;
  let compIn = 0;
  let nIn = 0;
  let ownRing = 0;
  let compRing = 0;
  let nRing = 0;
  for (let j = 0; j < n; j++) {
    const y = y0 + ((j + 0.5) * (y1 - y0)) / n;
    for (let i = 0; i < n; i++) {
      const x = x0 + ((i + 0.5) * (x1 - x0)) / n;
      const c = 100 * part.c * part.phi(x, y);
      const a = Math.abs(c);
      if (c !== 0 && a >= 0.5 * peak) {
        ownIn += c;
        compIn += withOthers(x, y, c);
        nIn++;
      } else if (a >= 0.1 * peak && a <= 0.3 * peak) {
        ownRing += c;
        compRing += withOthers(x, y, c);
        nRing++;
      }
    }
  }
  if (nIn === 0) return null;
  const own = ownIn / nIn - (nRing ? ownRing / nRing : 0);
  const composite = compIn / nIn - (nRing ? compRing / nRing : 0);
  return { own, composite, cancelled: Math.sign(composite) !== Math.sign(own) || Math.abs(composite) < 0.5 * Math.abs(own) };
}

interface Pair {
  t: FeatureTruth;
  b: Blob | null;
}

/** How far a matching blob lies from the truth part: centre offset over the part's radius (half-width
 *  across a band) plus the log ratio of the areas. */
function misfit(b: Blob, t: FeatureTruth): number {
  const area = Math.abs(Math.log(Math.max(b.areaMm2, 1e-6) / Math.max(t.areaMm2, 1e-6)));
  if (t.kind === 'band' || t.kind === 'line') {
    const across = t.detail.axis === 'vertical' ? Math.abs(b.xMm - t.xMm) : Math.abs(b.yMm - t.yMm);
    return across / Math.max(2.5, Number(t.detail.widthMm) / 2) + area;
  }
  return Math.hypot(b.xMm - t.xMm, b.yMm - t.yMm) / Math.max(5, Math.sqrt(t.areaMm2 / Math.PI)) + area;
}

/**
 * Each truth part gets at most one blob and each blob at most one part: of all such pairings, the one
 * with the most pairs; of those, the one with the most pairs of the same kind; then the least total
 * misfit (exhaustive: a photo has at most four parts and a few blobs near each). Whether a part is
 * found does not depend on kinds; the kind only decides which of two findings that both lie on two
 * parts goes to which (a band's finding to the band, not to the cloud it crosses). A greedy pairing -
 * strongest part first takes its strongest blob - could hand one feature's finding to a neighbour it
 * also lies on and leave the first unpaired.
 */
function pairUp(truth: FeatureTruth[], blobs: Blob[], W: number, H: number): { pairs: Pair[]; extra: Blob[] } {
  const options = truth.map((t) => blobs.filter((b) => matches(b, t, W, H)).map((b) => ({ b, same: b.kind === t.kind ? 1 : 0, cost: misfit(b, t) })));
  let best: { n: number; same: number; cost: number; pick: (Blob | null)[] } = { n: -1, same: -1, cost: Infinity, pick: [] };
  const pick: (Blob | null)[] = [];
  const taken = new Set<Blob>();
  const walk = (k: number, n: number, same: number, cost: number): void => {
    if (k === truth.length) {
      const better = n !== best.n ? n > best.n : same !== best.same ? same > best.same : cost < best.cost;
      if (better) best = { n, same, cost, pick: [...pick] };
      return;
    }
    for (const o of options[k]) {
      if (taken.has(o.b)) continue;
      taken.add(o.b);
      pick.push(o.b);
      walk(k + 1, n + 1, same + o.same, cost + o.cost);
      pick.pop();
      taken.delete(o.b);
    }
    pick.push(null);
    walk(k + 1, n, same, cost);
    pick.pop();
  };
  walk(0, 0, 0, 0);
  const used = new Set(best.pick.filter((b): b is Blob => b !== null));
  const pairs = truth.map((t, k) => ({ t, b: best.pick[k] ?? null }));
  return { pairs, extra: blobs.filter((b) => !used.has(b)) };
}

const pct = (a: number, b: number): string => (b > 0 ? `${((100 * a) / b).toFixed(1)} % (${a}/${b})` : 'n/a');
const quant = (xs: number[], q: number): number => {
  const s = [...xs].sort((a, b) => a - b);
  return s.length ? s[Math.min(s.length - 1, Math.floor(q * s.length))] : NaN;
};

async function main(): Promise<void> {
  const summary: Record<string, unknown> = {};
  const lines: string[] = [];
  const log = (s: string): void => {
    lines.push(s);
    console.log(s);
  };

  // 1. gray fields with features
  let recallN = 0;
  let recallHit = 0;
  let kindN = 0;
  let kindOk = 0;
  let accN = 0;
  let contrastOk = 0;
  let areaOk = 0;
  // the same for features standing alone: no other feature's half-peak box touches theirs
  let isoN = 0;
  let isoContrastOk = 0;
  let isoAreaOk = 0;
  const cErr: number[] = [];
  // lines narrower than the map resolves (found ones): marked so, and their figures no more than the truth's
  let thinN = 0;
  let thinMarked = 0;
  let thinBounds = 0;
  const thinRatio: number[] = [];
  const aErr: number[] = [];
  let falseSemu1 = 0;
  const unmatched: string[] = [];
  const misses: string[] = [];
  const wrongKinds: string[] = [];
  const badAcc: string[] = [];
  // every feature in the contrast and area tallies, for looking at the errors by kind and size (summary.json)
  const accuracy: { seed: number; kind: string; sizeMm: number; semu: number; contrastErr: number; areaErr: number; alone: boolean }[] = [];
  const errors: string[] = [];
  const ms: number[] = [];
  // features another one of the other sign cancels in the photo (compositeOf), and the tallies without them
  let cancelledN = 0;
  let recallNc = 0;
  let recallHitNc = 0;
  let accNc = 0;
  let contrastOkNc = 0;
  let areaOkNc = 0;
  for (let k = 0; k < nGray; k++) {
    const seed = 1000 + seedOffset + k;
    const spec = withSmooth(graySpec(seed, false, width, height, cloudSizes, panelMm, varied, withLines, edges, elliptic, stacked));
    const r = await measure(`gray-${seed}`, spec);
    ms.push(r.ms);
    if (!r.mura) {
      errors.push(`gray ${seed}: ${r.error}`);
      continue;
    }
    const { pairs, extra } = pairUp(r.truth, r.mura.blobs, spec.panel.widthMm, spec.panel.heightMm);
    const panel = buildPanel(spec.panel);
    falseSemu1 += extra.filter((b) => b.semu >= 1).length;
    for (const b of extra.filter((x) => x.semu >= 1)) {
      unmatched.push(`seed ${seed} ${b.kind} at (${b.u.toFixed(3)}, ${b.v.toFixed(3)}) C ${b.contrastPct.toFixed(2)} % A ${b.areaMm2.toFixed(1)} mm² SEMU ${b.semu.toFixed(2)}`);
    }
    for (const { t, b } of pairs) {
      const comp = compositeOf(panel, t);
      const cancelled = comp?.cancelled ?? false;
      const tag =
        `seed ${seed} ${t.kind} ${t.polarity} ${t.kind === 'band' || t.kind === 'line' ? `w ${Number(t.detail.widthMm).toFixed(t.kind === 'line' ? 1 : 0)} mm` : `d ${(2 * Math.sqrt(t.areaMm2 / Math.PI)).toFixed(0)} mm`} C ${t.contrastPct.toFixed(2)} % SEMU ${t.semu.toFixed(2)}` +
        (varied ? ` [${t.detail.profile ?? (t.kind === 'cloud' ? `${t.detail.lobes} lobes` : t.kind === 'band' ? 'cosine' : '')}]` : '') +
        (cancelled ? ` [cancelled: local contrast ${comp!.composite.toFixed(2)} % with the features of the other sign, ${comp!.own.toFixed(2)} % alone]` : '');
      if (t.semu >= 1.5) {
        recallN++;
        if (b) recallHit++;
        else misses.push(tag);
        if (cancelled) cancelledN++;
        else {
          recallNc++;
          if (b) recallHitNc++;
        }
      }
      if (b) {
        kindN++;
        if (b.kind === t.kind) kindOk++;
        else wrongKinds.push(`${tag} -> ${b.kind} (${JSON.stringify(b.detail)})`);
        const unresolved = t.kind === 'line' && Number(t.detail.widthMm) < (r.mura.resolvedFromMm ?? 0);
        if (unresolved) {
          // narrower than the analysed map resolves: its figures are bounds (Blob detail.belowResolution)
          thinN++;
          if (b.detail.belowResolution !== undefined) thinMarked++;
          if (Math.abs(b.contrastPct) <= Math.abs(t.contrastPct) && b.semu <= t.semu) thinBounds++;
          else badAcc.push(`${tag}${standsAlone(t, r.truth) ? '' : ' (overlaps another feature)'}: narrower than resolved, measured C ${b.contrastPct.toFixed(2)}, SEMU ${b.semu.toFixed(2)} (beyond the truth's)`);
          thinRatio.push(b.contrastPct / t.contrastPct);
        } else if (t.semu >= 2) {
          accN++;
          const ce = (b.contrastPct - t.contrastPct) / Math.abs(t.contrastPct);
          const ae = (b.areaMm2 - t.areaMm2) / t.areaMm2;
          cErr.push(ce);
          aErr.push(ae);
          accuracy.push({
            seed,
            kind: t.kind,
            sizeMm: Math.round(t.kind === 'band' || t.kind === 'line' ? Number(t.detail.widthMm) : 2 * Math.sqrt(t.areaMm2 / Math.PI)),
            semu: Math.round(100 * t.semu) / 100,
            contrastErr: Math.round(1000 * ce) / 1000,
            areaErr: Math.round(1000 * ae) / 1000,
            alone: standsAlone(t, r.truth),
          });
          if (Math.abs(ce) <= 0.25) contrastOk++;
          if (Math.abs(ae) <= 0.3) areaOk++;
          if (!cancelled) {
            accNc++;
            if (Math.abs(ce) <= 0.25) contrastOkNc++;
            if (Math.abs(ae) <= 0.3) areaOkNc++;
          }
          if (standsAlone(t, r.truth)) {
            isoN++;
            if (Math.abs(ce) <= 0.25) isoContrastOk++;
            if (Math.abs(ae) <= 0.3) isoAreaOk++;
          }
          if (Math.abs(ce) > 0.25 || Math.abs(ae) > 0.3) {
            badAcc.push(`${tag}${standsAlone(t, r.truth) ? '' : ' (overlaps another feature)'}: measured C ${b.contrastPct.toFixed(2)} (${(100 * ce).toFixed(0)} %), area ${b.areaMm2.toFixed(0)} vs ${t.areaMm2.toFixed(0)} (${(100 * ae).toFixed(0)} %)`);
          }
        }
      }
    }
    process.stderr.write(`gray ${k + 1}/${nGray}\r`);
  }
  log(`gray fields: ${nGray} photos, ${width}x${height}, cloud sizes ${cloudSizes}, median ${quant(ms, 0.5)} ms per photo (pipeline)`);
  log(`  recall, SEMU >= 1.5:       ${pct(recallHit, recallN)}   (acceptance >= 95 %)`);
  log(`  kind right, found:         ${pct(kindOk, kindN)}   (acceptance >= 90 %)`);
  log(`  contrast within 25 %, SEMU >= 2: ${pct(contrastOk, accN)}; error median ${(100 * quant(cErr, 0.5)).toFixed(1)} %, 5-95 % ${(100 * quant(cErr, 0.05)).toFixed(1)} .. ${(100 * quant(cErr, 0.95)).toFixed(1)} %`);
  log(`  area within 30 %, SEMU >= 2:     ${pct(areaOk, accN)}; error median ${(100 * quant(aErr, 0.5)).toFixed(1)} %, 5-95 % ${(100 * quant(aErr, 0.05)).toFixed(1)} .. ${(100 * quant(aErr, 0.95)).toFixed(1)} %`);
  log(`  the same for features standing alone (no other feature's half-peak box touches theirs): contrast ${pct(isoContrastOk, isoN)}, area ${pct(isoAreaOk, isoN)}`);
  log(
    `  without the ${cancelledN} feature(s) of SEMU >= 1.5 another feature of the other sign cancels (local contrast with those features under half their own): ` +
      `recall ${pct(recallHitNc, recallNc)}, contrast ${pct(contrastOkNc, accNc)}, area ${pct(areaOkNc, accNc)} (SEMU >= 2)`,
  );
  if (withLines) {
    log(
      `  lines narrower than the map resolves, found: ${thinN}; marked belowResolution ${pct(thinMarked, thinN)}; contrast and SEMU no more than the truth's ${pct(thinBounds, thinN)}; ` +
        `contrast found / true median ${quant(thinRatio, 0.5).toFixed(2)}, range ${quant(thinRatio, 0).toFixed(2)} .. ${quant(thinRatio, 0.999).toFixed(2)} (not in the contrast and area tallies above)`,
    );
  }
  log(`  unmatched findings of SEMU >= 1: ${falseSemu1} (${(falseSemu1 / Math.max(1, nGray)).toFixed(2)} per photo)`);
  for (const u of unmatched) log(`  unmatched: ${u}`);
  for (const m of misses) log(`  missed: ${m}`);
  for (const m of wrongKinds) log(`  kind: ${m}`);
  for (const m of badAcc) log(`  accuracy: ${m}`);
  for (const e of errors) log(`  error: ${e}`);
  summary.gray = { photos: nGray, recallN, recallHit, kindN, kindOk, accN, contrastOk, areaOk, isoN, isoContrastOk, isoAreaOk, falseSemu1, misses, wrongKinds, badAcc, accuracy, errors };

  // 2. clean gray fields
  let cleanFalse = 0;
  let cleanFalseAny = 0;
  const cleanMax: number[] = [];
  const cleanList: string[] = [];
  for (let k = 0; k < nClean; k++) {
    const seed = 5000 + seedOffset + k;
    const r = await measure(`clean-${seed}`, withSmooth(graySpec(seed, true, width, height, 'half-peak', panelMm)));
    if (!r.mura) {
      cleanList.push(`clean ${seed}: ${r.error}`);
      continue;
    }
    const f = r.mura.blobs.filter((b) => b.semu >= 1);
    cleanFalse += f.length;
    cleanFalseAny += r.mura.blobs.length;
    cleanMax.push(r.mura.maxSemu);
    for (const b of f) cleanList.push(`clean ${seed}: ${b.kind} ${b.polarity} at (${b.xMm}, ${b.yMm}) C ${b.contrastPct} % A ${b.areaMm2} mm² SEMU ${b.semu}`);
    process.stderr.write(`clean ${k + 1}/${nClean}\r`);
  }
  log(`clean gray fields: ${nClean} photos`);
  log(`  findings of SEMU >= 1: ${cleanFalse} (${(cleanFalse / Math.max(1, nClean)).toFixed(2)} per photo; acceptance <= 0.2); all reported (SEMU >= 0.5): ${cleanFalseAny}`);
  log(`  largest SEMU per photo: median ${quant(cleanMax, 0.5).toFixed(2)}, max ${quant(cleanMax, 1).toFixed(2)}`);
  for (const m of cleanList) log(`  ${m}`);
  summary.clean = { photos: nClean, cleanFalse, cleanFalseAny, cleanList };

  // 3. black fields with glow
  let glowN = 0;
  let glowOk = 0;
  let blackExtra = 0;
  const glowList: string[] = [];
  const glowPeakErr: number[] = [];
  for (let k = 0; k < nBlack; k++) {
    const seed = 8000 + seedOffset + k;
    const spec = blackSpec(seed, width, height, panelMm, glowFactor);
    const r = await measure(`black-${seed}`, spec);
    if (!r.mura) {
      glowList.push(`black ${seed}: ${r.error}`);
      continue;
    }
    const used = new Set<Blob>();
    for (const t of r.truth) {
      glowN++;
      const where = t.kind === 'edge-glow' ? t.detail.edge : t.detail.corner;
      const b = r.mura.blobs.find((x) => !used.has(x) && x.kind === t.kind && (x.detail.edge ?? x.detail.corner) === where);
      if (b) {
        used.add(b);
        glowOk++;
        const e = (100 * (b.peakContrastPct - t.peakContrastPct)) / t.peakContrastPct;
        glowPeakErr.push(e);
        if (Math.abs(e) > 25) glowList.push(`black ${seed}: ${t.kind} ${where} peak ${t.peakContrastPct.toFixed(0)} % reported ${b.peakContrastPct.toFixed(0)} % (${e.toFixed(0)} %)`);
      } else {
        const seen = r.mura.blobs.map((x) => `${x.kind} ${x.detail.edge ?? x.detail.corner ?? ''} (${x.xMm}, ${x.yMm})`).join('; ');
        glowList.push(`black ${seed}: ${t.kind} ${where} (decay ${t.detail.decayMm} mm, C ${t.contrastPct.toFixed(0)} %) not found as such; reported: ${seen || 'nothing'}`);
      }
    }
    const extra = r.mura.blobs.filter((x) => !used.has(x) && x.semu >= 1);
    blackExtra += extra.length;
    for (const x of extra) glowList.push(`black ${seed}: other finding ${x.kind} ${x.detail.edge ?? x.detail.corner ?? ''} at (${x.xMm}, ${x.yMm}) C ${x.contrastPct} % SEMU ${x.semu}`);
    process.stderr.write(`black ${k + 1}/${nBlack}\r`);
  }
  log(`black fields with glow: ${nBlack} photos`);
  log(`  glows found as glow on the right edge/corner: ${pct(glowOk, glowN)}`);
  if (glowPeakErr.length > 0) {
    const q = (p: number): string => quant(glowPeakErr, p).toFixed(1);
    log(`  peak contrast of the glows found, error: median ${q(0.5)} %, 5-95 % ${q(0.05)} .. ${q(0.95)} %; within 25 %: ${pct(glowPeakErr.filter((e) => Math.abs(e) <= 25).length, glowPeakErr.length)}`);
  }
  log(`  other findings of SEMU >= 1: ${blackExtra}`);
  for (const m of glowList) log(`  ${m}`);
  summary.black = { photos: nBlack, glowN, glowOk, blackExtra, glowList };

  // 4. a 25-megapixel photo
  if (big) {
    const spec = graySpec(9001, false, width, height);
    spec.camera.width = 6120;
    spec.camera.height = 4080;
    const r = await measure('big-9001', spec);
    log(`25 MP photo (6120x4080): ${r.mura ? `${r.mura.blobs.length} findings` : r.error}; ${r.ms} ms; peak RSS ${r.rssMb.toFixed(0)} MB`);
    summary.big = { ms: r.ms, rssMb: r.rssMb, findings: r.mura?.blobs.length ?? null };
  }
  writeFileSync(join(dir, 'summary.json'), JSON.stringify(summary, null, 1));
  writeFileSync(join(dir, 'summary.txt'), lines.join('\n') + '\n');
}

main().catch((e) => {
  console.error(e);
  process.exit(1);
});
