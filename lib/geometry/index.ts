// Panel geometry: homographies, finding the panel in a photo, rectification, pose from corners.
export {
  solveHomography,
  applyHomography,
  invertHomography,
  reprojectionError,
  normaliseHomography,
  multiply3,
  panelToCamera,
  UNIT_SQUARE,
  type ReprojectionError,
} from './homography.js';
export { findPanel, type FindPanelOptions, type PanelFind } from './findPanel.js';
export { quadraticFit } from './edges.js';
export {
  checkQuadrilateral,
  orderCorners,
  cornerAngles,
  signedArea,
  isConvexClockwise,
  type QuadCheckOptions,
} from './quad.js';
export { rectifyRgb, rectifyPlane, footprintAt, type RectifyOptions, type RectifiedRgb, type RectifiedPlane } from './rectify.js';
export { estimatePose, type PanelPose } from './pose.js';
