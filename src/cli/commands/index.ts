// defines: the list of CLI commands, in the order `--help` shows them.
import type { Command } from 'commander';

export const commands: Array<(program: Command) => void> = [];
