// defines: the list of CLI commands, in the order `--help` shows them.
import type { Command } from 'commander';
import { register as check } from './check.js';
import { register as score } from './score.js';
import { register as inspect } from './inspect.js';
import { register as exportModel } from './export.js';
import { register as features } from './features.js';

export const commands: Array<(program: Command) => void> = [check, score, inspect, exportModel, features];
