// Full-field mura: background model, contrast map, features across scales, kinds, SEMU.
export { analyseMura, workRaster, neighbourNoise, RESOLVABLE_DIAMETERS_MM, type MuraAnalysis } from './analyse.js';
export { semu, jndContrast, DEFAULT_SEMU_CONSTANTS, type SemuConstants } from './semu.js';
export { resolveMuraOptions, type MuraOptions, type MuraOptionsInput, type BackgroundOptions, type CodeLevel, type LensField } from './options.js';
export { fitBackground, legendre, type BackgroundFit, type LensTerm, type WorkRaster } from './background.js';
