// A falloff profile object for the tests: a made-up phone camera (400 x 300 frames), the model given.
import { PROFILE_FORMAT } from '../../lib/falloff/index.js';
import type { FalloffProfile } from '../../lib/falloff/index.js';

export function makeProfile(over: Partial<FalloffProfile['model']> = {}): FalloffProfile {
  return {
    format: PROFILE_FORMAT,
    version: 1,
    kind: 'flat-frames',
    createdAt: null,
    camera: {
      make: 'Acme',
      model: 'Phone 9',
      lens: 'main camera 4.2mm f/1.8',
      focalLengthMm: 4.2,
      focal35mm: 26,
      fNumber: 1.8,
      imageWidth: 400,
      imageHeight: 300,
    },
    model: { centre: [0, 0], radial: [-0.5, 0.1], surfaceOrder: 0, surface: [], channels: null, ...over },
    fit: {
      frames: 3,
      samples: 100,
      rejectedSamples: 0,
      residualRmsPct: 0.1,
      residualMaxPct: 0.3,
      removedTiltPct: { x: 0.5, y: -0.2 },
      radialConversionErrorPct: 0.01,
      cornerTransmission: 0.6,
      centreUncertainty: null,
      conditioning: null,
      notes: [],
    },
  };
}
