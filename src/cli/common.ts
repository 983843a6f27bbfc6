// defines: runCommand, printJson, and UserError and readBytes from the Node layer
// (src/node/) — what every CLI command shares: errors that reach the user as one clear
// line (a stack trace only with --debug), and JSON output as the last line on stdout.
import { UserError } from '../node/user-error.js';

export { UserError };
export { readBytes } from '../node/read-files.js';

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

/** Prints one JSON object as a single line (the last line a --json command prints). */
export function printJson(value: unknown): void {
  process.stdout.write(`${JSON.stringify(value)}\n`);
}
