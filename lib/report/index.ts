// PDF reports: one per panel and one summary per lot, plus the colour maps and encoders they use.

export { renderPanelPdf, panelReportId } from './panel.js';
export { renderLotPdf, lotReportId, lotFigures, orderPanels, worstReason } from './lot.js';
export { VIRIDIS, CIVIDIS, COLOUR_MAPS, falseColour, colourOf, colourIndex, NO_DATA_RGB } from './colourmaps.js';
export type { ColourMap, ColourMapName, RgbRaster } from './colourmaps.js';
export { encodePng, encodePhotoJpeg } from './png.js';
export { findFonts } from './fonts.js';
export { canonicalJson, reportId } from './ids.js';
export * from './format.js';
export type * from './types.js';
