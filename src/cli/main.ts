// defines: the `spanwright` command line. Each command lives in ./commands/<name>.ts and
// exports `register(program)`; this file only wires them together.
import { Command, InvalidArgumentError } from 'commander';
import { setDebug } from './common.js';
import { setThreadsOption } from '../node/kernel-threads.js';
import { commands } from './commands/index.js';

// `spanwright inspect … | head`: when the reader of our output goes away, stop quietly (what
// a command-line tool is expected to do when its pipe closes) instead of a stack trace
for (const stream of [process.stdout, process.stderr]) {
  stream.on('error', (err: NodeJS.ErrnoException) => {
    if (err.code === 'EPIPE') process.exit(0);
    throw err;
  });
}

function parseThreads(value: string): number {
  const n = Number(value);
  if (!Number.isInteger(n) || n < 1) throw new InvalidArgumentError('a whole number of threads, 1 or more');
  return n;
}

const program = new Command();
program
  .name('spanwright')
  .description('Adapt a small extractive question-answering reader to your own documents, on the CPU, offline.')
  .option('--debug', 'print stack traces for internal errors')
  .option('--threads <n>', 'threads for the training kernels (default: every core, or SPANWRIGHT_THREADS)', parseThreads)
  .hook('preAction', (cmd) => {
    const opts = cmd.optsWithGlobals<{ debug?: boolean; threads?: number }>();
    setDebug(Boolean(opts.debug));
    setThreadsOption(opts.threads ?? null);
  })
  .showHelpAfterError();

for (const register of commands) register(program);

await program.parseAsync(process.argv);
