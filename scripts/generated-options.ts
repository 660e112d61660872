// The measurement options the studies and tests use for a photo of the generator: the scene's pattern
// (gray at its level in %), its panel size, a 9-point grid of cell centres, no report images. `more`
// adds or overrides the rest (the truth's corners, a falloff model, STUDY_QUALITY, mura on or off ...).

import type { PhotoSpec } from '../fixtures/generator/index.js';
import { DEFAULT_MEASURE_OPTIONS, DEFAULT_QUALITY_LIMITS } from '../lib/pipeline/index.js';
import type { MeasureOptions } from '../lib/pipeline/index.js';

/** The quality limits with the viewing-angle gate opened: the generator draws no angular emission
 *  unless asked, and its random poses reach past the gate's warning. */
export const STUDY_QUALITY = { ...DEFAULT_QUALITY_LIMITS, maxViewAngleDeg: 90, warnViewAngleDeg: 90 };

export function generatedPhotoOptions(spec: PhotoSpec, more: Partial<MeasureOptions> = {}): MeasureOptions {
  const pattern = spec.panel.pattern;
  return {
    ...DEFAULT_MEASURE_OPTIONS,
    pattern,
    patternLevel: pattern === 'gray' ? Math.round(100 * (spec.panel.level ?? 0.5)) : null,
    panelSizeMm: { width: spec.panel.widthMm, height: spec.panel.heightMm },
    grid: { layout: 9, placement: 'cells', insetFraction: 0.1, spotRadiusPct: 2 },
    artifacts: false,
    ...more,
  };
}
