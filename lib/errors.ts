// One error type for everything the user can cause: bad files, bad options, bad criteria.
// `code` is stable and machine-readable (it goes into results.json as errorCode);
// the message is one line that names the file and the problem.

export type ErrorCode =
  | 'usage' // bad command-line option or combination
  | 'not-found' // file or folder does not exist
  | 'unreadable' // not an image, truncated, zero bytes, unsupported format
  | 'lossy-format' // a lossy coding other than JPEG's (lossy WebP, HEIF, AVIF): its artefacts read as mura
  | 'too-large' // pixel count above the decompression limit
  | 'no-panel' // no panel outline found in the photo
  | 'partly-outside' // panel not wholly inside the frame
  | 'clipped' // highlights clipped on the panel
  | 'too-dark' // panel signal lost in the noise floor
  | 'blurred' // panel edges out of focus or motion-blurred
  | 'glare' // specular reflection on the panel
  | 'moire' // strong moiré on the panel
  | 'flicker' // bands from the display's pulsed light caught by a rolling shutter
  | 'too-oblique' // viewing angle too far from the panel normal
  | 'falloff' // falloff profile or calibration problem
  | 'response' // camera response file or exposure bracket problem
  | 'manifest' // manifest problem
  | 'criteria' // criteria file problem
  | 'output' // output folder problem
  | 'internal';

export class EvenfieldError extends Error {
  readonly code: ErrorCode;
  readonly file: string | null;
  constructor(code: ErrorCode, message: string, file: string | null = null) {
    super(file ? `${file}: ${message}` : message);
    this.name = 'EvenfieldError';
    this.code = code;
    this.file = file;
  }
}

/** Exit statuses of the command (documented in the README). */
export const EXIT = {
  allPass: 0,
  someFail: 1,
  unusable: 2,
  /** evenfield itself could not run: not built, its process could not start, or a fault of its own (an
   *  unexpected exception): kept apart from 2 so that a script never reads a broken run as a lot with an
   *  unusable photo in it */
  failed: 3,
} as const;

/** The exit status for an error that ended the whole command: 2 for a problem with the input or the
 *  command line, 3 for a fault of evenfield's own (an `internal` error or any other exception). */
export function exitStatusOf(e: unknown): number {
  return isEvenfieldError(e) && e.code !== 'internal' ? EXIT.unusable : EXIT.failed;
}

export function isEvenfieldError(e: unknown): e is EvenfieldError {
  return e instanceof EvenfieldError;
}
