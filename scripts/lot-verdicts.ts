// Lot study: a generated lot of panels x (white, gray50, black) with known truth, inspected by the
// command, every verdict compared with the verdict the same criteria give on the truth.
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/lot-verdicts.js [--panels 50] [--size 1600x1200]
//       [--out reports/lot-verdicts] [--jobs 2] [--lens none|flat] [--bad 5] [--criteria FILE] [--pdf]
//       [--regenerate] [--reuse-run] [--no-mura] [--lot DIR] [--seed 50117]
//
// What it does:
//  1. plans a lot with a realistic mix (ordinary panels; corner drop-off around the uniformity limit;
//     colour tint around the Δu'v' limit; luminance mura of known SEMU on white and gray; black fields
//     with and without edge or corner glow; clouding on black) and renders it with fixtures/generator:
//     one random pose per panel (kept for its three photos), JPEG, noise, slight lens blur. With
//     --lens none (the default) the camera has no lens falloff at all (no cos⁴, no vignetting), so the
//     study isolates panel finding, rectification, grid and mura; with --lens flat the camera vignettes
//     (cos⁴ and a radial term, as the demo lot's camera) and three flat frames go to --flat;
//  2. adds --bad extra panels, each carrying one corrupt or unusable file (truncated JPEG, empty file,
//     text with a photo's name, a photo with no panel, a clipped white photo);
//  3. computes the truth verdict: judgePanel (lib/judge) on PhotoResult-shaped records built from the
//     generator's truth (true 9-point grid and uniformity of the criteria's layout, visible features as
//     blobs with their true area, contrast and SEMU);
//  4. runs `evenfield inspect` on the lot and compares verdicts panel by panel; a disagreement is
//     borderline when every figure that judged differently lies, in truth, within the criteria's
//     `uncertainty` allowance of its limit, otherwise real; every real one is listed with its figure,
//     truth and measured value;
//  5. checks the unusable files: each named on one `error:` line, its panel `error`, every other panel
//     judged, exit status 2.
// Writes <out>/report.md and <out>/comparison.json; prints the report.
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { join, resolve, basename } from 'node:path';
import sharp from 'sharp';
import { stringify as stringifyYaml } from 'yaml';
import { fitInFrame, renderFlatFrame, renderPhoto, Rng } from '../fixtures/generator/index.js';
import type { CameraSpec, ColourVariation, FeatureSpec, LuminanceTerm, PhotoSpec, PhotoTruth } from '../fixtures/generator/index.js';
import { judgePanel, loadCriteria } from '../lib/judge/index.js';
import type { Criteria, JudgedReason } from '../lib/judge/index.js';
import type { Blob, BlobKind, GridPoint, PanelResult, Pattern, PhotoResult, Verdict } from '../lib/types.js';

// ---------------------------------------------------------------------------------------------------
// arguments

interface Args {
  panels: number;
  width: number;
  height: number;
  out: string;
  jobs: number;
  lens: 'none' | 'flat';
  bad: number;
  criteria: string | null;
  pdf: boolean;
  regenerate: boolean;
  /** compare an earlier run of the command in <out>/run again instead of running it */
  reuseRun: boolean;
  /** pass --no-mura to the command (with criteria that set no mura limits) */
  mura: boolean;
  /** folder of the generated lot (default <out>/lot), so several studies can share one lot */
  lotDir: string | null;
  seed: number;
}

function parseArgs(argv: string[]): Args {
  const a: Args = { panels: 50, width: 1600, height: 1200, out: join('reports', 'lot-verdicts'), jobs: 2, lens: 'none', bad: 5, criteria: null, pdf: false, regenerate: false, reuseRun: false, mura: true, lotDir: null, seed: 50117 };
  for (let i = 0; i < argv.length; i++) {
    const v = argv[i + 1];
    switch (argv[i]) {
      case '--panels':
        a.panels = Number(v);
        i++;
        break;
      case '--size': {
        const [w, h] = v.split('x').map(Number);
        a.width = w;
        a.height = h;
        i++;
        break;
      }
      case '--out':
        a.out = v;
        i++;
        break;
      case '--jobs':
        a.jobs = Number(v);
        i++;
        break;
      case '--lens':
        if (v !== 'none' && v !== 'flat') throw new Error('--lens must be none or flat');
        a.lens = v;
        i++;
        break;
      case '--bad':
        a.bad = Number(v);
        i++;
        break;
      case '--criteria':
        a.criteria = v;
        i++;
        break;
      case '--seed':
        a.seed = Number(v);
        i++;
        break;
      case '--pdf':
        a.pdf = true;
        break;
      case '--regenerate':
        a.regenerate = true;
        break;
      case '--reuse-run':
        a.reuseRun = true;
        break;
      case '--no-mura':
        a.mura = false;
        break;
      case '--lot':
        a.lotDir = v;
        i++;
        break;
      default:
        throw new Error(`unknown argument ${argv[i]}`);
    }
  }
  if (!(a.panels >= 1) || !(a.bad >= 0 && a.bad <= 5)) throw new Error('--panels >= 1, --bad 0..5');
  return a;
}

// ---------------------------------------------------------------------------------------------------
// the lot plan

const WIDTH_MM = 597.9;
const HEIGHT_MM = 336.3;

type Category = 'ordinary' | 'drop-off' | 'tint' | 'mura' | 'black-glow' | 'black-cloud';

interface PanelPlan {
  id: string;
  category: Category;
  luminance: LuminanceTerm[];
  colour: ColourVariation;
  features: FeatureSpec[];
  camera: CameraSpec;
  /** what was planted, in words */
  planted: string;
}

/** Share of each category in the lot (a realistic incoming lot: most panels ordinary). */
const MIX: [Category, number][] = [
  ['ordinary', 13],
  ['drop-off', 9],
  ['tint', 7],
  ['mura', 11],
  ['black-glow', 7],
  ['black-cloud', 3],
];

function planLot(n: number, seed: number, lens: Args['lens'], width: number, height: number): PanelPlan[] {
  const rng = new Rng(seed);
  const r = (a: number, b: number) => rng.uniform(a, b);
  const sign = () => (rng.next() < 0.5 ? -1 : 1);
  const total = MIX.reduce((s, [, k]) => s + k, 0);
  // categories in proportion, then shuffled
  const cats: Category[] = [];
  for (const [c, k] of MIX) for (let i = 0; i < Math.round((k * n) / total); i++) cats.push(c);
  while (cats.length < n) cats.push('ordinary');
  cats.length = n;
  for (let i = cats.length - 1; i > 0; i--) {
    const j = rng.int(0, i);
    [cats[i], cats[j]] = [cats[j], cats[i]];
  }
  const ordinaryLum = (): LuminanceTerm[] => [
    { kind: 'radial', loss: r(0.05, 0.25), power: r(1.5, 2.5), u0: r(0.45, 0.55), v0: r(0.45, 0.55) },
    { kind: 'linear', gx: r(-0.03, 0.03), gy: r(-0.03, 0.03) },
  ];
  const ordinaryColour = (): ColourVariation => ({ r: { x: r(-0.01, 0.01), y: r(-0.01, 0.01) }, b: { x: r(-0.01, 0.01), radial: r(-0.01, 0.01) } });
  const faintBlackCloud = (): FeatureSpec => ({ kind: 'cloud', u: r(0.3, 0.7), v: r(0.3, 0.7), sizeMm: r(100, 180), contrastPct: r(0.6, 1.5), seed: rng.int(1, 1e6), patterns: ['black'] });
  const plans: PanelPlan[] = [];
  for (let i = 0; i < n; i++) {
    const category = cats[i];
    let luminance = ordinaryLum();
    let colour = ordinaryColour();
    const features: FeatureSpec[] = [];
    let planted = 'ordinary variation';
    switch (category) {
      case 'ordinary':
        if (rng.next() < 0.6) {
          features.push(faintBlackCloud());
          planted = 'ordinary variation, faint clouding on black';
        }
        break;
      case 'drop-off': {
        const loss = r(0.35, 0.75);
        const power = r(1.5, 2.5);
        luminance = [{ kind: 'radial', loss, power, u0: r(0.47, 0.53), v0: r(0.47, 0.53) }, { kind: 'linear', gx: r(-0.02, 0.02), gy: r(-0.02, 0.02) }];
        planted = `corner drop-off: ${(100 * loss).toFixed(0)} % loss at the corners, power ${power.toFixed(2)}`;
        break;
      }
      case 'tint': {
        const a = r(0.08, 0.25);
        const axis = rng.next() < 0.6 ? 'x' : 'y';
        const s = sign();
        colour = axis === 'x' ? { r: { x: s * a }, b: { x: -s * a } } : { r: { y: s * a }, b: { y: -s * a } };
        planted = `colour tint: red gain ${s > 0 ? '+' : '-'}${(100 * a).toFixed(0)} % and blue the reverse at the ${axis === 'x' ? 'right' : 'bottom'} edge`;
        break;
      }
      case 'mura': {
        const kind = rng.pick(['spot', 'spot', 'cloud', 'band', 'line'] as const);
        const c = sign();
        const u = r(0.2, 0.8);
        const v = r(0.2, 0.8);
        let f: FeatureSpec;
        if (kind === 'spot') f = { kind, u, v, sizeMm: r(4, 30), contrastPct: c * r(0.8, 4) };
        else if (kind === 'cloud') f = { kind, u, v, sizeMm: r(60, 160), contrastPct: c * r(0.8, 3), seed: rng.int(1, 1e6) };
        else if (kind === 'band') f = { kind, axis: rng.pick(['horizontal', 'vertical'] as const), position: r(0.25, 0.75), widthMm: r(10, 40), contrastPct: c * r(0.7, 2.5) };
        else {
          const from = r(0, 0.4);
          f = { kind, axis: rng.pick(['horizontal', 'vertical'] as const), position: r(0.2, 0.8), widthMm: r(1, 3), contrastPct: c * r(0.5, 2.5), from, to: from + r(0.3, 0.6) };
        }
        features.push(f);
        planted = `${kind} ${c > 0 ? 'bright' : 'dark'}, ${Math.abs(f.contrastPct).toFixed(2)} % peak, on every pattern`;
        break;
      }
      case 'black-glow': {
        const factor = r(1.3, 5);
        if (rng.next() < 0.55) {
          const edge = rng.pick(['top', 'bottom', 'left', 'right'] as const);
          features.push({ kind: 'edge-glow', edge, decayMm: r(5, 25), at: r(0.2, 0.8), lengthMm: r(60, 200), contrastPct: 100 * (factor - 1), patterns: ['black'] });
          planted = `edge glow on black, ${edge} edge, ${factor.toFixed(2)}x the black level`;
        } else {
          const corner = rng.pick(['top-left', 'top-right', 'bottom-right', 'bottom-left'] as const);
          features.push({ kind: 'corner-glow', corner, decayMm: r(10, 40), contrastPct: 100 * (factor - 1), patterns: ['black'] });
          planted = `corner glow on black, ${corner}, ${factor.toFixed(2)}x the black level`;
        }
        break;
      }
      case 'black-cloud': {
        const f: FeatureSpec = { kind: 'cloud', u: r(0.3, 0.7), v: r(0.3, 0.7), sizeMm: r(100, 180), contrastPct: sign() * r(2, 6), seed: rng.int(1, 1e6), patterns: ['black'] };
        features.push(f);
        planted = `clouding on black, ${f.contrastPct.toFixed(2)} % peak`;
        break;
      }
    }
    // one tripod position per panel, kept for its three photos; with a vignetting lens the station
    // keeps one zoom setting (the flat frames' profile is for that setting only)
    const focal35 = Math.round(r(28, 50));
    const camera: CameraSpec = {
      width,
      height,
      focal35: lens === 'flat' ? 30 : focal35,
      cropFactor: 1.5,
      yawDeg: r(-10, 10),
      pitchDeg: r(-8, 8),
      rollDeg: r(-3, 3),
      fill: r(0.65, 0.8),
      shift: [r(-0.03, 0.03), r(-0.03, 0.03)],
      blurPx: 0.6,
      ...(lens === 'none' ? { cos4: false, k1: 0, k2: 0 } : { cos4: true, k1: 0.35, k2: 0.1 }),
      make: 'Fieldglass',
      model: 'FG-1 (synthetic)',
    };
    plans.push({ id: `LV-${String(i + 1).padStart(3, '0')}`, category, luminance, colour, features, camera, planted });
  }
  return plans;
}

const SHOTS: { token: string; pattern: Pattern; level?: number; iso: number; exposure: { whiteCentre?: number; patternCentre?: number } }[] = [
  { token: 'white', pattern: 'white', iso: 100, exposure: { whiteCentre: 0.75 } },
  { token: 'gray50', pattern: 'gray', level: 0.5, iso: 100, exposure: { whiteCentre: 0.75 } },
  { token: 'black', pattern: 'black', iso: 800, exposure: { patternCentre: 0.25 } },
];

function photoSpec(plan: PanelPlan, shot: (typeof SHOTS)[number], seed: number, overrides: { whiteCentre?: number } = {}): PhotoSpec {
  const spec: PhotoSpec = {
    seed,
    panel: {
      id: plan.id,
      widthMm: WIDTH_MM,
      heightMm: HEIGHT_MM,
      bezelMm: 9,
      pattern: shot.pattern,
      level: shot.level,
      whiteLuminance: 300,
      contrastRatio: 1000,
      luminance: plan.luminance,
      colour: plan.colour,
      features: plan.features,
    },
    camera: { ...plan.camera },
    exposure: { ...shot.exposure, ...overrides, fNumber: 4, iso: shot.iso },
    noise: { fullWell: (20000 * 100) / shot.iso, readNoise: 3 },
    output: { format: 'jpeg', quality: 90 },
    surround: { ambient: 0.001, spill: 0.1 },
  };
  fitInFrame(spec, 0.03);
  return spec;
}

// ---------------------------------------------------------------------------------------------------
// generation

interface BadFile {
  file: string;
  panel: string;
  what: string;
}

async function generate(a: Args, plans: PanelPlan[], lotDir: string): Promise<{ bad: BadFile[]; flats: string[] }> {
  const photos = join(lotDir, 'photos');
  const truthDir = join(lotDir, 'truth');
  const stampPath = join(lotDir, 'lot.json');
  const stamp = JSON.stringify({ panels: a.panels, width: a.width, height: a.height, lens: a.lens, bad: a.bad, seed: a.seed, plan: sha(JSON.stringify(plans)) });
  const badPath = join(lotDir, 'bad.json');
  const flatDir = join(lotDir, 'flats');
  if (!a.regenerate && existsSync(stampPath) && readFileSync(stampPath, 'utf8') === stamp && existsSync(badPath)) {
    process.stderr.write(`lot: reusing ${lotDir}\n`);
    const flats = existsSync(flatDir) ? readdirSync(flatDir).sort().map((f) => join(flatDir, f)) : [];
    return { bad: JSON.parse(readFileSync(badPath, 'utf8')) as BadFile[], flats };
  }
  rmSync(lotDir, { recursive: true, force: true });
  mkdirSync(photos, { recursive: true });
  mkdirSync(truthDir, { recursive: true });
  const t0 = performance.now();
  let k = 0;
  for (const [i, plan] of plans.entries()) {
    for (const shot of SHOTS) {
      const res = await renderPhoto(photoSpec(plan, shot, a.seed + 100 * i + k));
      const name = `${plan.id}_${shot.token}`;
      writeFileSync(join(photos, `${name}.${res.ext}`), res.buffer);
      writeFileSync(join(truthDir, `${name}.truth.json`), JSON.stringify(res.truth));
      k++;
    }
    if ((i + 1) % 10 === 0) process.stderr.write(`lot: ${i + 1}/${plans.length} panels rendered (${((performance.now() - t0) / 1000).toFixed(0)} s)\n`);
  }

  // extra panels, each with one unusable file among otherwise ordinary photos
  const badKinds: { token: string; what: string; make: (good: Buffer, spec: PhotoSpec) => Promise<Buffer | string> }[] = [
    { token: 'white', what: 'truncated JPEG (first 35 % of the bytes)', make: async (good) => good.subarray(0, Math.floor(good.length * 0.35)) },
    { token: 'gray50', what: 'empty file (0 bytes)', make: async () => Buffer.alloc(0) },
    { token: 'black', what: "text file with a photo's name", make: async () => 'this is not a photo\n' },
    {
      token: 'white',
      what: 'a photo of an even gray wall: no panel',
      make: async () => sharp({ create: { width: a.width, height: a.height, channels: 3, background: { r: 70, g: 72, b: 70 } } }).jpeg({ quality: 90 }).toBuffer(),
    },
    {
      token: 'white',
      what: 'white photo exposed 2x too long: the panel clips',
      make: async (_good, spec) => (await renderPhoto({ ...spec, exposure: { ...spec.exposure, whiteCentre: 1.5 } })).buffer,
    },
  ];
  const bad: BadFile[] = [];
  const badRng = new Rng(a.seed + 77);
  const badPlans = planLot(a.bad, a.seed + 1, a.lens, a.width, a.height).map((p, j) => ({
    ...p,
    id: `LV-X${String(j + 1).padStart(2, '0')}`,
    category: 'ordinary' as Category,
    // clean panels: nothing near a limit, so the unusable file decides the verdict
    luminance: [{ kind: 'radial', loss: badRng.uniform(0.05, 0.12), power: 2 } as LuminanceTerm],
    colour: {},
    features: [],
    planted: 'clean panel with one unusable file',
  }));
  for (const [j, plan] of badPlans.entries()) {
    const kind = badKinds[j];
    for (const shot of SHOTS) {
      const spec = photoSpec(plan, shot, a.seed + 90000 + 10 * j + SHOTS.indexOf(shot));
      const res = await renderPhoto(spec);
      const name = `${plan.id}_${shot.token}`;
      if (shot.token === kind.token) {
        const data = await kind.make(res.buffer, spec);
        const file = join(photos, `${name}.jpg`);
        writeFileSync(file, data);
        bad.push({ file, panel: plan.id, what: kind.what });
      } else {
        writeFileSync(join(photos, `${name}.${res.ext}`), res.buffer);
        writeFileSync(join(truthDir, `${name}.truth.json`), JSON.stringify(res.truth));
      }
    }
  }

  const flats: string[] = [];
  if (a.lens === 'flat') {
    mkdirSync(flatDir, { recursive: true });
    const gradients: [number, number][] = [
      [0.01, -0.005],
      [-0.015, 0.008],
      [0.004, 0.012],
    ];
    for (const [j, gradient] of gradients.entries()) {
      const cam = { ...plans[0].camera, yawDeg: 0, pitchDeg: 0, rollDeg: 0 };
      const res = await renderFlatFrame({
        seed: a.seed + 95000 + j,
        camera: cam,
        level: 0.62,
        gradient,
        noise: { fullWell: 20000, readNoise: 3 },
        output: { format: 'jpeg', quality: 90 },
        exposure: { fNumber: 4, iso: 100, exposureTimeS: 1 / 50 },
      });
      const f = join(flatDir, `flat-${j + 1}.${res.ext}`);
      writeFileSync(f, res.buffer);
      flats.push(f);
    }
  }
  writeFileSync(badPath, JSON.stringify(bad));
  writeFileSync(join(lotDir, 'plan.json'), JSON.stringify(plans.map((p) => ({ id: p.id, category: p.category, planted: p.planted })), null, 1));
  writeFileSync(stampPath, stamp);
  process.stderr.write(`lot: ${plans.length + badPlans.length} panels rendered in ${((performance.now() - t0) / 1000).toFixed(0)} s\n`);
  return { bad, flats };
}

function sha(s: string): string {
  return createHash('sha256').update(s).digest('hex').slice(0, 16);
}

// ---------------------------------------------------------------------------------------------------
// truth records

const TRUTH_KIND: Record<string, BlobKind> = {
  spot: 'spot',
  cloud: 'cloud',
  line: 'line',
  band: 'band',
  'edge-glow': 'edge-glow',
  'corner-glow': 'corner-glow',
  'hotspot-array': 'hotspot-array',
  seam: 'seam',
  tiles: 'cloud',
};

/** A PhotoResult whose figures are the generator's truth for the criteria's grid. */
function truthPhoto(truth: PhotoTruth, file: string, criteria: Criteria): PhotoResult {
  const g = criteria.grid;
  const grid = truth.grids.find(
    (t) => t.layout === g.layout && t.placement === g.placement && (g.placement === 'cells' || Math.abs((t.insetFraction ?? 0) - g.insetPct / 100) < 1e-9),
  );
  if (!grid) throw new Error(`no true grid for ${g.layout} ${g.placement}`);
  if (Math.abs(grid.spotRadiusPct - g.spotRadiusPct) > 1e-9) throw new Error(`true grid has spot radius ${grid.spotRadiusPct} %, criteria ${g.spotRadiusPct} %`);
  const points: GridPoint[] = grid.points.map((p) => ({
    index: p.index,
    u: p.u,
    v: p.v,
    xMm: p.xMm,
    yMm: p.yMm,
    Y: p.Y,
    relative: p.relative,
    uprime: p.uprime,
    vprime: p.vprime,
    duvFromCentre: p.duvFromCentre,
    pixels: 0,
  }));
  const visible = truth.features.filter((f) => f.visible && f.areaMm2 > 0).sort((x, y) => y.semu - x.semu);
  const blobs: Blob[] = visible.map((f, i) => ({
    id: i + 1,
    kind: TRUTH_KIND[f.kind] ?? 'cloud',
    polarity: f.polarity,
    u: f.u,
    v: f.v,
    xMm: f.xMm,
    yMm: f.yMm,
    bbox: f.bbox,
    areaMm2: f.areaMm2,
    contrastPct: f.contrastPct,
    peakContrastPct: f.peakContrastPct,
    semu: f.semu,
    detail: {},
  }));
  const level = truth.pattern.level;
  return {
    file,
    sha256: '',
    pattern: truth.pattern.name,
    patternLevel: truth.pattern.name === 'gray' && level !== null ? Math.round(level * 100) : null,
    status: 'ok',
    error: null,
    errorCode: null,
    decode: null,
    exposure: null,
    exposureStats: null,
    corners: truth.corners,
    geometry: null,
    falloff: null,
    grid: { layout: grid.layout, placement: grid.placement, insetPct: grid.insetFraction === null ? null : grid.insetFraction * 100, spotRadiusPct: grid.spotRadiusPct, points },
    uniformity: grid.uniformity,
    mura: { blobs, maxSemu: blobs.length ? blobs[0].semu : 0, noiseFloorPct: 0, resolvableContrastPct: {}, backgroundModel: 'truth' },
    blobs,
    warnings: [],
  };
}

// ---------------------------------------------------------------------------------------------------
// comparison

/** The criteria allowance for a judged figure, in the figure's units (null: none defined). */
function allowanceFor(figure: string, criteria: Criteria): number | null {
  const u = criteria.uncertainty;
  if (figure === 'minOverMaxPct') return u.uniformityPctPoints;
  if (figure === 'maxOverMin') return u.maxOverMin;
  if (figure === 'maxDeviationFromCentrePct') return u.deviationPctPoints;
  if (figure === 'maxDuvFromCentre' || figure === 'maxDuvAnyPair') return u.duv;
  if (figure === 'maxSemu' || figure === 'glowSemu') return u.semu;
  if (figure === 'glowContrastPct') return u.contrastPctPoints;
  return null;
}

interface FigureDiff {
  pattern: Pattern | null;
  figure: string;
  limit: number | null;
  truth: number | null;
  measured: number | null;
  truthStatus: 'fail' | 'pass' | 'error' | 'absent';
  measuredStatus: 'fail' | 'pass' | 'error' | 'absent';
  allowance: number | null;
  borderline: boolean;
  measuredText: string | null;
  truthText: string | null;
  /** for mura figures: the measured blobs behind the figure (kind, place, area, contrast, SEMU) */
  measuredBlobs: string[];
  /** for mura figures: the true features of the photo */
  truthBlobs: string[];
}

function blobWords(b: Blob): string {
  return `${b.kind} ${b.polarity} at u ${b.u.toFixed(3)} v ${b.v.toFixed(3)}, ${b.areaMm2.toFixed(1)} mm², C ${b.contrastPct.toFixed(2)} % (peak ${b.peakContrastPct.toFixed(2)} %), ${b.semu.toFixed(2)} SEMU`;
}

/** The blobs a mura figure was taken from, worst first (at most 3). */
function blobsBehind(photo: PhotoResult | undefined, figure: string, pattern: Pattern, criteria: Criteria): Blob[] {
  const blobs = photo?.mura?.blobs ?? [];
  const glowKinds: BlobKind[] = ['edge-glow', 'corner-glow'];
  const section = criteria.patterns[pattern];
  const glowSet = section !== undefined && 'glow' in section && section.glow !== undefined;
  let chosen: Blob[] = [];
  if (figure === 'maxSemu') chosen = [...blobs].filter((b) => !(glowSet && glowKinds.includes(b.kind))).sort((x, y) => y.semu - x.semu);
  else if (figure === 'glowSemu') chosen = blobs.filter((b) => glowKinds.includes(b.kind)).sort((x, y) => y.semu - x.semu);
  else if (figure === 'glowContrastPct') chosen = blobs.filter((b) => glowKinds.includes(b.kind)).sort((x, y) => y.peakContrastPct - x.peakContrastPct);
  else if (figure.startsWith('blobCount.')) {
    const kind = figure.slice('blobCount.'.length);
    const from = section?.blobs?.countFromSemu ?? 0;
    chosen = blobs.filter((b) => (kind === 'any' || b.kind === kind) && b.semu >= from).sort((x, y) => y.semu - x.semu);
  }
  return chosen.slice(0, 3);
}

interface PanelComparison {
  panel: string;
  category: string;
  planted: string;
  truth: Verdict;
  measured: Verdict;
  agree: boolean;
  kind: 'agree' | 'borderline' | 'real';
  diffs: FigureDiff[];
  measuredErrors: string[];
}

type Judged = Pick<JudgedReason, 'pattern' | 'figure' | 'value' | 'limit' | 'margin' | 'severity' | 'text'> & { reportOnly?: boolean; borderline?: boolean };

function judgedFigures(details: readonly Judged[]): Map<string, Judged> {
  const m = new Map<string, Judged>();
  for (const r of details) {
    if (r.borderline || r.reportOnly || r.limit === null) continue;
    m.set(`${r.pattern}|${r.figure}`, r);
  }
  return m;
}

function statusOf(r: Judged | undefined): FigureDiff['truthStatus'] {
  if (!r) return 'absent';
  return r.severity === 'fail' ? 'fail' : r.severity === 'error' ? 'error' : 'pass';
}

function comparePanel(truthDetails: readonly Judged[], measured: PanelResult, truthPhotos: PhotoResult[], criteria: Criteria): FigureDiff[] {
  const t = judgedFigures(truthDetails);
  const m = judgedFigures(measured.reasonDetails as Judged[]);
  const keys = new Set([...t.keys(), ...m.keys()]);
  const diffs: FigureDiff[] = [];
  for (const key of keys) {
    const tr = t.get(key);
    const mr = m.get(key);
    const ts = statusOf(tr);
    const ms = statusOf(mr);
    if ((ts === 'fail') === (ms === 'fail')) continue;
    const [pat, figure] = key.split('|');
    const pattern = pat as Pattern;
    const allowance = allowanceFor(figure, criteria);
    let borderline = false;
    if (tr && tr.margin !== null && allowance !== null) borderline = Math.abs(tr.margin) <= allowance;
    if (figure.startsWith('blobCount.')) {
      // a count changes at countFromSemu: borderline when a true feature of that kind lies within the
      // SEMU allowance of it
      const kind = figure.slice('blobCount.'.length);
      const from = criteria.patterns[pattern]?.blobs?.countFromSemu ?? 0;
      const photo = truthPhotos.find((p) => p.pattern === pattern);
      borderline = (photo?.blobs ?? []).some((b) => (kind === 'any' || b.kind === kind) && Math.abs(b.semu - from) <= criteria.uncertainty.semu);
    }
    diffs.push({
      pattern,
      figure,
      limit: tr?.limit ?? mr?.limit ?? null,
      truth: tr?.value ?? null,
      measured: mr?.value ?? null,
      truthStatus: ts,
      measuredStatus: ms,
      allowance,
      borderline,
      measuredText: mr?.text ?? null,
      truthText: tr?.text ?? null,
      measuredBlobs: blobsBehind(measured.photos.find((p) => p.pattern === pattern), figure, pattern, criteria).map(blobWords),
      truthBlobs: (truthPhotos.find((p) => p.pattern === pattern)?.blobs ?? []).map(blobWords),
    });
  }
  return diffs;
}

// ---------------------------------------------------------------------------------------------------
// running the command

async function runInspect(args: string[]): Promise<{ status: number | null; stderr: string; ms: number }> {
  const bin = join(process.cwd(), 'bin', 'evenfield.js');
  const t0 = performance.now();
  return new Promise((res, rej) => {
    const child = spawn(process.execPath, [bin, ...args], { stdio: ['ignore', 'inherit', 'pipe'] });
    let stderr = '';
    child.stderr.on('data', (d: Buffer) => {
      stderr += d.toString();
      process.stderr.write(d);
    });
    child.on('error', rej);
    child.on('close', (status) => res({ status, stderr, ms: performance.now() - t0 }));
  });
}

// ---------------------------------------------------------------------------------------------------

const fmt = (x: number | null, d = 3) => (x === null || !Number.isFinite(x) ? '—' : Number(x.toFixed(d)).toString());

async function main(): Promise<void> {
  const a = parseArgs(process.argv.slice(2));
  const out = resolve(a.out);
  const lotDir = a.lotDir ? resolve(a.lotDir) : join(out, 'lot');
  const runDir = join(out, 'run');
  mkdirSync(out, { recursive: true });
  const plans = planLot(a.panels, a.seed, a.lens, a.width, a.height);
  const { bad, flats } = await generate(a, plans, lotDir);
  if (!a.mura && !a.criteria) {
    // the built-in criteria without their mura limits, for both the truth and the command
    const c = structuredClone(loadCriteria(null).criteria) as Criteria;
    for (const section of Object.values(c.patterns) as Record<string, unknown>[]) {
      delete section.maxSemu;
      delete section.blobs;
      delete section.glow;
      section.reportOnly = (section.reportOnly as string[]).filter((k) => k !== 'maxSemu' && k !== 'blobs' && !k.startsWith('glow.'));
    }
    c.name = `${c.name}, mura limits removed`;
    a.criteria = join(out, 'criteria-no-mura.yaml');
    writeFileSync(a.criteria, stringifyYaml(c));
  }
  const crit = loadCriteria(a.criteria);
  const criteria = crit.criteria;

  // truth verdicts
  const truthDir = join(lotDir, 'truth');
  const truthJudged = new Map<string, { verdict: Verdict; details: readonly Judged[]; photos: PhotoResult[] }>();
  for (const plan of plans) {
    const photos = SHOTS.map((s) => {
      const name = `${plan.id}_${s.token}`;
      const truth = JSON.parse(readFileSync(join(truthDir, `${name}.truth.json`), 'utf8')) as PhotoTruth;
      return truthPhoto(truth, join(lotDir, 'photos', `${name}.jpg`), criteria);
    });
    const j = judgePanel(photos, criteria);
    truthJudged.set(plan.id, { verdict: j.verdict, details: j.reasonDetails, photos });
  }

  // the command
  const date = '2025-06-02T08:00:00.000Z';
  const cmd = ['inspect', join(lotDir, 'photos'), '--out', runDir, '--force', '--date', date, '--jobs', String(a.jobs), '--panel-size', `${WIDTH_MM}x${HEIGHT_MM}`, '--lot', 'lot-verdicts'];
  if (!a.pdf) cmd.push('--no-pdf');
  if (!a.mura) cmd.push('--no-mura');
  if (a.criteria) cmd.push('--criteria', a.criteria);
  if (flats.length) cmd.push('--flat', ...flats);
  const commandRecord = join(out, 'command.json');
  let run: { status: number | null; stderr: string; ms: number };
  if (a.reuseRun && existsSync(commandRecord)) {
    run = JSON.parse(readFileSync(commandRecord, 'utf8')) as typeof run;
    process.stderr.write(`comparing the earlier run in ${runDir}\n`);
  } else {
    process.stderr.write(`running: evenfield ${cmd.join(' ')}\n`);
    run = await runInspect(cmd);
    writeFileSync(commandRecord, JSON.stringify({ args: cmd, ...run }));
  }
  const doc = JSON.parse(readFileSync(join(runDir, 'results.json'), 'utf8')) as { panels: PanelResult[]; summary: Record<string, number> };
  const measuredBy = new Map(doc.panels.map((p) => [p.panel, p]));

  // compare
  const comparisons: PanelComparison[] = [];
  for (const plan of plans) {
    const t = truthJudged.get(plan.id)!;
    const m = measuredBy.get(plan.id);
    if (!m) throw new Error(`panel ${plan.id} missing from results.json`);
    const diffs = m.verdict === t.verdict ? [] : comparePanel(t.details, m, t.photos, criteria);
    const measuredErrors = m.photos.filter((p) => p.status === 'error').map((p) => `${basename(p.file)}: ${p.error}`);
    const agree = m.verdict === t.verdict;
    const kind = agree ? 'agree' : m.verdict !== 'error' && diffs.length > 0 && diffs.every((d) => d.borderline) ? 'borderline' : 'real';
    comparisons.push({ panel: plan.id, category: plan.category, planted: plan.planted, truth: t.verdict, measured: m.verdict, agree, kind, diffs, measuredErrors });
  }

  // figure accuracy over the whole lot (measured - truth), per pattern and figure
  const errs = new Map<string, number[]>();
  for (const plan of plans) {
    const t = judgedFigures(truthJudged.get(plan.id)!.details);
    const m = judgedFigures(measuredBy.get(plan.id)!.reasonDetails as Judged[]);
    for (const [key, tr] of t) {
      const mr = m.get(key);
      if (!mr || tr.value === null || mr.value === null || key.includes('blobCount')) continue;
      const list = errs.get(key) ?? [];
      list.push(mr.value - tr.value);
      errs.set(key, list);
    }
  }

  // unusable files
  const errorLines = run.stderr.split('\n').filter((l) => l.startsWith('error: '));
  const badChecks = bad.map((b) => {
    const lines = errorLines.filter((l) => l.includes(basename(b.file)));
    const panel = measuredBy.get(b.panel);
    return { ...b, lines, verdict: panel?.verdict ?? null };
  });
  const badPanels = new Set(bad.map((b) => b.panel));
  const othersJudged = doc.panels.filter((p) => !badPanels.has(p.panel)).every((p) => p.verdict === 'pass' || p.verdict === 'fail');
  const expectedStatus = bad.length > 0 ? 2 : doc.panels.some((p) => p.verdict === 'fail') ? 1 : 0;

  // report
  const n = comparisons.length;
  const agreeN = comparisons.filter((c) => c.agree).length;
  const borderN = comparisons.filter((c) => c.kind === 'borderline').length;
  const real = comparisons.filter((c) => c.kind === 'real');
  const truthCounts = { pass: 0, fail: 0, error: 0 } as Record<Verdict, number>;
  const measCounts = { pass: 0, fail: 0, error: 0 } as Record<Verdict, number>;
  for (const c of comparisons) {
    truthCounts[c.truth]++;
    measCounts[c.measured]++;
  }
  // truth figures within the allowance of their limit, whether or not the verdict changed
  let truthBorderlinePanels = 0;
  for (const plan of plans) if (truthJudged.get(plan.id)!.details.some((r) => (r as Judged).borderline)) truthBorderlinePanels++;

  const L: string[] = [];
  L.push(`# Lot verdict study`);
  L.push('');
  L.push(`${n} panels × white, gray50, black (${a.width}×${a.height} JPEG, q90), lens: ${a.lens === 'none' ? 'no falloff (cos⁴ and vignetting off)' : 'vignetting camera, falloff from 3 flat frames (--flat)'}; seed ${a.seed}.`);
  L.push(`Criteria: ${crit.source} (sha256 ${crit.hash.slice(0, 16)}…); panel size ${WIDTH_MM}×${HEIGHT_MM} mm; --jobs ${a.jobs}${a.pdf ? '' : ', --no-pdf'}${a.mura ? '' : ', --no-mura'}.`);
  L.push(`Command wall time ${(run.ms / 1000).toFixed(0)} s, exit status ${run.status} (expected ${expectedStatus}).`);
  L.push('');
  L.push(`Truth verdicts: ${truthCounts.pass} pass, ${truthCounts.fail} fail, ${truthCounts.error} error; measured: ${measCounts.pass} pass, ${measCounts.fail} fail, ${measCounts.error} error.`);
  L.push(`Panels with a truth figure inside its allowance of a limit: ${truthBorderlinePanels}.`);
  L.push('');
  L.push(`**Verdicts equal: ${agreeN}/${n}; borderline disagreements: ${borderN}; real disagreements: ${real.length}.**`);
  L.push('');
  const byCat = new Map<string, { n: number; agree: number }>();
  for (const c of comparisons) {
    const e = byCat.get(c.category) ?? { n: 0, agree: 0 };
    e.n++;
    if (c.agree) e.agree++;
    byCat.set(c.category, e);
  }
  L.push('| category | panels | verdicts equal |');
  L.push('|---|---|---|');
  for (const [cat, e] of byCat) L.push(`| ${cat} | ${e.n} | ${e.agree} |`);
  L.push('');
  const listDiffs = (title: string, list: PanelComparison[]) => {
    if (list.length === 0) return;
    L.push(`## ${title}`);
    L.push('');
    for (const c of list) {
      L.push(`- **${c.panel}** (${c.category}: ${c.planted}): truth ${c.truth}, measured ${c.measured}`);
      for (const e of c.measuredErrors) L.push(`  - photo error: ${e}`);
      for (const d of c.diffs) {
        L.push(
          `  - ${d.pattern} ${d.figure}: truth ${fmt(d.truth, 5)} (${d.truthStatus}), measured ${fmt(d.measured, 5)} (${d.measuredStatus}), limit ${fmt(d.limit, 5)}, allowance ${d.allowance === null ? '—' : '±' + fmt(d.allowance, 4)}${d.borderline ? ' — borderline' : ''}`,
        );
        if (d.measuredText) L.push(`    - measured: ${d.measuredText}`);
        if (d.truthText && d.truthStatus === 'fail') L.push(`    - truth: ${d.truthText}`);
        for (const b of d.measuredBlobs) L.push(`    - measured blob: ${b}`);
        if (d.measuredBlobs.length || d.figure.startsWith('blobCount.') || d.figure.endsWith('Semu') || d.figure.startsWith('glow')) {
          L.push(`    - true features: ${d.truthBlobs.length ? d.truthBlobs.join('; ') : 'none'}`);
        }
      }
    }
    L.push('');
  };
  // which figures turned the real disagreements, and in which direction
  const causes = new Map<string, { falseFail: number; falsePass: number }>();
  for (const c of real) {
    for (const d of c.diffs) {
      if (d.borderline) continue;
      const key = `${d.pattern} · ${d.figure}`;
      const e = causes.get(key) ?? { falseFail: 0, falsePass: 0 };
      if (d.measuredStatus === 'fail') e.falseFail++;
      else e.falsePass++;
      causes.set(key, e);
    }
  }
  if (causes.size) {
    L.push('Figures outside their allowance that judged differently, over the real disagreements (a panel can have several):');
    L.push('');
    L.push('| pattern · figure | measured fail, truth pass | truth fail, measured pass |');
    L.push('|---|---|---|');
    for (const [k, e] of [...causes].sort((x, y) => y[1].falseFail + y[1].falsePass - (x[1].falseFail + x[1].falsePass))) L.push(`| ${k} | ${e.falseFail} | ${e.falsePass} |`);
    L.push('');
  }
  L.push('| truth ↓ measured → | pass | fail | error |');
  L.push('|---|---|---|---|');
  for (const tv of ['pass', 'fail', 'error'] as Verdict[]) {
    const row = (['pass', 'fail', 'error'] as Verdict[]).map((mv) => comparisons.filter((c) => c.truth === tv && c.measured === mv).length);
    L.push(`| ${tv} | ${row.join(' | ')} |`);
  }
  L.push('');
  listDiffs('Real disagreements', real);
  listDiffs('Borderline disagreements', comparisons.filter((c) => c.kind === 'borderline'));
  L.push('## Figure accuracy (measured − truth, all panels)');
  L.push('');
  L.push('| pattern · figure | n | mean | rms | worst |');
  L.push('|---|---|---|---|---|');
  for (const [key, list] of [...errs].sort()) {
    const mean = list.reduce((s, x) => s + x, 0) / list.length;
    const rms = Math.sqrt(list.reduce((s, x) => s + x * x, 0) / list.length);
    const worst = list.reduce((w, x) => (Math.abs(x) > Math.abs(w) ? x : w), 0);
    L.push(`| ${key.replace('|', ' · ')} | ${list.length} | ${fmt(mean, 4)} | ${fmt(rms, 4)} | ${fmt(worst, 4)} |`);
  }
  L.push('');
  const badNames = new Set(bad.map((b) => basename(b.file)));
  const unplanned = doc.panels.flatMap((p) => p.photos.filter((ph) => ph.status === 'error' && !badNames.has(basename(ph.file))).map((ph) => `${basename(ph.file)} (${ph.errorCode}): ${ph.error}`));
  L.push(`## Photos refused that were not planted as unusable: ${unplanned.length}`);
  L.push('');
  for (const u of unplanned) L.push(`- ${u}`);
  if (unplanned.length) L.push('');
  L.push('## Unusable files');
  L.push('');
  for (const b of badChecks) {
    L.push(`- ${basename(b.file)} (${b.what}): panel ${b.panel} verdict ${b.verdict}; error lines: ${b.lines.length}${b.lines.length ? ` — \`${b.lines[0]}\`` : ''}`);
  }
  const onePerFile = badChecks.every((b) => b.lines.length === 1);
  const allError = badChecks.every((b) => b.verdict === 'error');
  L.push('');
  L.push(`Each named on exactly one error line: ${onePerFile ? 'yes' : 'no'}; each panel error: ${allError ? 'yes' : 'no'}; every other panel judged (pass or fail): ${othersJudged ? 'yes' : 'no'}; error lines in all: ${errorLines.length}; exit status ${run.status} (documented: ${expectedStatus}).`);
  const summaryLine = run.stderr.trim().split('\n').filter((l) => / panels: /.test(l)).pop() ?? '(none)';
  L.push(`Closing summary line: \`${summaryLine}\``);
  L.push('');
  const text = L.join('\n');
  writeFileSync(join(out, 'report.md'), text);
  writeFileSync(join(out, 'comparison.json'), JSON.stringify({ args: a, status: run.status, comparisons, badChecks, errors: Object.fromEntries(errs) }, null, 1));
  process.stdout.write(text + '\n');
}

await main();
