// File helpers: hashing, reading a photo once, making output folders, atomic writes.

import { createHash, randomBytes } from 'node:crypto';
import { mkdirSync, readFileSync, statSync } from 'node:fs';
import { open, readFile, rename, unlink } from 'node:fs/promises';
import { basename, dirname, join, resolve } from 'node:path';
import { EvenfieldError, type ErrorCode } from '../errors.js';

/**
 * A small text file the user names (criteria, manifest, a calibration file) as UTF-8. Throws
 * 'not-found' ("<what> not found") when it does not exist, else `code` with the system's reason.
 */
export function readTextFile(path: string, what: string, code: ErrorCode): string {
  try {
    return readFileSync(path, 'utf8');
  } catch (e) {
    const sys = (e as NodeJS.ErrnoException).code;
    if (sys === 'ENOENT') throw new EvenfieldError('not-found', `${what} not found`, path);
    throw new EvenfieldError(code, `cannot read the ${what} (${sys ?? String(e)})`, path);
  }
}

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

/** A plain reason for a failed folder or file operation, from its error code. */
function outputReason(code: string | undefined, fallback: string): string {
  switch (code) {
    case 'EACCES':
    case 'EPERM':
      return 'permission denied';
    case 'EROFS':
      return 'read-only file system';
    case 'ENOSPC':
      return 'disk full';
    case 'ENOTDIR':
      return 'a file is in the way';
    case 'ENOENT':
      // the parent exists (it was checked or made just before): a file system that takes no new folders
      return 'the file system refused it: ENOENT';
    default:
      return code ?? fallback;
  }
}

/**
 * Create a folder and any missing parents (as `mkdir -p`), or throw an EvenfieldError with code 'output'
 * that names the folder and why. Written out rather than with mkdirSync's `recursive` option, which on
 * some special file systems never returns: under Linux's /proc a mkdir fails with "no such file" though
 * the parent exists, and Node's recursive mkdir (Node 20) then creates the parent and tries again, for
 * ever.
 */
export function makeFolder(path: string): void {
  const target = resolve(path);
  const missing: string[] = [];
  for (let p = target; ; ) {
    let isDir: boolean | null = null;
    try {
      isDir = statSync(p).isDirectory();
    } catch (e) {
      const code = (e as NodeJS.ErrnoException).code;
      if (code !== 'ENOENT' && code !== 'ENOTDIR') throw new EvenfieldError('output', `cannot create the folder (${outputReason(code, (e as Error).message)})`, path);
    }
    if (isDir === true) break;
    if (isDir === false) throw new EvenfieldError('output', `cannot create the folder (${p === target ? 'a file of that name exists' : `${p} is a file`})`, path);
    missing.push(p);
    const up = dirname(p);
    if (up === p) break;
    p = up;
  }
  for (const d of missing.reverse()) {
    try {
      mkdirSync(d);
    } catch (e) {
      const code = (e as NodeJS.ErrnoException).code;
      // made meanwhile by another process: fine
      if (code === 'EEXIST' && statSync(d, { throwIfNoEntry: false })?.isDirectory()) continue;
      throw new EvenfieldError('output', `cannot create the folder (${outputReason(code, (e as Error).message)})`, path);
    }
  }
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
