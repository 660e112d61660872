// Why lossy codings other than JPEG's are refused: clean generated gray fields (smooth variation only,
// no feature) rendered losslessly at 16 bits, then coded once by sharp as JPEG, lossy WebP and AVIF at
// one quality, and analysed as `inspect` would (truth corners, cos⁴ falloff). Prints per photo the
// largest SEMU and the count of findings of SEMU >= 1 for each coding (the mura issue allows 0.2 per
// photo). The refusal itself is in lib/io (lossyNonJpegCoding); here it is bypassed for WebP and AVIF
// by decoding them with sharp to 8-bit pixels and saving those as an 8-bit PNG, which holds the same
// values sharp's decoder gives evenfield for such a file (and is measured with the same 8-bit rules).
// The JPEG is measured as it is (evenfield's own JPEG decoder).
//
//   npx tsc -p tsconfig.build.json && node dist/scripts/lossy-codings.js [quality=90] [photos=6]

import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import sharp, { type Sharp } from 'sharp';
import { renderPhoto } from '../fixtures/generator/index.js';
import { graySpec } from './mura-scenes.js';
import { measurePhoto } from '../lib/pipeline/index.js';
import { generatedPhotoOptions, STUDY_QUALITY } from './generated-options.js';

const quality = Number(process.argv[2] ?? 90);
const photos = Number(process.argv[3] ?? 6);
const dir = join('.cache', 'lossy-codings');
mkdirSync(dir, { recursive: true });

const codings: [string, (s: Sharp) => Sharp][] = [
  ['JPEG', (s) => s.jpeg({ quality })],
  ['lossy WebP', (s) => s.webp({ quality })],
  ['AVIF', (s) => s.avif({ quality })],
];

async function main(): Promise<void> {
  const tally = codings.map(() => ({ findings: 0, maxSemu: 0 }));
  for (let seed = 2000; seed < 2000 + photos; seed++) {
    const spec = graySpec(seed, true, 2400, 1600);
    spec.output = { format: 'png', bitDepth: 16 };
    const r = await renderPhoto(spec);
    const row: string[] = [`seed ${seed}`];
    for (const [k, [name, code]] of codings.entries()) {
      const coded = await code(sharp(r.buffer)).toBuffer();
      const file = join(dir, `s${seed}-${k}_gray50.${name === 'JPEG' ? 'jpg' : 'png'}`);
      writeFileSync(file, name === 'JPEG' ? coded : await sharp(coded).png().toBuffer());
      const m = await measurePhoto(
        file,
        generatedPhotoOptions(spec, { corners: r.truth.corners, falloff: { kind: 'cos4', focal35mm: spec.camera.focal35 }, quality: STUDY_QUALITY, mura: true }),
      );
      const blobs = m.result.blobs ?? [];
      const n = blobs.filter((b) => b.semu >= 1).length;
      const top = m.result.mura?.maxSemu ?? NaN;
      tally[k].findings += n;
      tally[k].maxSemu = Math.max(tally[k].maxSemu, top);
      row.push(`${name}: ${m.result.status === 'ok' ? `largest SEMU ${top.toFixed(2)}, ${n} of SEMU >= 1` : m.result.error}`);
    }
    console.log(row.join(' | '));
  }
  console.log(`quality ${quality}, ${photos} clean gray fields:`);
  for (const [k, [name]] of codings.entries()) {
    console.log(`  ${name}: ${(tally[k].findings / photos).toFixed(2)} findings of SEMU >= 1 per photo, largest SEMU ${tally[k].maxSemu.toFixed(2)}`);
  }
}

main().catch((e) => {
  console.error(e);
  process.exit(1);
});
