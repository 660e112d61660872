// The acceptance-criteria schema: what a criteria file may say, and which values are impossible.
//
// Every object is strict (an unknown key is an error, usually a typo that would otherwise silently
// switch a limit off). Limits are optional: a limit that is absent is not judged. Sections with
// settings the measurement needs (grid, uncertainty, mura) have defaults, so the effective criteria
// can always be printed in full.

import { z } from 'zod';
import type { BlobKind, Pattern } from '../types.js';

export const PATTERNS: readonly Pattern[] = ['white', 'gray', 'black', 'red', 'green', 'blue'];

export const BLOB_KINDS: readonly BlobKind[] = [
  'spot',
  'cloud',
  'line',
  'band',
  'edge-glow',
  'corner-glow',
  'seam',
  'hotspot-array',
];

/** Blob kinds that are light leaking or glowing at the panel border (judged by the glow limits on black). */
export const GLOW_KINDS: readonly BlobKind[] = ['edge-glow', 'corner-glow'];

/** Names a pattern's `reportOnly` list may hold: the limit keys of a pattern section. */
export const LIMIT_KEYS = [
  'minOverMaxPctMin',
  'maxOverMinMax',
  'maxDeviationFromCentrePctMax',
  'maxDuvFromCentreMax',
  'maxDuvAnyPairMax',
  'maxSemu',
  'blobs',
  'glow.maxContrastPct',
  'glow.maxSemu',
  'glow.maxAreaMm2',
  'luminanceCdM2',
] as const;
export type LimitKey = (typeof LIMIT_KEYS)[number];

// Defaults of the settings sections. The default criteria file states the same values with their
// sources; a test checks that the two agree.
export const DEFAULT_GRID = { layout: 9, placement: 'cells', insetPct: 10, spotRadiusPct: 2 } as const;
export const DEFAULT_UNCERTAINTY = {
  uniformityPctPoints: 1,
  maxOverMin: 0.02,
  deviationPctPoints: 1,
  duv: 0.003,
  semu: 0.2,
  contrastPctPoints: 1,
  luminancePct: 10,
} as const;
export const DEFAULT_MURA = { minFeatureMm: 1 } as const;

const finite = () => z.number({ error: (iss) => typeProblem('a number', iss.input) });

/** Percent figure that cannot leave 0..100. */
const percent = (what: string) =>
  finite()
    .min(0, { error: `${what} is a percentage and cannot be below 0 %` })
    .max(100, { error: `${what} is a percentage and cannot exceed 100 %` });

const nonNegative = (what: string) => finite().min(0, { error: `${what} cannot be negative` });
const positive = (what: string) => finite().gt(0, { error: `${what} must be greater than 0` });
const count = (what: string) =>
  finite()
    .int({ error: `${what} is a count and must be a whole number` })
    .min(0, { error: `${what} is a count and cannot be negative` });

/** A plain-English problem for a value of the wrong type. */
export function typeProblem(expected: string, input: unknown): string {
  if (input === undefined) return 'required key is missing';
  if (input === null) return `has no value; expected ${expected}`;
  const got = Array.isArray(input) ? 'a list' : typeof input === 'object' ? 'a mapping' : `${typeof input} ${JSON.stringify(input)}`;
  return `expected ${expected}, got ${got}`;
}

const PanelSchema = z.strictObject({
  widthMm: positive('panel width'),
  heightMm: positive('panel height'),
});

const GridSchema = z.strictObject({
  layout: z
    .union([z.literal(5), z.literal(9), z.literal(13), z.literal(25)], {
      error: (iss) => `${iss.input === undefined ? 'required key is missing' : `${JSON.stringify(iss.input)} is not a layout`}; use 5, 9, 13 or 25 points`,
    })
    .default(DEFAULT_GRID.layout),
  placement: z
    .enum(['cells', 'inset'], {
      error: (iss) => `${JSON.stringify(iss.input)} is not a placement; use cells or inset`,
    })
    .default(DEFAULT_GRID.placement),
  insetPct: finite()
    .gt(0, { error: 'the inset must be greater than 0 % of the panel' })
    .lt(50, { error: 'the inset must be below 50 % of the panel (the points would cross the centre)' })
    .default(DEFAULT_GRID.insetPct),
  spotRadiusPct: finite()
    .gt(0, { error: 'the measurement spot radius must be greater than 0' })
    .max(10, { error: 'a spot radius above 10 % of the diagonal runs past the panel edge or into neighbouring points' })
    .default(DEFAULT_GRID.spotRadiusPct),
});

const UncertaintySchema = z.strictObject({
  uniformityPctPoints: nonNegative('the uniformity allowance').default(DEFAULT_UNCERTAINTY.uniformityPctPoints),
  maxOverMin: nonNegative('the max/min allowance').default(DEFAULT_UNCERTAINTY.maxOverMin),
  deviationPctPoints: nonNegative('the deviation allowance').default(DEFAULT_UNCERTAINTY.deviationPctPoints),
  duv: nonNegative("the Δu'v' allowance").default(DEFAULT_UNCERTAINTY.duv),
  semu: nonNegative('the SEMU allowance').default(DEFAULT_UNCERTAINTY.semu),
  contrastPctPoints: nonNegative('the contrast allowance').default(DEFAULT_UNCERTAINTY.contrastPctPoints),
  luminancePct: percent('the luminance allowance').default(DEFAULT_UNCERTAINTY.luminancePct),
});

const MuraSchema = z.strictObject({
  minFeatureMm: positive('the minimum feature size').default(DEFAULT_MURA.minFeatureMm),
  /** [columns, rows] of the modules of a tiled wall; absent = one panel */
  tileGrid: z
    .tuple(
      [
        count('tile columns').min(1, { error: 'a tiled wall has at least 1 column' }),
        count('tile rows').min(1, { error: 'a tiled wall has at least 1 row' }),
      ],
      { error: (iss) => typeProblem('[columns, rows]', iss.input) },
    )
    .optional(),
});

const blobCountShape = Object.fromEntries(
  [...BLOB_KINDS, 'any'].map((k) => [k, count(`the ${k} blob count limit`).optional()]),
) as Record<BlobKind | 'any', z.ZodOptional<ReturnType<typeof count>>>;

const BlobLimitsSchema = z.strictObject({
  countFromSemu: nonNegative('the SEMU from which blobs count').default(0),
  maxCount: z.strictObject(blobCountShape),
});

const LuminanceWindowSchema = z
  .strictObject({
    min: nonNegative('a luminance').optional(),
    max: positive('a luminance maximum').optional(),
    at: z
      .enum(['centre', 'every-point'], {
        error: (iss) => `${JSON.stringify(iss.input)} is not a place; use centre or every-point`,
      })
      .default('centre'),
  })
  .check((ctx) => {
    const w = ctx.value;
    if (w.min === undefined && w.max === undefined) {
      ctx.issues.push({ code: 'custom', input: w, path: [], message: 'a luminance window needs min, max or both' });
    } else if (w.min !== undefined && w.max !== undefined && w.min > w.max) {
      ctx.issues.push({
        code: 'custom',
        input: w.max,
        path: ['max'],
        message: `impossible window: maximum ${w.max} cd/m² is below minimum ${w.min} cd/m²`,
      });
    }
  });

const GlowLimitsSchema = z.strictObject({
  maxContrastPct: nonNegative('a glow contrast limit').optional(),
  maxSemu: nonNegative('a glow SEMU limit').optional(),
  maxAreaMm2: nonNegative('a glow area limit').optional(),
});

const patternFields = {
  required: z.boolean({ error: (iss) => typeProblem('true or false', iss.input) }).default(false),
  minOverMaxPctMin: percent('min/max uniformity').optional(),
  maxOverMinMax: finite()
    .min(1, { error: 'a max/min ratio cannot be below 1 (the largest point is never below the smallest)' })
    .optional(),
  maxDeviationFromCentrePctMax: nonNegative('a deviation limit').optional(),
  maxDuvFromCentreMax: nonNegative("a Δu'v' limit").optional(),
  maxDuvAnyPairMax: nonNegative("a Δu'v' limit").optional(),
  maxSemu: nonNegative('a SEMU limit').optional(),
  blobs: BlobLimitsSchema.optional(),
  luminanceCdM2: LuminanceWindowSchema.optional(),
  reportOnly: z
    .array(
      z.enum(LIMIT_KEYS, {
        error: (iss) => `${JSON.stringify(iss.input)} is not a limit name; use one of ${LIMIT_KEYS.join(', ')}`,
      }),
      { error: (iss) => typeProblem('a list of limit names', iss.input) },
    )
    .default([]),
};

function limitIsSet(section: Record<string, unknown>, key: LimitKey): boolean {
  if (key.startsWith('glow.')) {
    const glow = section.glow as Record<string, unknown> | undefined;
    return glow !== undefined && glow[key.slice(5)] !== undefined;
  }
  return section[key] !== undefined;
}

/** reportOnly may only name limits the same section sets. */
function checkReportOnly(ctx: z.core.ParsePayload<Record<string, unknown> & { reportOnly: LimitKey[] }>): void {
  ctx.value.reportOnly.forEach((key, i) => {
    if (!limitIsSet(ctx.value, key)) {
      ctx.issues.push({
        code: 'custom',
        input: key,
        path: ['reportOnly', i],
        message: `names ${key}, which this pattern does not set`,
      });
    }
  });
}

const PatternSchema = z.strictObject(patternFields).check(checkReportOnly);
/** Black adds the limits on light leaking or glowing at the border. */
const { reportOnly: reportOnlyField, ...limitFields } = patternFields;
const BlackPatternSchema = z
  .strictObject({ ...limitFields, glow: GlowLimitsSchema.optional(), reportOnly: reportOnlyField })
  .check(checkReportOnly);

const PatternsSchema = z.strictObject({
  white: PatternSchema.optional(),
  gray: PatternSchema.optional(),
  black: BlackPatternSchema.optional(),
  red: PatternSchema.optional(),
  green: PatternSchema.optional(),
  blue: PatternSchema.optional(),
});

export const CriteriaSchema = z.strictObject({
  name: z.string({ error: (iss) => typeProblem('a text', iss.input) }).min(1, { error: 'the name cannot be empty' }),
  description: z.string({ error: (iss) => typeProblem('a text', iss.input) }).optional(),
  panel: PanelSchema.optional(),
  grid: GridSchema.prefault({}),
  uncertainty: UncertaintySchema.prefault({}),
  mura: MuraSchema.prefault({}),
  patterns: PatternsSchema,
});

export type Criteria = z.output<typeof CriteriaSchema>;
export type CriteriaInput = z.input<typeof CriteriaSchema>;
export type PatternCriteria = z.output<typeof PatternSchema>;
export type BlackPatternCriteria = z.output<typeof BlackPatternSchema>;
export type BlobLimits = z.output<typeof BlobLimitsSchema>;
export type GlowLimits = z.output<typeof GlowLimitsSchema>;
export type LuminanceWindow = z.output<typeof LuminanceWindowSchema>;
export type Uncertainty = z.output<typeof UncertaintySchema>;

/** The keys an object schema accepts at a path of the criteria (for "unknown key" hints), or null. */
export function allowedKeysAt(path: readonly PropertyKey[]): string[] | null {
  let s: unknown = CriteriaSchema;
  for (const seg of [...path, null]) {
    // unwrap optional / default / prefault / pipe wrappers
    for (let guard = 0; guard < 10; guard++) {
      const def = (s as { _zod?: { def?: { innerType?: unknown; in?: unknown } } })._zod?.def;
      if (def?.innerType) s = def.innerType;
      else if (def?.in) s = def.in;
      else break;
    }
    const shape = (s as { shape?: Record<string, unknown> }).shape;
    if (!shape) return null;
    if (seg === null) return Object.keys(shape);
    s = shape[String(seg)];
    if (s === undefined) return null;
  }
  return null;
}
