export { measurePhoto, chooseScale, orientCorners, DEFAULT_MEASURE_OPTIONS } from './measure-photo.js';
export type { MeasureOptions, PhotoMeasurement, PhotoArtifacts, FalloffChoice, SharedGeometry } from './measure-photo.js';
export { checkPanelQuality, DEFAULT_QUALITY_LIMITS, insideQuad } from './quality.js';
export type { QualityLimits } from './quality.js';
