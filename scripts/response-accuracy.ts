// Accuracy study for the camera response (calibrate --bracket): generated photos drawn through camera
// tone curves other than sRGB's. For each curve, a bracket of seven photos of one scene one stop apart
// gives the response; then grid photos of white and gray fields (no lens falloff, no mura) drawn through
// the same curve are measured twice, reading the codes through the sRGB curve and through the measured
// response, and every grid point's relative luminance is compared with the generator's truth.
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/response-accuracy.js [photos per curve] [width] [height]

import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { randomScene, renderPhoto } from '../fixtures/generator/index.js';
import { toneCurveEncode } from '../fixtures/generator/encode.js';
import { bracketToResponse } from '../lib/cli/response-commands.js';
import { DEFAULT_MEASURE_OPTIONS, measurePhoto } from '../lib/pipeline/index.js';
import type { ResponseCurve, Transfer } from '../lib/photometry/index.js';
import { curveFromTable } from '../lib/cli/response-commands.js';

const count = Number(process.argv[2] ?? 10);
const width = Number(process.argv[3] ?? 2400);
const height = Number(process.argv[4] ?? 1600);
const dir = join('.cache', 'response-accuracy');
mkdirSync(dir, { recursive: true });

const curves: { name: string; curve: { gamma?: number; contrast?: number } }[] = [
  { name: 'sRGB (control)', curve: {} },
  { name: 'sRGB + S-curve 0.35', curve: { contrast: 0.35 } },
  { name: 'gamma 2.2', curve: { gamma: 2.2 } },
  { name: 'gamma 1.8 + S-curve 0.2', curve: { gamma: 1.8, contrast: 0.2 } },
];

function stats(a: number[]): string {
  const s = a.map(Math.abs).sort((x, y) => x - y);
  const q = (p: number) => s[Math.min(s.length - 1, Math.floor(p * s.length))]!;
  return `median |err| ${q(0.5).toFixed(2)} %, 95 % ${q(0.95).toFixed(2)} %, max ${s[s.length - 1]!.toFixed(2)} %`;
}

for (const [ci, c] of curves.entries()) {
  // the bracket: a white panel in a dim room, strong lens falloff for a spread of levels
  const files: string[] = [];
  const base = randomScene(500 + ci, { width, height, features: [0, 0], yawDeg: [0, 0], pitchDeg: [0, 0] });
  base.camera.k1 = -0.35;
  base.output = { ...(base.output ?? {}), toneCurve: c.curve };
  const first = await renderPhoto(base);
  const g0 = first.truth.exposure.gain as number;
  for (let k = -5; k <= 1; k++) {
    const spec = { ...base, exposure: { gain: g0 * 2 ** k } };
    const { buffer, ext } = await renderPhoto(spec);
    const f = join(dir, `bracket-${ci}-${k + 5}.${ext}`);
    writeFileSync(f, buffer);
    files.push(f);
  }
  const rep = await bracketToResponse(files, null, null, 'study');
  const response: ResponseCurve = curveFromTable(rep.file.linear, 'study');
  // the measured table against the curve drawn (normalised at code 255 like the table)
  const worstTable = [0, 0];
  for (let z = Math.ceil(rep.file.measuredCodes[0]); z <= Math.floor(rep.file.measuredCodes[1]); z++) {
    let lo = 0;
    let hi = 1;
    for (let it = 0; it < 50; it++) {
      const m = (lo + hi) / 2;
      if (255 * toneCurveEncode(c.curve, m) < z) lo = m;
      else hi = m;
    }
    const band = z < 20 ? 0 : 1;
    worstTable[band] = Math.max(worstTable[band]!, Math.abs(response.linear[z]! / lo - 1));
  }
  console.log(
    `${c.name}: ${rep.lines.join('; ')}; table vs drawn curve: largest ${(100 * worstTable[1]!).toFixed(2)} % over codes 20 and up, ${(100 * worstTable[0]!).toFixed(1)} % below`,
  );

  const errs: Record<string, number[]> = { srgb: [], response: [] };
  for (let i = 0; i < count; i++) {
    const gray = i % 2 === 1;
    const spec = randomScene(2000 + 37 * ci + i, { width, height, pattern: gray ? 'gray' : 'white', level: gray ? 0.5 : undefined, features: [0, 0], k1: [0, 0], cornerLoss: [0.15, 0.35] });
    spec.camera.cos4 = false;
    spec.output = { ...(spec.output ?? {}), toneCurve: c.curve };
    const { buffer, ext, truth } = await renderPhoto(spec);
    const file = join(dir, `P${ci}-${i}_${gray ? 'gray50' : 'white'}.${ext}`);
    writeFileSync(file, buffer);
    const tg = (truth.grids as unknown as { layout: number; placement: string; points: { relative: number }[] }[]).find((g) => g.layout === 9 && g.placement === 'cells')!;
    for (const [name, transfer] of [['srgb', 'auto'], ['response', response]] as [string, 'auto' | Transfer][]) {
      const m = await measurePhoto(file, {
        ...DEFAULT_MEASURE_OPTIONS,
        transfer,
        pattern: gray ? 'gray' : 'white',
        patternLevel: gray ? 50 : null,
        panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
        grid: { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
        mura: false,
        artifacts: false,
      });
      if (m.result.status !== 'ok') {
        console.log(`${file} (${name}): ${m.result.error}`);
        continue;
      }
      m.result.grid!.points.forEach((p, k) => errs[name]!.push((100 * (p.relative - tg.points[k]!.relative)) / tg.points[k]!.relative));
    }
  }
  if (count > 0) console.log(`  grid points, ${count} photos: read as sRGB: ${stats(errs.srgb!)}; through the measured response: ${stats(errs.response!)}`);
}
