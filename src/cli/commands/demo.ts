// defines: the `demo` command (`npm run demo`) — the whole job on the shipped base reader
// and the invented demo handbook: measure the base on the validation questions, train on
// practice questions written from the training passages (src/practice), fine-tune on the
// training questions, measure again beside the word-overlap baseline, and write the model
// directory with int8 and ONNX exports under runs/.
import { access } from 'node:fs/promises';
import { join } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { CAUTION } from '../../io/model-card.js';
import { readerWarnings } from '../../eval/reader-warnings.js';
import { scoresObject, scoresTable } from '../scores.js';
import { DEFAULT_BASE, PRACTICE_DEFAULTS, configFromOptions, practiceFromOptions, trainReader, type TrainOptions } from './train.js';

const DEMO = 'tiny-models/demo';

function stamp(d = new Date()): string {
  const p = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}${p(d.getMonth() + 1)}${p(d.getDate())}-${p(d.getHours())}${p(d.getMinutes())}${p(d.getSeconds())}`;
}

export function register(program: Command): void {
  program
    .command('demo')
    .description(
      'the whole job on the shipped base and the demo handbook: practice questions from the training passages, fine-tuning, before/after scores beside a word-overlap baseline, exports under runs/',
    )
    .option('--base <dir>', 'the base model directory', DEFAULT_BASE)
    .option('--out <dir>', 'where to write (default runs/demo-<date>-<time>)')
    .option(
      '--epochs <n>',
      'passes over the training questions (default 4 with practice questions mixed in, each epoch with new ones; 2 otherwise)',
    )
    .option('--lr <x>', 'peak learning rate (default: the one suggested for the base width, as train)')
    .option('--seed <n>', 'seed for data order and dropout')
    .option('--practice-stage', 'train on the practice questions in a stage of their own before fine-tuning, not mixed into it')
    .option(
      '--practice-per-passage <n>',
      `practice questions written per training passage (default ${PRACTICE_DEFAULTS.mixedPerPassage} per epoch mixed into fine-tuning, new ones each epoch; ${PRACTICE_DEFAULTS.perPassage} in a stage of their own)`,
    )
    .option('--practice-epochs <n>', `passes over the practice questions (default ${PRACTICE_DEFAULTS.epochs}); 0 skips the practice stage`)
    .option(
      '--domain-minutes <n>',
      'first train the encoder with masked-LM on the training passages for about this many minutes (default 0)',
    )
    .option('--json', 'print {before, afterPractice, after, afterTrainedCut, baseline, out} as one JSON object on the last line')
    .action(
      (
        o: Pick<TrainOptions, 'base' | 'epochs' | 'lr' | 'seed' | 'json' | 'practiceEpochs' | 'practicePerPassage' | 'domainMinutes'> & {
          out?: string;
          practiceStage?: boolean;
        },
      ) =>
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
          // mixed in, the practice questions are new for each epoch, so more epochs keep teaching:
          // 4 gave F1 41.8 on 3 seeds, 2 gave 39.5 (DEVELOPERS.md, "Facts found while building")
          const mixed = o.practiceStage !== true && o.practiceEpochs !== '0';
          const epochs = o.epochs ?? (mixed ? '4' : '2');
          const options: TrainOptions = { train, base: o.base, out, epochs, lr: o.lr, seed: o.seed };
          const config = configFromOptions(options);
          // the practice stage reads the training split's passages only, never the validation passages
          const practiceOptions: TrainOptions = {
            ...options,
            practiceFrom: o.practiceEpochs === '0' ? undefined : 'train',
            practiceEpochs: o.practiceEpochs,
            practicePerPassage: o.practicePerPassage,
            practiceMixed: mixed,
            domainMinutes: o.domainMinutes,
          };
          const log = (line: string) => process.stderr.write(`${line}\n`);
          log(
            `demo: ${practiceOptions.practiceFrom ? 'practice questions from the training passages, then ' : ''}fine-tuning ${o.base} on ${train}, measuring on ${validation}, writing ${out}`,
          );
          const run = await trainReader(
            {
              train,
              eval: validation,
              base: o.base,
              out,
              measureBase: true,
              int8: true,
              onnx: true,
              practice: (records) => practiceFromOptions(practiceOptions, records, config),
            },
            config,
            log,
          );
          const before = run.before!;
          const after = run.after!;
          const cut = run.afterTrainedCut!;
          const baseline = run.baseline!;
          if (o.json) {
            return printJson({
              before: scoresObject(before),
              afterPractice: run.practice?.afterPractice ? scoresObject(run.practice.afterPractice) : null,
              after: scoresObject(after),
              afterTrainedCut: { threshold: cut.threshold, kindBonus: cut.kindBonus, ...scoresObject({ summary: cut.summary }) },
              baseline: scoresObject({ summary: baseline.summary }),
              out,
            });
          }
          const rows = [
            { label: 'word-overlap baseline', scores: baseline.summary },
            { label: 'base', scores: before.summary },
            ...(run.practice?.afterPractice ? [{ label: 'after practice', scores: run.practice.afterPractice.summary }] : []),
            { label: 'fine-tuned', scores: after.summary },
            { label: `fine-tuned, cut ${cut.threshold.toFixed(2)} and kind bonus ${cut.kindBonus} from training`, scores: cut.summary },
          ];
          process.stdout.write(`\nvalidation (${validation}); no-answer cuts are chosen on the training questions\n${scoresTable(rows)}\n`);
          const warnings = readerWarnings(cut.summary, before.summary, baseline.summary);
          if (warnings.length > 0)
            warnings.push(
              `(The warnings compare the row "fine-tuned, cut … and kind bonus … from training" with the base and the baseline. The base's card, ${join(o.base, 'MODEL_CARD.md')}, says how it was measured.)`,
            );
          process.stdout.write(`${warnings.map((w) => `${w}\n`).join('')}\n`);
          if (run.domain)
            process.stdout.write(
              `masked-LM on the ${new Set(run.train.map((r) => r.passageId)).size} training passages: ${run.domain.passes} passes, ${run.domain.updates} updates, ${run.domain.seconds.toFixed(0)} s\n`,
            );
          if (run.mixedPractice)
            process.stdout.write(
              `${run.mixedPractice.questions} practice questions from the ${new Set(run.train.map((r) => r.passageId)).size} training passages, mixed into fine-tuning\n`,
            );
          if (run.practice)
            process.stdout.write(
              `${run.practice.questions} practice questions from the ${new Set(run.train.map((r) => r.passageId)).size} training passages, ${run.practice.updates} updates, ${run.practice.seconds.toFixed(0)} s\n`,
            );
          process.stdout.write(`${run.train.length} training questions, ${run.config.epochs} epochs, ${run.seconds.toFixed(0)} s in all\n`);
          process.stdout.write(`model directory: ${out}/\n`);
          for (const f of run.files) process.stdout.write(`  ${f.name.padEnd(24)} ${f.bytes.toLocaleString('en-US').padStart(12)} bytes\n`);
          process.stdout.write(`checkpoints:     ${out}/checkpoints/\n`);
          process.stdout.write(
            `try it:          npm run spanwright -- ask --model ${out} --passages ${DEMO}/passages.jsonl --question "…"\n`,
          );
          process.stdout.write(`\n${CAUTION}\n`);
        }),
    );
}
