// defines: readBytes — a whole file read into memory, with a failure told as the user's
// problem (UserError) naming the file and the reason: missing, a folder, too large for
// Node to read at once.
import { readFile, stat } from 'node:fs/promises';
import { UserError } from './user-error.js';

/** Reads a whole file as bytes, with a user-facing error naming the file when it cannot. */
export async function readBytes(path: string): Promise<Uint8Array> {
  try {
    const buffer = await readFile(path);
    // a view of Node's buffer, not a copy of it: a copy holds the file twice at its peak
    return new Uint8Array(buffer.buffer, buffer.byteOffset, buffer.byteLength);
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    if (code === 'ENOENT') throw new UserError(`${path}: no such file`);
    if (code === 'EISDIR') throw new UserError(`${path}: is a folder, not a file`);
    if (code === 'ERR_FS_FILE_TOO_LARGE') {
      const size = await stat(path).then(
        (s) => `${(s.size / 1e9).toFixed(1)} GB`,
        () => 'over 2 GiB',
      );
      throw new UserError(`${path}: the file is ${size}, more than Node reads into memory at once (2 GiB); split it into smaller files`);
    }
    throw new UserError(`${path}: cannot read (${code ?? (err as Error).message})`);
  }
}
