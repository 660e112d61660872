// Acceptance criteria, verdicts and reasons.
export {
  CriteriaSchema,
  PATTERNS,
  BLOB_KINDS,
  GLOW_KINDS,
  LIMIT_KEYS,
  DEFAULT_GRID,
  DEFAULT_UNCERTAINTY,
  DEFAULT_MURA,
  allowedKeysAt,
} from './schema.js';
export type {
  Criteria,
  CriteriaInput,
  PatternCriteria,
  BlackPatternCriteria,
  BlobLimits,
  GlowLimits,
  LuminanceWindow,
  Uncertainty,
  LimitKey,
} from './schema.js';
export {
  loadCriteria,
  parseCriteria,
  effectiveCriteriaYaml,
  criteriaHash,
  canonicalJson,
  defaultCriteriaPath,
  formatProblem,
  commentsByKey,
  CriteriaError,
} from './load.js';
export type { LoadedCriteria, CriteriaProblem, CarriedComments } from './load.js';
export { judgePanel, worstMargin, patternLabel } from './judge.js';
export { criteriaSummaryLines, criteriaSummary } from './summary.js';
export type { CriteriaSummaryLine, CriteriaSummaryRecord } from './summary.js';
export type { JudgeablePhoto, JudgedReason, PanelJudgement } from './judge.js';
