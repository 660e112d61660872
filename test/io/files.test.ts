import { afterAll, describe, expect, it } from 'vitest';
import { mkdirSync, readFileSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { quantile as ssQuantile, median as ssMedian } from 'simple-statistics';
import { EvenfieldError } from '../../lib/errors.js';
import { kthSmallest, makeFolder, orderStatistics, quantile, quantiles, readInputFile, sha256OfBuffer, writeFileAtomic } from '../../lib/io/index.js';
import { gauss, lcg, tempDir } from './helpers.js';

const tmp = tempDir();
afterAll(() => tmp.cleanup());

describe('sha256OfBuffer', () => {
  it('matches the FIPS 180-2 example vectors', () => {
    // FIPS 180-2, appendix B.1 and B.2
    expect(sha256OfBuffer(Buffer.from('abc'))).toBe('ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad');
    expect(sha256OfBuffer(Buffer.from('abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq'))).toBe(
      '248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1',
    );
    // empty input (well-known value of SHA-256 of the empty string)
    expect(sha256OfBuffer(new Uint8Array(0))).toBe('e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855');
  });
});

describe('makeFolder', () => {
  // the behaviour of POSIX `mkdir -p` (IEEE Std 1003.1, mkdir utility): missing parents made, an
  // existing folder left as it is, a file in the way an error
  it('makes missing parents and leaves an existing folder alone', () => {
    const d = tmp.file('mk/a/b/c');
    makeFolder(d);
    expect(statSync(d).isDirectory()).toBe(true);
    writeFileSync(`${d}/keep.txt`, 'x');
    makeFolder(d);
    expect(readdirSync(d)).toEqual(['keep.txt']);
  });

  it("fails with 'output', naming the folder, when a file is in the way", () => {
    const f = tmp.file('mk-file');
    writeFileSync(f, 'x');
    for (const [path, why] of [
      [f, 'a file of that name exists'],
      [`${f}/sub/deeper`, `${f} is a file`],
    ]) {
      let err: unknown = null;
      try {
        makeFolder(path);
      } catch (e) {
        err = e;
      }
      expect(err).toBeInstanceOf(EvenfieldError);
      expect((err as EvenfieldError).code).toBe('output');
      expect((err as EvenfieldError).message).toBe(`${path}: cannot create the folder (${why})`);
    }
  });
});

describe('writeFileAtomic', () => {
  it('writes, then replaces, leaving no temporary files', async () => {
    const dir = tmp.file('out1');
    mkdirSync(dir);
    const f = `${dir}/results.json`;
    await writeFileAtomic(f, '{"a":1}');
    expect(readFileSync(f, 'utf8')).toBe('{"a":1}');
    await writeFileAtomic(f, Buffer.from([1, 2, 3]));
    expect([...readFileSync(f)]).toEqual([1, 2, 3]);
    expect(readdirSync(dir)).toEqual(['results.json']);
  });

  it("fails with 'output' when the folder is missing, and removes its temporary file when the rename fails", async () => {
    let err: unknown = null;
    try {
      await writeFileAtomic(tmp.file('no/such/folder/x.csv'), 'x');
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(EvenfieldError);
    expect((err as EvenfieldError).code).toBe('output');
    expect((err as EvenfieldError).message).toMatch(/folder does not exist/);

    // target is an existing non-empty folder: the write succeeds, the rename fails
    const dir = tmp.file('out2');
    mkdirSync(`${dir}/report.pdf`, { recursive: true });
    writeFileSync(`${dir}/report.pdf/keep`, 'k');
    err = null;
    try {
      await writeFileAtomic(`${dir}/report.pdf`, 'pdf bytes');
    } catch (e) {
      err = e;
    }
    expect((err as EvenfieldError).code).toBe('output');
    expect(readdirSync(dir)).toEqual(['report.pdf']);
  });
});

describe('readInputFile', () => {
  it('maps missing, folder and empty to EvenfieldError codes', async () => {
    const codeOf = async (p: string) => {
      try {
        await readInputFile(p);
        return 'none';
      } catch (e) {
        return (e as EvenfieldError).code;
      }
    };
    expect(await codeOf(tmp.file('missing.png'))).toBe('not-found');
    mkdirSync(tmp.file('folder.jpg'));
    expect(await codeOf(tmp.file('folder.jpg'))).toBe('unreadable');
    writeFileSync(tmp.file('empty.jpg'), '');
    expect(await codeOf(tmp.file('empty.jpg'))).toBe('unreadable');
  });
});

describe('quantiles without sorting', () => {
  // Reference: sort, then definition 7 of Hyndman & Fan (1996), the default of R and NumPy.
  function q7(values: Float32Array, p: number): number {
    const s = Array.from(values).sort((a, b) => a - b);
    const h = (s.length - 1) * p;
    const lo = Math.floor(h);
    return s[lo]! + (h - lo) * (s[Math.min(lo + 1, s.length - 1)]! - s[lo]!);
  }

  it('median agrees with simple-statistics; other quantiles with definition 7', () => {
    const g = gauss(lcg(9));
    for (const n of [1, 2, 3, 10, 1001, 200_000]) {
      const data = new Float32Array(n).map(() => 0.2 + 0.01 * g());
      expect(quantile(data, 0.5)).toBeCloseTo(ssMedian(Array.from(data)), 12);
      for (const p of [0, 0.001, 0.25, 0.999, 1]) expect(quantile(data, p)).toBeCloseTo(q7(data, p), 12);
    }
  });

  it('agrees with simple-statistics quantile (which interpolates like definition 7)', () => {
    const rnd = lcg(4);
    const data = new Float32Array(1000).map(() => rnd());
    const arr = Array.from(data);
    for (const p of [0.0005, 0.1, 0.5, 0.9, 0.999, 0.9995]) expect(quantile(data, p)).toBeCloseTo(ssQuantile(arr, p), 12);
    expect(kthSmallest(data, 999)).toBe(Math.max(...arr));
  });

  it('handles heavy ties and concentrated values (a black frame with a few bright pixels)', () => {
    const n = 300_000;
    const data = new Float32Array(n);
    for (let i = 0; i < 50; i++) data[i * 997] = 1;
    for (let i = 0; i < 1000; i++) data[i * 211 + 5] = 1e-6 * (i + 1);
    for (const p of [0.5, 0.99, 0.999, 0.9999, 0.99995]) expect(quantile(data, p)).toBe(q7(data, p));
  });

  it('several ranks at once match a sort, including a bin too full to collect (1.5 M ties)', () => {
    const rnd = lcg(12);
    const data = new Float32Array(50_000).map(() => rnd() ** 3);
    const sorted = Array.from(data).sort((a, b) => a - b);
    const ranks = [0, 1, 17, 25_000, 49_950, 49_999, 25_000];
    expect(orderStatistics(data, ranks)).toEqual(ranks.map((k) => sorted[k]));
    expect(quantiles(data, [0.5, 0.999])).toEqual([quantile(data, 0.5), quantile(data, 0.999)]);
    const ties = new Float32Array(1_500_000);
    for (let i = 0; i < 300; i++) ties[i * 4999] = 1e-7 * (i + 1);
    ties[7] = 1;
    for (const p of [0.5, 0.9999, 0.99995, 0.999999]) expect(quantile(ties, p)).toBe(q7(ties, p));
  });

  it('rejects bad arguments', () => {
    expect(() => kthSmallest(new Float32Array(0), 0)).toThrow(RangeError);
    expect(() => kthSmallest(new Float32Array(3), 3)).toThrow(RangeError);
    expect(() => quantile(new Float32Array(3), 1.5)).toThrow(RangeError);
  });
});
