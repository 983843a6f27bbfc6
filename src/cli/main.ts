// defines: the `spanwright` command line. Each command lives in ./commands/<name>.ts and
// exports `register(program)`; this file only wires them together.
import { Command } from 'commander';
import { setDebug } from './common.js';
import { commands } from './commands/index.js';

// `spanwright inspect … | head`: when the reader of our output goes away, stop quietly (what
// a command-line tool is expected to do when its pipe closes) instead of a stack trace
for (const stream of [process.stdout, process.stderr]) {
  stream.on('error', (err: NodeJS.ErrnoException) => {
    if (err.code === 'EPIPE') process.exit(0);
    throw err;
  });
}

const program = new Command();
program
  .name('spanwright')
  .description('Adapt a small extractive question-answering reader to your own documents, on the CPU, offline.')
  .option('--debug', 'print stack traces for internal errors')
  .hook('preAction', (cmd) => setDebug(Boolean(cmd.optsWithGlobals().debug)))
  .showHelpAfterError();

for (const register of commands) register(program);

await program.parseAsync(process.argv);
