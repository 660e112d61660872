// Shared plain-data types. Every stage takes and returns these; only io/ and report/ touch files.
//
// Coordinates (see DEVELOPERS.md):
//  - camera pixels: x right, y down, pixel centres at integer coordinates (top-left pixel covers
//    -0.5..0.5 in both axes);
//  - panel coordinates: u right, v down, 0..1 over the active area as the viewer sees it;
//  - corners: top-left, top-right, bottom-right, bottom-left of the displayed image.

/** Interleaved 3-channel linear-light image (R, G, B per pixel), values relative to the encoding's white (1.0). */
export interface RgbImage {
  width: number;
  height: number;
  data: Float32Array; // length = width * height * 3
}

/** Single-channel image (luminance, a gain map, a contrast map ...). */
export interface Plane {
  width: number;
  height: number;
  data: Float32Array; // length = width * height
}

export type Point = [number, number];
/** top-left, top-right, bottom-right, bottom-left */
export type Corners = [Point, Point, Point, Point];

/** Row-major 3x3 homography, 9 numbers, maps [x, y, 1] -> [x', y', w']. */
export type Homography = number[];

/** Test pattern shown on the panel when the photo was taken. */
export type Pattern = 'white' | 'gray' | 'black' | 'red' | 'green' | 'blue';

/** What the camera recorded about the exposure (EXIF), each field null when absent. */
export interface ExposureRecord {
  make: string | null;
  model: string | null;
  lens: string | null;
  exposureTimeS: number | null;
  fNumber: number | null;
  iso: number | null;
  focalLengthMm: number | null;
  focalLength35mm: number | null;
  dateTime: string | null;
}

/** How a file decoded. */
export interface DecodeInfo {
  format: string; // jpeg, png, tiff ...
  width: number; // full-size pixels in the file
  height: number;
  bitDepth: 8 | 16;
  channels: number; // in the file
  /** How code values were turned into linear light: the sRGB curve, none, a measured camera response, or
   *  the tone curve of the file's embedded colour profile (8-bit files whose profile has another curve). */
  transfer: 'srgb' | 'linear' | 'response' | 'profile';
  /** with transfer 'response' or 'profile': the table's fingerprint (ResponseCurve.id); absent otherwise */
  responseId?: string;
  /** Decoded at 1/scale of full size (JPEG shrink-on-load or box average); 1 = full size. */
  scale: number;
  /**
   * JPEG only (else null): 'float' = decoded by evenfield's own decoder (baseline or progressive) without
   * rounding samples to whole code values; '8bit' = decoded by libvips to whole code values
   * (arithmetic-coded, 12-bit or CMYK files, or when asked).
   */
  jpegSamples: 'float' | '8bit' | null;
  /**
   * 8-bit input: the smallest step, in code values, of the mean level of a flat region as decoded. 1 for
   * whole code values (PNG, TIFF; JPEG decoded to 8 bits when its DC quantiser is 8 or less); for a JPEG
   * decoded in float, the luma DC quantiser over 8 (0.375 at quality 92). Null for 16-bit input.
   */
  levelStepCodes: number | null;
  /**
   * JPEG decoded in float, once the panel is found: the share (0..1) of the panel's flat luma blocks
   * whose mean lies on a whole code value, beyond the share chance gives (pipeline/plateaus.ts). 0: the
   * photo's noise dithered its 8-bit codes; 1: a noise-free staircase of whole codes. The mura analysis
   * takes the level step as the larger of this and levelStepCodes. Null when it cannot be told (too few
   * flat blocks, or a field within a few codes); absent for other input.
   */
  codePlateauShare?: number | null;
  /** the pixels were coded by JPEG: a JPEG file, or a TIFF with JPEG compression (TIFF tag 259 = 6 or 7).
   *  Its 8 x 8 blocks and the ringing at sharp edges are then allowed for (mura border, block size). */
  jpegCoded: boolean;
}

/** Exposure quality of the decoded pixels (whole frame and, once known, the panel area). */
export interface ExposureStats {
  /** Fraction of pixels with any channel at or above the clip threshold (code value >= 0.98 of white). */
  clippedFraction: number;
  /** Fraction of pixels whose largest channel is below 2 code values of 255 (lost in the floor). */
  darkFraction: number;
  /** 99.9th percentile of linear Y. */
  p999: number;
  /** median of linear Y. */
  median: number;
  /** single-pixel spikes on the panel (hot or dead camera pixels, or anything smaller than one working
   *  pixel) replaced by their neighbours' mean before measuring (set by the measurement, not the decoder) */
  spikesRemoved?: number;
}

/** A rectified panel map: linear CIE XYZ (relative units) on a square-pixel grid in panel mm. */
export interface PanelMap {
  width: number;
  height: number;
  /** map pixels per mm (same in both axes). When the panel size is unknown, mmKnown is false and
   *  "mm" are nominal units from the assumed size. */
  pxPerMm: number;
  widthMm: number;
  heightMm: number;
  mmKnown: boolean;
  X: Float32Array;
  Y: Float32Array;
  Z: Float32Array;
  /** 1 where the map pixel has camera data, 0 where it fell outside the photo. */
  valid: Uint8Array;
}

export type GridLayout = 5 | 9 | 13 | 25;
export type GridPlacement = 'cells' | 'inset';

export interface GridPoint {
  index: number; // 1-based, reading order (row by row, top to bottom)
  u: number;
  v: number;
  xMm: number | null;
  yMm: number | null;
  /** mean linear Y in the spot, in the photo's relative units */
  Y: number;
  /** Y / Y(centre point) */
  relative: number;
  uprime: number;
  vprime: number;
  /** Δu'v' from the centre point */
  duvFromCentre: number;
  /** number of map pixels averaged */
  pixels: number;
}

export interface UniformityFigures {
  minOverMaxPct: number;
  nonuniformityPct: number;
  maxOverMin: number;
  cvPct: number;
  /** every point's (Li - Lc)/Lc in % — largest magnitude */
  maxDeviationFromCentrePct: number;
  maxDuvFromCentre: number;
  maxDuvAnyPair: number;
}

export type BlobKind =
  | 'spot'
  | 'cloud'
  | 'line'
  | 'band'
  | 'edge-glow'
  | 'corner-glow'
  | 'seam'
  | 'hotspot-array';

export interface Blob {
  id: number; // 1-based, in SEMU rank order
  kind: BlobKind;
  polarity: 'bright' | 'dark';
  u: number;
  v: number;
  xMm: number;
  yMm: number;
  /** [u0, v0, u1, v1] */
  bbox: [number, number, number, number];
  areaMm2: number;
  /** signed mean contrast over the half-peak region, % */
  contrastPct: number;
  peakContrastPct: number;
  semu: number;
  /** edge or corner for glow: 'top', 'left', 'top-left' ...; pitch for hot-spot arrays, etc. */
  detail: Record<string, string | number>;
}

export interface MuraResult {
  blobs: Blob[];
  maxSemu: number;
  /** 1-sigma contrast noise of the map at the map's own pixel scale, % */
  noiseFloorPct: number;
  /** smallest resolvable contrast (%) at a few feature diameters, mm -> % */
  resolvableContrastPct: Record<string, number>;
  backgroundModel: string;
  /** share of the panel (%) left out of the background fit around the features found (absent in
   *  results written before it) */
  coveredPct?: number;
  /** candidates found and then left out, with the reason (absent in results written before it) */
  leftOut?: LeftOutFinding[];
  /** the panel's steep roll-off the background carried (a plateau falling steeply into the corners),
   *  or null when it carried none (absent in results written before it): its centre as fractions of the
   *  panel's width and height, and the model error (%) over the panel outside the features without and
   *  with it */
  steepRollOff?: { centreU: number; centreV: number; modelErrorPolynomialPct: number; modelErrorRollOffPct: number } | null;
  /** map pixels per pixel of the raster the mura analysis ran on (1 = the map itself) */
  workScale?: number;
  /** smallest feature diameter (mm) the analysed map resolves: two of its pixels across (absent in
   *  results written before it) */
  resolvedFromMm?: number;
}

/** A cloud left out of the findings because a radial roll-off of the panel explained it better. */
export interface LeftOutFinding extends Blob {
  reason: 'roll-off';
  /** model error (%) within three radii of it: with a radial roll-off about it, and with a cloud there */
  modelErrorRollOffPct: number;
  modelErrorCloudPct: number;
}

export interface FalloffRecord {
  applied: boolean;
  /** 'none' | 'profile' | 'flat-frames' | 'cos4-model' */
  method: string;
  source: string | null;
  /** ratio corner/centre of the applied gain's inverse, i.e. how much light the corners had lost */
  cornerFalloff: number | null;
  warnings: string[];
}

export interface GeometryRecord {
  cornersSource: 'auto' | 'manual' | 'shared';
  /** rms of edge-point distances to the fitted edge lines, camera pixels (auto only) */
  edgeResidualPx: number | null;
  /** largest sagitta of the edges' arcs about their fitted lines, camera pixels (lens distortion or a
   *  curved panel; auto, or shared from the photo the corners came from); null when not measured */
  edgeBowPx: number | null;
  /** angle between the camera's optical axis and the panel normal, degrees, when estimable */
  tiltDeg: number | null;
  /** largest angle between the panel normal and the line of sight to any point of the active area, degrees */
  viewAngleMaxDeg: number | null;
  mapWidth: number;
  mapHeight: number;
  pxPerMm: number;
  /** camera pixels per map pixel at the panel centre */
  cameraPxPerMapPx: number;
}

export type PhotoStatus = 'ok' | 'error';

export interface PhotoResult {
  file: string;
  sha256: string;
  pattern: Pattern;
  /** gray level in % when the pattern is gray (e.g. 50) */
  patternLevel: number | null;
  status: PhotoStatus;
  error: string | null;
  /** machine-readable error code, e.g. 'unreadable', 'no-panel', 'clipped' */
  errorCode: string | null;
  decode: DecodeInfo | null;
  exposure: ExposureRecord | null;
  exposureStats: ExposureStats | null;
  corners: Corners | null;
  geometry: GeometryRecord | null;
  falloff: FalloffRecord | null;
  grid: {
    layout: GridLayout;
    placement: GridPlacement;
    insetPct: number | null;
    spotRadiusPct: number;
    points: GridPoint[];
  } | null;
  uniformity: UniformityFigures | null;
  mura: MuraResult | null;
  blobs: Blob[];
  warnings: string[];
  /** black fields with a display-off frame: the frame, its exposure relative to the photo's (the factor
   *  its light was scaled by), and the share (%) of the photo's level on the panel that was its light */
  offFrame?: { file: string; sha256: string; exposureRatio: number; sharePct: number };
}

export type Verdict = 'pass' | 'fail' | 'error';

export interface Reason {
  pattern: Pattern | null;
  figure: string;
  value: number | null;
  limit: number | null;
  /** signed: positive = inside the limit by this much */
  margin: number | null;
  text: string;
  severity: 'fail' | 'error' | 'note';
}

export interface PanelResult {
  panel: string;
  verdict: Verdict;
  reasons: string[];
  reasonDetails: Reason[];
  photos: PhotoResult[];
}
