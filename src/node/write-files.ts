// defines: writeFileAtomically, writePathsAtomically, writeFilesAtomically,
// writeErrorMessage — how the CLI and the recipe put files on disk: each written under a
// hidden temporary name beside its target, flushed, then renamed over the target (atomic
// within one file system on POSIX), so an interruption never leaves half a file under its
// name; a failed write removes its temporary file and says which file could not be
// written, how large it was, and why in words ("the disk is full"), not an internal error
// code alone.
import { randomBytes } from 'node:crypto';
import { mkdir, open, rename, rm, statfs } from 'node:fs/promises';
import { basename, dirname, join } from 'node:path';
import { UserError } from './user-error.js';

const REASONS: Record<string, string> = {
  ENOSPC: 'the disk is full',
  EDQUOT: 'the disk quota is used up',
  EACCES: 'permission denied',
  EPERM: 'permission denied',
  EROFS: 'the file system is read-only',
  ENOENT: 'its folder does not exist',
  EISDIR: 'a folder has that name',
};

const size = (n: number) =>
  n >= 1 << 20 ? `${(n / (1 << 20)).toFixed(1)} MiB` : n >= 1024 ? `${(n / 1024).toFixed(1)} KiB` : `${n} bytes`;

/** "cannot write FILE (12.3 MiB): the disk is full (ENOSPC; 1.2 MiB free)". */
export async function writeErrorMessage(err: unknown, path: string, bytes: number): Promise<string> {
  const code = (err as NodeJS.ErrnoException).code;
  let free = '';
  if (code === 'ENOSPC' || code === 'EDQUOT') {
    try {
      const s = await statfs(dirname(path));
      free = `; ${size(Number(s.bavail) * Number(s.bsize))} free`;
    } catch {
      // the free space is a courtesy; the message stands without it
    }
  }
  const why = code ? `${REASONS[code] ?? (err as Error).message} (${code}${free})` : (err as Error).message;
  return `cannot write ${path} (${size(bytes)}): ${why}`;
}

/** Writes `bytes` to a flushed temporary file beside `path`; returns its name. */
async function writeTemp(path: string, bytes: Uint8Array): Promise<string> {
  const tmp = join(dirname(path), `.${basename(path)}.tmp-${randomBytes(6).toString('hex')}`);
  let handle;
  try {
    handle = await open(tmp, 'w');
    await handle.writeFile(bytes);
    await handle.sync();
    await handle.close();
    return tmp;
  } catch (err) {
    await handle?.close().catch(() => undefined);
    await rm(tmp, { force: true });
    throw new UserError(await writeErrorMessage(err, path, bytes.length));
  }
}

/** One file, atomically (see the top of this file). */
export async function writeFileAtomically(path: string, data: Uint8Array | string): Promise<void> {
  const bytes = typeof data === 'string' ? new TextEncoder().encode(data) : data;
  const tmp = await writeTemp(path, bytes);
  try {
    await rename(tmp, path);
  } catch (err) {
    await rm(tmp, { force: true });
    throw new UserError(await writeErrorMessage(err, path, bytes.length));
  }
}

/**
 * Several files, each at its own path, all or nothing: every file is first written under
 * its temporary name; only when all are on disk are they renamed into place. A failure
 * while writing removes the temporary files and leaves every target as it was. (A rename
 * can still fail after others succeeded — a folder standing where a file should go — but
 * no temporary file is left behind and the message names the file.)
 */
export async function writePathsAtomically(files: ReadonlyArray<{ path: string; bytes: Uint8Array | string }>): Promise<void> {
  const written: Array<{ tmp: string; path: string; size: number }> = [];
  try {
    for (const f of files) {
      const bytes = typeof f.bytes === 'string' ? new TextEncoder().encode(f.bytes) : f.bytes;
      written.push({ tmp: await writeTemp(f.path, bytes), path: f.path, size: bytes.length });
    }
  } catch (err) {
    for (const w of written) await rm(w.tmp, { force: true });
    throw err;
  }
  for (let i = 0; i < written.length; i++) {
    const w = written[i]!;
    try {
      await rename(w.tmp, w.path);
    } catch (err) {
      for (const rest of written.slice(i)) await rm(rest.tmp, { force: true });
      throw new UserError(await writeErrorMessage(err, w.path, w.size));
    }
  }
}

/** Several files into `dir` (created if missing), all or nothing as writePathsAtomically. */
export async function writeFilesAtomically(dir: string, files: ReadonlyArray<{ name: string; bytes: Uint8Array | string }>): Promise<void> {
  try {
    await mkdir(dir, { recursive: true });
  } catch (err) {
    throw new UserError(await writeErrorMessage(err, dir, 0));
  }
  await writePathsAtomically(files.map((f) => ({ path: join(dir, f.name), bytes: f.bytes })));
}
