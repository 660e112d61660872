// File-facing side of lens falloff: read profiles, decode flat frames, write profiles.

import { existsSync } from 'node:fs';
import { calibrateFromFlats, profileFromJson, profileToJson } from '../falloff/index.js';
import type { FalloffProfile } from '../falloff/index.js';
import { decodePhoto, readTextFile, writeFileAtomic } from '../io/index.js';
import { EvenfieldError } from '../errors.js';
import type { RgbImage } from '../types.js';
import type { Transfer } from '../photometry/index.js';
import { calibrateShiftedFiles } from './shifted.js';

/** Long side of flat frames as decoded for the fit: the model is smooth, so a reduced copy suffices. */
const FLAT_WORK_LONG_SIDE = 1000;

export function loadFalloffProfile(path: string): FalloffProfile {
  const text = readTextFile(path, 'falloff profile', 'falloff');
  try {
    return profileFromJson(text, path);
  } catch (e) {
    // the message names the file itself ("PATH: ..." or "PATH is not ..."): said once, as "PATH: problem"
    if (e instanceof EvenfieldError) throw new EvenfieldError(e.code, withoutLeadingName(e.message, path), path);
    throw e;
  }
}

/** A message that begins with `name` ("NAME: problem", "NAME is problem"), as "problem"; others as they are. */
function withoutLeadingName(message: string, name: string): string {
  if (message.startsWith(`${name}: `)) return message.slice(name.length + 2);
  if (message.startsWith(`${name} is `)) return message.slice(name.length + 4);
  return message;
}

function scaleFor(width: number, height: number): 1 | 2 | 4 | 8 {
  let s = 1;
  while (s < 8 && Math.max(width, height) / (s * 2) >= FLAT_WORK_LONG_SIDE) s *= 2;
  return s as 1 | 2 | 4 | 8;
}

export interface FlatReport {
  profile: FalloffProfile;
  lines: string[];
}

export async function flatFramesToProfileWithReport(files: string[], transfer: 'auto' | Transfer = 'auto'): Promise<FlatReport> {
  if (files.length === 0) throw new EvenfieldError('usage', 'give at least one flat-field frame');
  const frames: RgbImage[] = [];
  let first: { width: number; height: number; file: string } | null = null;
  let exposure = null;
  let scale: 1 | 2 | 4 | 8 = 1;
  for (const f of files) {
    // the first frame fixes the size; the others must match it
    const probe = first ? scale : 1;
    const d = await decodePhoto(f, { scale: probe, transfer });
    if (!first) {
      first = { width: d.info.width, height: d.info.height, file: f };
      exposure = d.exposure;
      scale = scaleFor(d.info.width, d.info.height);
      if (scale !== 1) {
        const again = await decodePhoto(f, { scale, transfer });
        frames.push(again.image);
      } else frames.push(d.image);
      continue;
    }
    if (d.info.width !== first.width || d.info.height !== first.height) {
      throw new EvenfieldError(
        'falloff',
        `flat frame is ${d.info.width}×${d.info.height} but ${first.file} is ${first.width}×${first.height}: all flat frames must come from one camera setting`,
        f,
      );
    }
    frames.push(d.image);
  }
  const cal = calibrateFromFlats(frames, {
    exposure,
    fullWidth: first!.width,
    fullHeight: first!.height,
    scale,
    names: files,
    createdAt: null,
  });
  return { profile: cal.profile, lines: [`frames: ${files.length} (${first!.width}×${first!.height}, fitted at 1/${scale} scale)`, ...describeProfile(cal.profile), ...cal.warnings.map((w) => `warning: ${w}`)] };
}

/** Human-readable lines about a fitted profile, for the terminal. */
export function describeProfile(p: FalloffProfile): string[] {
  const f = p.fit;
  const lines = [
    `corner transmission: ${(100 * f.cornerTransmission).toFixed(1)} % of the centre`,
    `fit residual: ${f.residualRmsPct.toFixed(2)} % rms, ${f.residualMaxPct.toFixed(2)} % largest, over ${f.samples} samples (${f.rejectedSamples} rejected)`,
  ];
  if (f.removedTiltPct) lines.push(`source tilt removed (not part of the profile): ${f.removedTiltPct.x.toFixed(2)} % left→right, ${f.removedTiltPct.y.toFixed(2)} % top→bottom`);
  if (f.conditioning) {
    const c = f.conditioning;
    lines.push(`conditioning: separability ${c.separability.toFixed(3)}, condition number ${c.conditionNumber.toPrecision(3)}, corner uncertainty ±${c.cornerUncertaintyPct.toFixed(2)} %`);
  }
  for (const n of f.notes) lines.push(`note: ${n}`);
  return lines;
}

export async function flatFramesToProfile(files: string[], transfer: 'auto' | Transfer = 'auto'): Promise<FalloffProfile> {
  return (await flatFramesToProfileWithReport(files, transfer)).profile;
}

export async function calibrateCommand(
  photos: string[],
  out: string,
  opts: { shifted: boolean; force: boolean; transfer?: 'auto' | Transfer },
): Promise<number> {
  if (existsSync(out) && !opts.force) throw new EvenfieldError('output', 'already exists: add --force to replace it', out);
  const transfer = opts.transfer ?? 'auto';
  const rep = opts.shifted ? await calibrateShiftedFiles(photos, transfer) : await flatFramesToProfileWithReport(photos, transfer);
  await writeFileAtomic(out, profileToJson(rep.profile));
  for (const l of rep.lines) process.stderr.write(`${l}\n`);
  process.stderr.write(`profile written to ${out}\n`);
  return 0;
}
