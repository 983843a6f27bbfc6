// defines: UserError, runCommand, readTextFile, printJson — what every CLI command shares:
// errors that reach the user as one clear line (a stack trace only with --debug), and
// JSON output as the last line on stdout.
import { readFile, stat } from 'node:fs/promises';

/** An error caused by the user's input or options: printed without a stack trace. */
export class UserError extends Error {
  constructor(
    message: string,
    readonly exitCode = 1,
  ) {
    super(message);
    this.name = 'UserError';
  }
}

let debug = false;

export function setDebug(on: boolean): void {
  debug = on;
}

/**
 * Runs a command body and turns any failure into a message and an exit code.
 * Expected problems (UserError) print their message; unexpected ones print
 * "internal error" and the message, and the stack only with --debug.
 */
export async function runCommand(body: () => Promise<number | void>): Promise<void> {
  try {
    const code = await body();
    process.exitCode = typeof code === 'number' ? code : 0;
  } catch (err) {
    const e = err instanceof Error ? err : new Error(String(err));
    // faults of the input found below the CLI — a damaged checkpoint, weights that do not
    // fit their config — are told as the user's problem too (by name: importing their
    // modules here would load the engine for every command)
    if (e instanceof UserError || e.name === 'CheckpointError' || e.name === 'WeightsError') {
      process.stderr.write(`spanwright: ${e.message}\n`);
      process.exitCode = e instanceof UserError ? e.exitCode : 1;
    } else {
      process.stderr.write(`spanwright: internal error: ${e.message}\n`);
      process.exitCode = 2;
    }
    if (debug && e.stack) process.stderr.write(`${e.stack}\n`);
  }
}

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

/** Prints one JSON object as a single line (the last line a --json command prints). */
export function printJson(value: unknown): void {
  process.stdout.write(`${JSON.stringify(value)}\n`);
}
