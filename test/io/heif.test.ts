// Phones save HEVC-coded HEIF ("HEIC") by default; sharp's prebuilt libvips has no HEVC decoder. Such a
// photo is refused as a coding this build cannot read, with what to do, never as damaged data. The
// fixture is a real HEVC HEIF made with libheif's encoder (fixtures/heic/README.md); the message below
// is libvips 8.18's, as sharp 0.35 gives it for that file.
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { decodePhoto, describeDecodeFailure } from '../../lib/io/index.js';

const HEIC = join(__dirname, '..', '..', 'fixtures', 'heic', 'gray-hevc.heic');

describe('HEVC-coded HEIF photos', () => {
  it('are refused as a coding this build cannot read, saying how to get JPEGs', async () => {
    const err = await decodePhoto(HEIC).then(
      () => null,
      (e: Error & { code?: string }) => e,
    );
    expect(err).not.toBeNull();
    expect(err!.code).toBe('unreadable');
    expect(err!.message).toMatch(/HEIF photo coded with HEVC, which this build's image decoder cannot read: take JPEGs instead .*Most Compatible.*heif-convert/);
    expect(err!.message).not.toMatch(/damaged|truncated/);
    expect(err!.message.split('\n')).toHaveLength(1);
  });

  it('reads the missing codec from the decoder message, past the failed seeks listed first', () => {
    const msg =
      'x.heic: bad seek to 1024\nx.heic: bad seek to 512\n' +
      'heif: Error while loading plugin: Support for this compression format has not been built in: HEVC (a suitable decoder plugin is libde265) (11.6003)';
    expect(describeDecodeFailure('heif', msg)).toMatch(/^HEIF photo coded with HEVC/);
    // a damaged file stays damaged
    expect(describeDecodeFailure('heif', 'x.heic: bad seek to 1024')).toMatch(/damaged/);
  });
});
