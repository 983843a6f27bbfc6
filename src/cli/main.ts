// defines: the `spanwright` command line. Each command lives in ./commands/<name>.ts and
// exports `register(program)`; this file only wires them together.
import { Command } from 'commander';
import { setDebug } from './common.js';
import { commands } from './commands/index.js';

const program = new Command();
program
  .name('spanwright')
  .description(
    'Adapt a small extractive question-answering reader to your own documents, on the CPU, offline.',
  )
  .option('--debug', 'print stack traces for internal errors')
  .hook('preAction', (cmd) => setDebug(Boolean(cmd.optsWithGlobals().debug)))
  .showHelpAfterError();

for (const register of commands) register(program);

await program.parseAsync(process.argv);
