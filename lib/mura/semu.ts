// SEMU: the SEMI D31-1102 index of how visible a luminance mura is.
//
//   SEMU = |C| / Cjnd,   Cjnd = a / S^b + c   (%),   C in %, S in mm² of panel area
//
// with a = 1.97, b = 0.33, c = 0.72 as the defaults. The constants are quoted from memory of the
// standard (it was not read), so they are settable. SEMU 1 is a just-noticeable mura.

import { EvenfieldError } from '../errors.js';

export interface SemuConstants {
  /** numerator of the area term, % (default 1.97) */
  a: number;
  /** area exponent (default 0.33) */
  b: number;
  /** contrast floor at large areas, % (default 0.72) */
  c: number;
}

export const DEFAULT_SEMU_CONSTANTS: Readonly<SemuConstants> = Object.freeze({ a: 1.97, b: 0.33, c: 0.72 });

function checkConstants(k: SemuConstants): void {
  for (const [name, v] of Object.entries(k)) {
    if (!Number.isFinite(v)) throw new EvenfieldError('usage', `SEMU constant ${name} must be a finite number, got ${v}`);
  }
  if (k.a < 0 || k.c < 0 || k.a + k.c <= 0) throw new EvenfieldError('usage', 'SEMU constants a and c must be >= 0 and not both 0');
}

/** Just-noticeable contrast (%) of a mura of the given area (mm²). */
export function jndContrast(areaMm2: number, constants: SemuConstants = DEFAULT_SEMU_CONSTANTS): number {
  checkConstants(constants);
  if (!(areaMm2 > 0) || !Number.isFinite(areaMm2)) {
    throw new EvenfieldError('usage', `mura area must be a positive number of mm², got ${areaMm2}`);
  }
  return constants.a / Math.pow(areaMm2, constants.b) + constants.c;
}

/** SEMU of a mura of mean contrast contrastPct (%, either sign) and area areaMm2 (mm²). */
export function semu(contrastPct: number, areaMm2: number, constants: SemuConstants = DEFAULT_SEMU_CONSTANTS): number {
  if (!Number.isFinite(contrastPct)) throw new EvenfieldError('usage', `mura contrast must be finite, got ${contrastPct}`);
  return Math.abs(contrastPct) / jndContrast(areaMm2, constants);
}
