// Falloff calibration from shifted photos of one panel: decode, find each photo's panel outline,
// then separate lens and panel in lib/falloff.

import { calibrateFromShifted } from '../falloff/index.js';
import type { ShiftedFrame } from '../falloff/shifted.js';
import { findPanel } from '../geometry/index.js';
import { decodePhoto } from '../io/index.js';
import type { Transfer } from '../photometry/index.js';
import { luminancePlane } from '../photometry/index.js';
import { EvenfieldError } from '../errors.js';
import type { ExposureRecord } from '../types.js';
import { describeProfile } from './falloff-commands.js';
import type { FlatReport } from './falloff-commands.js';

const WORK_LONG_SIDE = 1500;

export async function calibrateShiftedFiles(files: string[], transfer: 'auto' | Transfer = 'auto'): Promise<FlatReport> {
  if (files.length < 3) throw new EvenfieldError('usage', `calibration from shifted photos needs at least 3 photos of one panel, got ${files.length}`);
  const frames: ShiftedFrame[] = [];
  let exposure: ExposureRecord | null = null;
  let full: { width: number; height: number } | null = null;
  let scale: 1 | 2 | 4 | 8 = 1;
  for (const f of files) {
    let d = await decodePhoto(f, { scale, transfer });
    if (!full) {
      full = { width: d.info.width, height: d.info.height };
      exposure = d.exposure;
      while (scale < 8 && Math.max(full.width, full.height) / (scale * 2) >= WORK_LONG_SIDE) scale = (scale * 2) as 1 | 2 | 4 | 8;
      if (scale !== 1) d = await decodePhoto(f, { scale, transfer });
    } else if (d.info.width !== full.width || d.info.height !== full.height) {
      throw new EvenfieldError('falloff', `photo is ${d.info.width}×${d.info.height} but the first is ${full.width}×${full.height}: shifted photos must come from one camera setting`, f);
    }
    const lum = luminancePlane(d.image);
    let corners;
    try {
      corners = findPanel(lum, { pattern: 'white' }).corners;
    } catch (e) {
      throw new EvenfieldError('falloff', `panel outline not found, so this photo cannot place the panel: ${(e as Error).message}`, f);
    }
    frames.push({ image: lum, panelToImage: corners, name: f });
  }
  const cal = calibrateFromShifted(frames, { exposure, fullWidth: full!.width, fullHeight: full!.height, scale, createdAt: null });
  const lines = [
    `photos: ${files.length}, largest shift ${(100 * cal.maxShiftFraction).toFixed(1)} % of the frame, overlap ${(100 * cal.overlapFraction).toFixed(0)} % of the panel`,
    ...describeProfile(cal.profile),
    ...cal.warnings.map((w) => `warning: ${w}`),
  ];
  return { profile: cal.profile, lines };
}
