// Generated scenes of the mura accuracy study (scripts/mura-accuracy.ts): gray fields with spots,
// clouds and bands, clean gray fields, black fields with glow.
import { buildPanel, featureTruth, randomScene, Rng } from '../fixtures/generator/index.js';
import type { FeatureSpec, PhotoSpec } from '../fixtures/generator/index.js';

/** Scale a cloud's envelope until its half-peak region is `diameter` across (equal-area disc). */
function sizeCloud(spec: PhotoSpec, index: number, diameter: number): void {
  const f = spec.panel.features![index] as Extract<FeatureSpec, { kind: 'cloud' }>;
  f.sizeMm = diameter / 0.55;
  for (let k = 0; k < 4; k++) {
    const panel = buildPanel({ ...spec.panel, features: [f] });
    const t = featureTruth(panel, panel.parts[0], 2e5);
    const d = 2 * Math.sqrt(t.areaMm2 / Math.PI);
    if (Math.abs(d - diameter) < 0.02 * diameter) break;
    f.sizeMm *= diameter / d;
  }
}

/**
 * A gray field with 1-4 spots, clouds and bands (none when clean; with `lines`, lines 0.3-3 mm wide too,
 * another set of scenes). Cloud sizes: 'half-peak' scales each
 * cloud's envelope so that its half-peak region is the drawn size across (the convention of spots and
 * bands); 'nominal' keeps the generator's envelope size, whose half-peak region is about 0.5-0.65 of it.
 */
export function graySpec(
  seed: number,
  clean: boolean,
  width: number,
  height: number,
  cloudSizes: 'half-peak' | 'nominal' = 'half-peak',
  panelMm: { width: number; height: number } | null = null,
  varied = false,
  lines = false,
  edges = false,
  elliptic = false,
  stacked: false | 'same' | 'other' = false,
): PhotoSpec {
  const spec = randomScene(seed, {
    ...(panelMm ? { widthMm: panelMm.width, heightMm: panelMm.height } : {}),
    pattern: 'gray',
    level: 0.5,
    width,
    height,
    features: clean ? [0, 0] : [1, 4],
    featureKinds: lines ? ['spot', 'cloud', 'band', 'line'] : ['spot', 'cloud', 'band'],
    sizeMm: { spot: [5, 40], cloud: [50, 200], band: [5, 60], line: [0.3, 3] },
  });
  // the lens's own extra radial term is left out: the falloff correction is the cos⁴ model from the
  // focal length (the falloff study covers measured profiles), so what remains is the panel's own
  spec.camera.k1 = 0;
  spec.camera.k2 = 0;
  const rng = new Rng(seed * 7919 + 17);
  const shapeRng = new Rng(seed * 104729 + 3);
  (spec.panel.features ?? []).forEach((f, i) => {
    // contrast log-uniform in 0.5-20 %, either polarity
    const c = Math.exp(rng.uniform(Math.log(0.5), Math.log(20)));
    f.contrastPct = rng.next() < 0.5 ? -c : c;
    if (varied) varyShape(f, shapeRng);
    if (f.kind === 'cloud' && cloudSizes === 'half-peak') sizeCloud(spec, i, f.sizeMm);
  });
  if (edges) toEdges(spec, new Rng(seed * 6007 + 11));
  if (elliptic) toEllipses(spec, new Rng(seed * 8011 + 5));
  if (stacked) addStackedSpot(spec, new Rng(seed * 9001 + 23), stacked);
  return spec;
}

/**
 * The same scene with a spot added on its first cloud (`stacked`), where there is one: 5-40 mm, of the
 * cloud's polarity ('same') or the other ('other'), 0.5-20 % (log-uniform), its centre 0.15-0.5 of the
 * cloud's half-peak diameter from the cloud's, in any direction. A spot on a clouded area (a pressure mark on a diffuser's cloud, a particle
 * over a dim zone) is common on real panels; where the spot stands above the cloud's own top, the cloud
 * shows no peak of its own.
 */
function addStackedSpot(spec: PhotoSpec, rng: Rng, polarity: 'same' | 'other'): void {
  const features = spec.panel.features ?? [];
  const cloud = features.find((f) => f.kind === 'cloud');
  if (!cloud || cloud.kind !== 'cloud') return;
  // the cloud's half-peak diameter (sizeCloud scaled its envelope to about 1 / 0.55 of it)
  const d = 0.55 * cloud.sizeMm;
  const r = rng.uniform(0.15, 0.5) * d;
  const a = rng.uniform(0, 2 * Math.PI);
  const c = Math.exp(rng.uniform(Math.log(0.5), Math.log(20)));
  const clamp = (x: number): number => Math.min(0.97, Math.max(0.03, x));
  features.push({
    kind: 'spot',
    u: clamp(cloud.u + (r * Math.cos(a)) / spec.panel.widthMm),
    v: clamp(cloud.v + (r * Math.sin(a)) / spec.panel.heightMm),
    sizeMm: rng.uniform(5, 40),
    contrastPct: (polarity === 'same' ? 1 : -1) * Math.sign(cloud.contrastPct) * c,
  });
  spec.panel.features = features;
}

/**
 * The same scene with its spots and clouds drawn as ellipses (`elliptic`): each stretched by an aspect
 * of 1-3 (log-uniform; the long axis over the short) at an angle of 0-180 degrees, about its centre and
 * keeping its area, so the half-peak area is the round one's. Many real mura are elongated at any angle
 * (a pressure mark, a clouded diffuser), and another generator may well draw them so.
 */
function toEllipses(spec: PhotoSpec, rng: Rng): void {
  for (const f of spec.panel.features ?? []) {
    if (f.kind !== 'spot' && f.kind !== 'cloud') continue;
    if (f.kind === 'spot' && f.profile === 'disc') continue;
    f.aspect = Math.exp(rng.uniform(0, Math.log(3)));
    f.angleDeg = rng.uniform(0, 180);
  }
}

/**
 * Other shapes for the same scene (`varied`): half the spots flat-topped discs with an edge of 0.5 mm to
 * half their diameter; clouds of 1-6 lobes (one lobe: a round Gaussian); bands with a Gaussian, flat-topped
 * or raised-cosine cross-profile, half of them ending inside the panel (covering 45-100 % of its length).
 * Sizes, places and contrasts stay the scene's, so a run with and without shows what the shapes change.
 */
function varyShape(f: FeatureSpec, rng: Rng): void {
  if (f.kind === 'spot') {
    if (rng.next() < 0.5) {
      f.profile = 'disc';
      f.edgeMm = rng.uniform(0.5, Math.max(0.5, f.sizeMm / 2));
    }
  } else if (f.kind === 'cloud') {
    f.lobes = rng.int(1, 6);
  } else if (f.kind === 'band') {
    f.profile = rng.pick(['cosine', 'gaussian', 'flat'] as const);
    if (f.profile === 'flat') f.edgeMm = rng.uniform(0.5, Math.max(0.5, f.widthMm / 2));
    if (rng.next() < 0.5) {
      const from = rng.uniform(0, 0.3);
      f.from = from;
      f.to = Math.min(1, from + rng.uniform(0.45, 1));
    }
  }
}

/**
 * The same scene with its features moved against the panel's edges (`edges`): a spot's or cloud's centre
 * 2-12 % of the panel from one edge (the other coordinate 15-85 %), or, one time in three, from two edges
 * (a corner); a band's 3-12 % from an edge. Clouds keep the envelope sized where they were drawn, so one
 * cut by the edge has a smaller half-peak region (the truth is taken inside the panel). Mura at the border
 * is common on real panels (edge-lit backlights, frame pressure) and where a whole-panel surface fit is
 * least constrained.
 */
function toEdges(spec: PhotoSpec, rng: Rng): void {
  const near = () => (rng.next() < 0.5 ? rng.uniform(0.02, 0.12) : rng.uniform(0.88, 0.98));
  for (const f of spec.panel.features ?? []) {
    if (f.kind === 'spot' || f.kind === 'cloud') {
      if (rng.next() < 1 / 3) {
        f.u = near();
        f.v = near();
      } else if (rng.next() < 0.5) f.u = near();
      else f.v = near();
    } else if (f.kind === 'band') {
      f.position = rng.next() < 0.5 ? rng.uniform(0.03, 0.12) : rng.uniform(0.88, 0.97);
    }
  }
}

/**
 * Other smooth variation for a scene (`--smooth=`), drawn from the scene's seed: 'steep', a plateau
 * falling steeply into the corners (the panel's radial term replaced by one losing 10-40 % at the
 * corners as the 3rd-6th power of the distance from a centre at 0.4-0.6 of the panel); 'hump', a broad
 * Gaussian rise or hollow of 5-20 % added (sigma 0.3-0.6 of the panel's width, its axes turned).
 */
export function otherSmooth(spec: PhotoSpec, kind: 'steep' | 'hump'): void {
  const rng = new Rng(spec.seed * 31 + 7);
  const u = (lo: number, hi: number) => rng.uniform(lo, hi);
  const terms = spec.panel.luminance ?? [];
  if (kind === 'steep') {
    spec.panel.luminance = terms.filter((t) => t.kind !== 'radial');
    spec.panel.luminance.push({ kind: 'radial', loss: u(0.1, 0.4), power: u(3, 6), u0: u(0.4, 0.6), v0: u(0.4, 0.6) });
  } else {
    const W = spec.panel.widthMm;
    spec.panel.luminance = [
      ...terms,
      { kind: 'hump', amp: (rng.next() < 0.5 ? -1 : 1) * u(0.05, 0.2), u0: u(0.3, 0.7), v0: u(0.3, 0.7), sxMm: u(0.3, 0.6) * W, syMm: u(0.3, 0.6) * W, angleDeg: u(0, 180) },
    ];
  }
}

/** A black field with one or two edge or corner glows of `glowFactor` times the field at their edge
 *  (the generator's default 2-20, i.e. 100-1900 %; `--glow=weak` of mura-accuracy draws 1.15-2). */
export function blackSpec(
  seed: number,
  width: number,
  height: number,
  panelMm: { width: number; height: number } | null = null,
  glowFactor: [number, number] | null = null,
): PhotoSpec {
  const spec = randomScene(seed, {
    ...(panelMm ? { widthMm: panelMm.width, heightMm: panelMm.height } : {}),
    ...(glowFactor ? { glowFactor } : {}),
    pattern: 'black',
    width,
    height,
    features: [1, 2],
    featureKinds: ['edge-glow', 'corner-glow'],
  });
  spec.camera.k1 = 0;
  spec.camera.k2 = 0;
  // exposed for the black field, as one would to see bleed: black at about code 50 of 255, so a glow
  // of up to 20 x the field stays below clipping
  spec.exposure = { patternCentre: 0.03 };
  return spec;
}

