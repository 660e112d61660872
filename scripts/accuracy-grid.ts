// Accuracy study for grid measurement (issue 2 acceptance): generated 4000×3000 JPEGs of white and
// gray fields at random poses (yaw/pitch up to 15°, roll up to 5°), no lens falloff, no mura; the
// spot radius equals the generator's. Compares every grid point's relative value, the uniformity and
// the found corners with the generator's truth.
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/accuracy-grid.js [count] [width] [height]

import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { randomScene, renderPhoto } from '../fixtures/generator/index.js';
import type { GridLayout } from '../lib/types.js';
import { DEFAULT_MEASURE_OPTIONS, measurePhoto } from '../lib/pipeline/index.js';

const count = Number(process.argv[2] ?? 40);
const width = Number(process.argv[3] ?? 4000);
const height = Number(process.argv[4] ?? 3000);
const layouts: GridLayout[] = [9, 25];
const dir = join('.cache', 'accuracy-grid');
mkdirSync(dir, { recursive: true });

const pointErrs: number[] = [];
const uniErrs: number[] = [];
const cornerErrs: number[] = [];
let failures = 0;
const worst: string[] = [];
for (let i = 0; i < count; i++) {
  const gray = i % 2 === 1;
  const spec = randomScene(1000 + i, { width, height, pattern: gray ? 'gray' : 'white', level: gray ? 0.5 : undefined, features: [0, 0], k1: [0, 0] });
  spec.camera.cos4 = false;
  const { buffer, ext, truth } = await renderPhoto(spec);
  const file = join(dir, `P${i}_${gray ? 'gray50' : 'white'}.${ext}`);
  writeFileSync(file, buffer);
  const diag = Math.hypot(width, height);
  for (const layout of layouts) {
    const m = await measurePhoto(file, {
      ...DEFAULT_MEASURE_OPTIONS,
      pattern: gray ? 'gray' : 'white',
      patternLevel: gray ? 50 : null,
      panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
      grid: { layout, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
      mura: false,
      artifacts: false,
    });
    if (m.result.status !== 'ok') {
      failures++;
      console.log(`${file}: ${m.result.error}`);
      continue;
    }
    const tg = (truth.grids as unknown as { layout: number; placement: string; points: { relative: number }[]; uniformity: { minOverMaxPct: number } }[]).find(
      (g) => g.layout === layout && g.placement === 'cells',
    )!;
    m.result.grid!.points.forEach((p, k) => {
      const e = (100 * (p.relative - tg.points[k].relative)) / tg.points[k].relative;
      pointErrs.push(e);
      if (Math.abs(e) > 0.8) worst.push(`${file} ${layout}-point #${p.index}: ${e.toFixed(2)} % (truth ${tg.points[k].relative.toFixed(4)})`);
    });
    uniErrs.push(m.result.uniformity!.minOverMaxPct - tg.uniformity.minOverMaxPct);
    if (layout === 9) {
      m.result.corners!.forEach((c, k) => cornerErrs.push((100 * Math.hypot(c[0] - truth.corners[k][0], c[1] - truth.corners[k][1])) / diag));
    }
  }
  process.stderr.write(`${i + 1}/${count}\r`);
}
const abs = (a: number[]) => a.map(Math.abs).sort((x, y) => x - y);
const med = (a: number[]) => abs(a)[Math.floor(a.length / 2)];
const max = (a: number[]) => Math.max(...abs(a));
const summary = {
  photos: count,
  size: `${width}x${height}`,
  failures,
  gridPoints: pointErrs.length,
  pointErrorPct: { medianAbs: med(pointErrs), maxAbs: max(pointErrs), within1pct: pointErrs.filter((e) => Math.abs(e) <= 1).length },
  uniformityErrorPctPoints: { medianAbs: med(uniErrs), maxAbs: max(uniErrs) },
  cornerErrorPctOfDiagonal: { medianAbs: med(cornerErrs), maxAbs: max(cornerErrs) },
};
console.log(JSON.stringify({ ...summary, pointsAbove08pct: worst }, null, 2));
