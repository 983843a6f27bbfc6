// defines: the `demo` command (`npm run demo`) — the whole job on the shipped base reader
// and the invented demo handbook: measure the base on the validation questions,
// fine-tune on the training questions, measure again, and write the model directory with
// int8 and ONNX exports under runs/.
import { access } from 'node:fs/promises';
import { join } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { CAUTION } from '../../io/model-card.js';
import { readerWarnings } from '../../eval/reader-warnings.js';
import { scoresObject, scoresTable } from '../scores.js';
import { DEFAULT_BASE, configFromOptions, trainReader, type TrainOptions } from './train.js';

const DEMO = 'tiny-models/demo';

function stamp(d = new Date()): string {
  const p = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}${p(d.getMonth() + 1)}${p(d.getDate())}-${p(d.getHours())}${p(d.getMinutes())}${p(d.getSeconds())}`;
}

export function register(program: Command): void {
  program
    .command('demo')
    .description('the whole job on the shipped base and the demo handbook: before/after scores and exports under runs/')
    .option('--base <dir>', 'the base model directory', DEFAULT_BASE)
    .option('--out <dir>', 'where to write (default runs/demo-<date>-<time>)')
    .option('--epochs <n>', 'passes over the training windows (default 2)', '2')
    .option('--lr <x>', 'peak learning rate (default: the one suggested for the base width, as train)')
    .option('--seed <n>', 'seed for data order and dropout')
    .option('--json', 'print {before, after, out} as one JSON object on the last line')
    .action((o: Pick<TrainOptions, 'base' | 'epochs' | 'lr' | 'seed' | 'json'> & { out?: string }) =>
      runCommand(async () => {
        const train = join(DEMO, 'train.jsonl');
        const validation = join(DEMO, 'validation.jsonl');
        for (const f of [train, validation, join(o.base, 'config.json')]) {
          try {
            await access(f);
          } catch {
            throw new UserError(`${f} is missing (run from the repository's top folder)`);
          }
        }
        const out = o.out ?? join('runs', `demo-${stamp()}`);
        const config = configFromOptions({ train, base: o.base, out, epochs: o.epochs, lr: o.lr, seed: o.seed });
        const log = (line: string) => process.stderr.write(`${line}\n`);
        log(`demo: fine-tuning ${o.base} on ${train}, measuring on ${validation}, writing ${out}`);
        const run = await trainReader({ train, eval: validation, base: o.base, out, measureBase: true, int8: true, onnx: true }, config, log);
        const before = run.before!;
        const after = run.after!;
        if (o.json) return printJson({ before: scoresObject(before), after: scoresObject(after), out });
        const rows = [
          { label: 'base', scores: before.summary },
          { label: 'fine-tuned', scores: after.summary },
        ];
        if (after.tuned) rows.push({ label: `fine-tuned, threshold ${after.tuned.threshold.toFixed(2)}`, scores: after.tuned.summary });
        process.stdout.write(`\nvalidation (${validation})\n${scoresTable(rows)}\n`);
        const warnings = readerWarnings(after.tuned?.summary ?? after.summary, before.tuned?.summary ?? before.summary);
        if (warnings.length > 0) warnings.push(`The base's card (${join(o.base, 'MODEL_CARD.md')}) says how it was measured.`);
        process.stdout.write(`${warnings.map((w) => `${w}\n`).join('')}\n`);
        process.stdout.write(`${run.train.length} training questions, ${run.config.epochs} epochs, ${run.seconds.toFixed(0)} s in all\n`);
        process.stdout.write(`model directory: ${out}/\n`);
        for (const f of run.files) process.stdout.write(`  ${f.name.padEnd(24)} ${f.bytes.toLocaleString('en-US').padStart(12)} bytes\n`);
        process.stdout.write(`checkpoints:     ${out}/checkpoints/\n`);
        process.stdout.write(`try it:          npm run spanwright -- ask --model ${out} --passages ${DEMO}/passages.jsonl --question "…"\n`);
        process.stdout.write(`\n${CAUTION}\n`);
      }),
    );
}
