// Lens falloff (vignetting): models, calibration from flat frames or shifted photos, and profiles.
// Pure data in and out; the only (de)serialisation is profileToJson / profileFromJson on JSON text.

export {
  FULL_FRAME_DIAGONAL_MM,
  cos4AtRadius,
  cos4FocalFromExposure,
  cos4Transmission,
  fieldAngleDeg,
  focalPxFrom35mm,
} from './cos4.js';
export type { Cos4Focal } from './cos4.js';
export {
  COARSE_TRANSMISSION_STEP,
  applyCoarseTransmissionWithLuminance,
  coarseCornerTransmission,
  coarseTransmission,
  coarseTransmissionAt,
} from './coarse.js';
export type { CoarseTransmission } from './coarse.js';
export {
  PROFILE_FORMAT,
  PROFILE_VERSION,
  applyTransmission,
  applyTransmissionWithLuminance,
  applyTransmissionToPlane,
  channelTransmissionFromProfile,
  cornerTransmission,
  evaluateModel,
  geometryFor,
  isChannelTransmission,
  modelCornerTransmission,
  profileFromJson,
  profileMismatch,
  profileToJson,
  transmissionFromProfile,
} from './profile.js';
export type {
  ApplyOptions,
  ChannelSurfaces,
  FalloffModel,
  FalloffProfile,
  FitConditioning,
  MismatchOptions,
  ProfileCamera,
  ProfileFit,
  ProfileKind,
  ProfileMatch,
  Transmission,
} from './profile.js';
export { calibrateFromFlats } from './flats.js';
export type { FlatCalibration, FlatMeta, FlatOptions } from './flats.js';
export { legendreInto, normU, normV, radialPolynomial } from './basis.js';
export type { FrameGeometry, SurfaceTerm } from './basis.js';
export { calibrateFromShifted } from './shifted.js';
export type { ShiftedCalibration, ShiftedFrame, ShiftedMeta, ShiftedOptions } from './shifted.js';
