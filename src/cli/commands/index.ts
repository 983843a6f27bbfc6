// defines: the list of CLI commands, in the order `--help` shows them.
import type { Command } from 'commander';
import { register as demo } from './demo.js';
import { register as check } from './check.js';
import { register as features } from './features.js';
import { register as train } from './train.js';
import { register as job } from './job.js';
import { register as evalAndPredict } from './eval.js';
import { register as score } from './score.js';
import { register as ask } from './ask.js';
import { register as exportModel } from './export.js';
import { register as inspect } from './inspect.js';

export const commands: Array<(program: Command) => void> = [
  demo,
  check,
  features,
  train,
  job,
  evalAndPredict,
  score,
  ask,
  exportModel,
  inspect,
];
