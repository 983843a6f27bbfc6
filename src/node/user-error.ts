// defines: UserError — an error the user can act on (a file that is not there, a full
// disk, an option out of range). The command line prints its message alone, with no
// stack trace (src/cli/common.ts, runCommand); the Node layer throws it for the faults of
// files it reads and writes.

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
