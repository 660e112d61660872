// File helpers: hashing, reading a photo once, atomic writes.

import { createHash, randomBytes } from 'node:crypto';
import { open, readFile, rename, unlink } from 'node:fs/promises';
import { basename, dirname, join, resolve } from 'node:path';
import { EvenfieldError } from '../errors.js';

/** Lower-case hex SHA-256 of a buffer. */
export function sha256OfBuffer(data: Uint8Array): string {
  return createHash('sha256').update(data).digest('hex');
}

/**
 * Read a whole file into memory, turning file-system failures into EvenfieldErrors:
 * missing -> 'not-found'; a folder, no permission or an empty file -> 'unreadable'.
 */
export async function readInputFile(file: string): Promise<Buffer> {
  let buf: Buffer;
  try {
    buf = await readFile(file);
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ENOENT' || code === 'ENOTDIR') throw new EvenfieldError('not-found', 'file not found', file);
    if (code === 'EISDIR') throw new EvenfieldError('unreadable', 'is a folder, not an image file', file);
    if (code === 'EACCES' || code === 'EPERM') throw new EvenfieldError('unreadable', 'permission denied', file);
    throw new EvenfieldError('unreadable', `cannot read file (${code ?? (e as Error).message})`, file);
  }
  if (buf.length === 0) throw new EvenfieldError('unreadable', 'empty file (0 bytes)', file);
  return buf;
}

/**
 * Write a file so that readers see either the old content or the new, never a part: the data go
 * to a temporary file in the same folder, are flushed to disk (fsync), and the temporary file is
 * renamed over the target. On failure the temporary file is removed and an EvenfieldError with
 * code 'output' is thrown.
 */
export async function writeFileAtomic(path: string, data: string | Uint8Array): Promise<void> {
  const target = resolve(path);
  const dir = dirname(target);
  const tmp = join(dir, `.${basename(target)}.${process.pid}.${randomBytes(6).toString('hex')}.tmp`);
  let created = false;
  try {
    const fh = await open(tmp, 'wx', 0o666);
    created = true;
    try {
      await fh.writeFile(data);
      await fh.sync();
    } finally {
      await fh.close();
    }
    await rename(tmp, target);
    created = false;
  } catch (e) {
    if (created) await unlink(tmp).catch(() => undefined);
    const err = e as NodeJS.ErrnoException;
    const what =
      err.code === 'ENOENT'
        ? 'folder does not exist'
        : err.code === 'EISDIR'
          ? 'a folder is in the way'
          : err.code === 'EACCES' || err.code === 'EPERM'
            ? 'permission denied'
            : err.code === 'ENOSPC'
              ? 'disk full'
              : (err.code ?? err.message);
    throw new EvenfieldError('output', `cannot write file (${what})`, path);
  }
  // Make the rename itself durable; not every platform lets a folder be opened for fsync.
  try {
    const dh = await open(dir, 'r');
    try {
      await dh.sync();
    } finally {
      await dh.close();
    }
  } catch {
    /* best effort */
  }
}
