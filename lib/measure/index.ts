export { layoutPoints, centreIndex, GRID_LAYOUTS } from './layouts.js';
export type { LayoutPoint } from './layouts.js';
export {
  measureGrid,
  uniformityFigures,
  spotMean,
  spotRadiusPx,
  uvPrime,
  DEFAULT_SPOT_RADIUS_PCT,
} from './grid.js';
export type { GridOptions, SpotMean } from './grid.js';
