// lib/io: the only part of evenfield that reads photos. Decoding to linear light (sharp), EXIF
// (exifr), hashing and atomic writes.

export {
  DEFAULT_MAX_PIXELS,
  STATS_SAMPLE_LIMIT,
  decodePhoto,
  decodePhotoBuffer,
  exposureQuantiles,
  reduceLinearBox,
  scaleForLongSide,
  setDecoderThreads,
  toFullSize,
  toScaled,
  type DecodeOptions,
  type DecodedPhoto,
  type Reduced,
  type ScaleMethod,
} from './decode.js';
export { EMPTY_EXPOSURE, exifDateToIso, exposureFromTags, readExif, type ExifResult } from './exif.js';
export { makeFolder, readInputFile, readTextFile, sha256OfBuffer, writeFileAtomic } from './files.js';
export { CAMERA_RAW_ADVICE, CAMERA_RAW_EXTENSIONS, cameraRawKind, describeDecodeFailure, describeStart, lossyNonJpegCoding, sniffFormat, type SniffedFormat } from './sniff.js';
export { kthSmallest, orderStatistics, quantile, quantiles } from './stats.js';
export { readIccSummary, readPngColourChunks, srgbColorantsD50, type CurveKind, type IccSummary, type PngColourChunks } from './tags.js';
