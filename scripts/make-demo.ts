// Builds the invented demo lot in fixtures/demo/ with the synthetic photo generator.
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/make-demo.js [outDir]
//
// Everything is fixed by the seeds below, so a rerun rewrites the same bytes.
import { mkdirSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fitInFrame, renderFlatFrame, renderPhoto, Rng } from '../fixtures/generator/index.js';
import type { CameraSpec, FeatureSpec, GlareSpec, LuminanceTerm, ColourVariation, PhotoSpec } from '../fixtures/generator/index.js';
import type { Pattern } from '../lib/types.js';

const out = process.argv[2] ?? join('fixtures', 'demo');
const WIDTH_MM = 597.9;
const HEIGHT_MM = 336.3;
const LOT_SEED = 250317;

/** the inspection station's camera: fixed lens, aperture and partial in-camera vignetting correction */
const CAMERA: Omit<CameraSpec, 'yawDeg' | 'pitchDeg' | 'rollDeg' | 'fill' | 'shift'> = {
  width: 1600,
  height: 1200,
  focal35: 30,
  cropFactor: 1.5,
  k1: 0.35,
  k2: 0.1,
  blurPx: 0.7,
  make: 'Fieldglass',
  model: 'FG-1 (synthetic)',
  lens: '20 mm f/2.8 (30 mm equivalent)',
};
const F_NUMBER = 4;
const QUALITY = 90;
/** full well at ISO 100; higher ISO means fewer electrons per code value */
const FULL_WELL_BASE = 20000;
/** a dark room: about 1 lux on the wall */
const SURROUND = { ambient: 0.001, spill: 0.1 };

interface PanelPlan {
  serial: string;
  luminance?: LuminanceTerm[];
  colour?: ColourVariation;
  features?: FeatureSpec[];
  glare?: Partial<Record<Pattern, GlareSpec[]>>;
  /** what was planted, for the README */
  planted: string;
  expected: 'pass' | 'fail' | 'retake';
  /** camera value of the black field's centre, where the default 0.25 would clip a bright bleed */
  blackCentre?: number;
  /** operator's note per pattern for the manifest */
  notes?: Partial<Record<string, string>>;
}

const rng = new Rng(LOT_SEED);
const r = (a: number, b: number) => rng.uniform(a, b);
/** ordinary panel-to-panel variation: mild radial drop-off, slight tilt, faint colour drift */
const ordinary = (): { luminance: LuminanceTerm[]; colour: ColourVariation } => ({
  luminance: [
    { kind: 'radial', loss: r(0.1, 0.22), power: r(1.8, 2.4), u0: r(0.45, 0.55), v0: r(0.45, 0.55) },
    { kind: 'linear', gx: r(-0.03, 0.03), gy: r(-0.03, 0.03) },
  ],
  colour: { r: { x: r(-0.006, 0.006), y: r(-0.006, 0.006) }, b: { x: r(-0.006, 0.006), radial: r(-0.008, 0.008) } },
});
/** faint clouding on black that every LCD shows a little of */
const blackCloud = (seed: number): FeatureSpec => ({
  kind: 'cloud',
  u: r(0.3, 0.7),
  v: r(0.3, 0.7),
  sizeMm: r(120, 180),
  contrastPct: r(0.8, 1.5),
  seed,
  patterns: ['black'],
});

const plans: PanelPlan[] = [
  { serial: 'HX27-3101', ...ordinary(), features: [blackCloud(1)], planted: 'nothing beyond ordinary variation', expected: 'pass' },
  { serial: 'HX27-3102', ...ordinary(), features: [blackCloud(2)], planted: 'nothing beyond ordinary variation', expected: 'pass' },
  {
    serial: 'HX27-3103',
    luminance: [{ kind: 'radial', loss: 0.55, power: 1.6 }],
    colour: ordinary().colour,
    features: [blackCloud(3)],
    planted: 'strong corner drop-off (55 % loss at the corners, about 71 % min/max at 9 points)',
    expected: 'fail',
  },
  {
    serial: 'HX27-3104',
    ...ordinary(),
    features: [{ kind: 'cloud', u: 0.36, v: 0.42, sizeMm: 150, contrastPct: -3.5, seed: 41, patterns: ['gray', 'white'] }, blackCloud(4)],
    planted: 'dark cloud, 150 mm, -3.5 % peak, on gray and white',
    expected: 'fail',
  },
  {
    serial: 'HX27-3105',
    ...ordinary(),
    features: [{ kind: 'spot', u: 0.71, v: 0.33, sizeMm: 10, contrastPct: 5 }, blackCloud(5)],
    planted: 'bright spot, 10 mm half-peak diameter, +5 % peak, all patterns',
    expected: 'fail',
  },
  { serial: 'HX27-3106', ...ordinary(), features: [blackCloud(6)], planted: 'nothing beyond ordinary variation', expected: 'pass' },
  {
    serial: 'HX27-3107',
    ...ordinary(),
    features: [
      { kind: 'band', axis: 'vertical', position: 0.62, widthMm: 25, contrastPct: -2.5, patterns: ['white', 'gray'] },
      blackCloud(7),
    ],
    planted: 'vertical dark band, 25 mm wide at u = 0.62, -2.5 % peak, on white and gray',
    expected: 'fail',
  },
  {
    serial: 'HX27-3108',
    ...ordinary(),
    features: [
      { kind: 'edge-glow', edge: 'bottom', decayMm: 12, at: 0.35, lengthMm: 150, contrastPct: 700 },
      { kind: 'corner-glow', corner: 'top-right', decayMm: 15, contrastPct: 400 },
    ],
    planted: 'bleed on black: bottom edge 8x the black level at u = 0.35, top-right corner 5x',
    expected: 'fail',
    // the operator shortened the exposure so the bleed stays below clipping
    blackCentre: 0.09,
  },
  { serial: 'HX27-3109', ...ordinary(), features: [blackCloud(9)], planted: 'nothing beyond ordinary variation', expected: 'pass' },
  {
    serial: 'HX27-3110',
    luminance: ordinary().luminance,
    colour: { r: { x: 0.2 }, b: { x: -0.2 } },
    features: [blackCloud(10)],
    planted: "colour tint: red gain +20 % and blue -20 % at the right edge, the reverse at the left (reddish right, bluish left), luminance unchanged",
    expected: 'fail',
  },
  {
    serial: 'HX27-3111',
    ...ordinary(),
    features: [{ kind: 'spot', u: 0.22, v: 0.7, sizeMm: 8, contrastPct: 0.9 }, blackCloud(11)],
    planted: 'faint bright spot, 8 mm, +0.9 % peak (about 0.5 SEMU, below just noticeable)',
    expected: 'pass',
  },
  {
    serial: 'HX27-3112',
    ...ordinary(),
    features: [{ kind: 'hotspot-array', pitchMm: 60, sizeMm: 20, contrastPct: 3, patterns: ['white', 'gray'] }, blackCloud(12)],
    planted: 'hot-spot array of a direct-lit backlight: 60 mm pitch, 20 mm zones, +3 % peak, on white and gray',
    expected: 'fail',
  },
  { serial: 'HX27-3113', ...ordinary(), features: [blackCloud(13)], planted: 'nothing beyond ordinary variation', expected: 'pass' },
  {
    serial: 'HX27-3114',
    luminance: [{ kind: 'radial', loss: 0.3, power: 2 }, { kind: 'linear', gx: 0.02 }],
    colour: ordinary().colour,
    features: [blackCloud(14)],
    planted: 'larger but acceptable drop-off (30 % at the very corners, about 87 % min/max at 9 points)',
    expected: 'pass',
  },
  { serial: 'HX27-3115', ...ordinary(), features: [blackCloud(15)], planted: 'nothing beyond ordinary variation', expected: 'pass' },
  {
    serial: 'HX27-3116',
    ...ordinary(),
    features: [blackCloud(16)],
    glare: { white: [{ u: 0.78, v: 0.24, sizeMm: 70, level: 0.6 }] },
    planted: 'good panel, but the white photo caught a lamp reflection (added light, not panel emission) near the top right',
    expected: 'retake',
    notes: { white: 'corridor door open during this shot' },
  },
];

const PATTERNS: { token: string; pattern: Pattern; level?: number; iso: number; exposure: { whiteCentre?: number; patternCentre?: number } }[] = [
  { token: 'white', pattern: 'white', iso: 100, exposure: { whiteCentre: 0.75 } },
  { token: 'gray50', pattern: 'gray', level: 0.5, iso: 100, exposure: { whiteCentre: 0.75 } },
  { token: 'black', pattern: 'black', iso: 800, exposure: { patternCentre: 0.25 } },
];

function timeStamp(k: number): string {
  const t = new Date(Date.UTC(2025, 2, 17, 9, 12, 0) + k * 47_000);
  const p = (n: number) => String(n).padStart(2, '0');
  return `${t.getUTCFullYear()}:${p(t.getUTCMonth() + 1)}:${p(t.getUTCDate())} ${p(t.getUTCHours())}:${p(t.getUTCMinutes())}:${p(t.getUTCSeconds())}`;
}

// clear what an earlier run generated (README.md is written by hand and stays)
for (const old of ['truth', 'flats']) rmSync(join(out, old), { recursive: true, force: true });
mkdirSync(out, { recursive: true });
for (const f of readdirSync(out)) if (/\.(jpg|csv)$/.test(f)) rmSync(join(out, f));
mkdirSync(join(out, 'truth'), { recursive: true });
mkdirSync(join(out, 'flats'), { recursive: true });
const manifest: string[] = ['file,panel,pattern,note'];
const summary: string[] = [];
let shot = 0;
const t0 = performance.now();
for (const [i, plan] of plans.entries()) {
  // the panel goes on the fixture, the tripod is nudged: one pose per panel, kept for its three patterns
  const camera: CameraSpec = {
    ...CAMERA,
    yawDeg: r(-8, 8),
    pitchDeg: r(-6, 6),
    rollDeg: r(-2, 2),
    fill: r(0.72, 0.8),
    shift: [r(-0.03, 0.03), r(-0.03, 0.03)],
  };
  const worst = { white: '', gray50: '', black: '' } as Record<string, string>;
  for (const p of PATTERNS) {
    const spec: PhotoSpec = {
      seed: LOT_SEED + 100 * i + shot,
      panel: {
        id: plan.serial,
        widthMm: WIDTH_MM,
        heightMm: HEIGHT_MM,
        bezelMm: 9,
        pattern: p.pattern,
        level: p.level,
        whiteLuminance: 300,
        contrastRatio: 1000,
        luminance: plan.luminance,
        colour: plan.colour,
        features: plan.features,
      },
      camera,
      exposure: { ...(p.pattern === 'black' && plan.blackCentre ? { patternCentre: plan.blackCentre } : p.exposure), fNumber: F_NUMBER, iso: p.iso },
      noise: { fullWell: (FULL_WELL_BASE * 100) / p.iso, readNoise: 3 },
      output: { format: 'jpeg', quality: QUALITY, dateTime: timeStamp(shot) },
      surround: SURROUND,
      glare: plan.glare?.[p.pattern],
    };
    fitInFrame(spec, 0.03);
    const res = await renderPhoto(spec);
    const name = `${plan.serial}_${p.token}`;
    writeFileSync(join(out, `${name}.${res.ext}`), res.buffer);
    writeFileSync(join(out, 'truth', `${name}.truth.json`), JSON.stringify(res.truth));
    manifest.push(`${name}.${res.ext},${plan.serial},${p.token},${plan.notes?.[p.token] ?? ''}`);
    const g9 = res.truth.grids.find((g) => g.layout === 9 && g.placement === 'cells')!;
    const vis = res.truth.features.filter((f) => f.visible);
    const semu = vis.length ? Math.max(...vis.map((f) => f.semu)) : 0;
    worst[p.token] = `${g9.uniformity.minOverMaxPct.toFixed(1)} % / ${g9.uniformity.maxDuvFromCentre.toFixed(4)} / ${semu.toFixed(2)}`;
    shot++;
  }
  summary.push(`| ${plan.serial} | ${plan.planted} | ${worst.white} | ${worst.gray50} | ${worst.black} | ${plan.expected} |`);
  process.stderr.write(`${plan.serial} done (${((performance.now() - t0) / 1000).toFixed(0)} s)\n`);
}

// flat frames: an opal diffuser held against the lens, same camera settings, three placements
const flatGradients: [number, number][] = [
  [0.01, -0.005],
  [-0.015, 0.008],
  [0.004, 0.012],
];
for (const [k, gradient] of flatGradients.entries()) {
  const res = await renderFlatFrame({
    seed: LOT_SEED + 9000 + k,
    camera: { ...CAMERA },
    level: 0.62,
    gradient,
    noise: { fullWell: FULL_WELL_BASE, readNoise: 3 },
    output: { format: 'jpeg', quality: QUALITY, dateTime: timeStamp(shot + k) },
    exposure: { fNumber: F_NUMBER, iso: 100, exposureTimeS: 1 / 50 },
  });
  const name = `flat-${String(k + 1).padStart(2, '0')}`;
  writeFileSync(join(out, 'flats', `${name}.${res.ext}`), res.buffer);
  writeFileSync(join(out, 'truth', `${name}.truth.json`), JSON.stringify(res.truth));
}
writeFileSync(join(out, 'manifest.csv'), manifest.join('\n') + '\n');
writeFileSync(join(out, 'truth', 'planted.md'), ['| panel | planted | white 9-pt min/max, Δu\'v\' from centre, worst SEMU | gray | black | expected |', '|---|---|---|---|---|---|', ...summary].join('\n') + '\n');
console.log(summary.join('\n'));
console.log(`done in ${((performance.now() - t0) / 1000).toFixed(0)} s`);
