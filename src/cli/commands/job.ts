// defines: the `job` command, and writeTorchJob — a self-contained job folder for
// fine-tuning on PyTorch's distributed training (torchrun, DistributedDataParallel), for
// when one machine's CPU is not enough: more cores, several machines, or GPUs.
//
//   1. load     the base directory and the question files, as `train` does
//   2. settle   the train config from the same options as `train`, its windows resolved
//               against the base (src/session/windows.ts)
//   3. build    questions, windows and settings (src/io/torch-job.ts)
//   4. write    those, the base directory (copied), and the program (jobs/torch/*.py)
//
// The folder's layout and the program's contract: DEVELOPERS.md, "Job folders for
// torch.distributed". What comes back — <job>/model — is a model directory that `eval`,
// `export` and the workbench read.
import { mkdir, readFile, readdir, stat } from 'node:fs/promises';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { loadRecords, readModelDir, startEngine, writeFilesAtomically } from '../model-dir.js';
import { hashDataset } from '../../data/hash.js';
import { trainConfig, type TrainConfig } from '../../train/config.js';
import { resolveWindows } from '../../session/windows.js';
import { configFromOptions, DEFAULT_BASE, type TrainOptions } from './train.js';
import type { ExportFile } from '../../io/export.js';

/** The program's files, shipped in the repository and copied into every job folder. */
const PROGRAM_DIR = fileURLToPath(new URL('../../../jobs/torch/', import.meta.url));
export const PROGRAM_FILES = ['train_reader.py', 'reader_model.py', 'job_files.py', 'masking.py'] as const;

export interface JobOptions extends Pick<
  TrainOptions,
  'train' | 'eval' | 'base' | 'out' | 'epochs' | 'lr' | 'batch' | 'accumulate' | 'maxLen' | 'stride' | 'maxQuery' | 'seed' | 'json'
> {
  dropout?: string;
  checkpointEvery?: string;
}

export interface WrittenJob {
  out: string;
  windows: number;
  questions: number;
  updates: number;
  config: TrainConfig;
  baseWeights: 'copied' | 'rewritten';
  files: string[];
}

/** Steps 1–4. */
export async function writeTorchJob(o: JobOptions, log: (line: string) => void): Promise<WrittenJob> {
  // 2a. the settings beside the windows: what `train` would use, with the two this command adds
  const overrides: Partial<TrainConfig> = { ...configFromOptions(o as TrainOptions) };
  if (o.dropout !== undefined) {
    const d = Number(o.dropout);
    if (!(d >= 0 && d < 1)) throw new UserError(`--dropout must be a rate in [0, 1), not "${o.dropout}"`);
    overrides.dropout = d;
  }
  if (o.checkpointEvery !== undefined) {
    const n = Number(o.checkpointEvery);
    if (!Number.isInteger(n) || n < 0)
      throw new UserError(`--checkpoint-every must be a whole number of updates, not "${o.checkpointEvery}"`);
    overrides.checkpointEvery = n;
  }
  const out = o.out;
  await refuseFilledFolder(out);

  // 1. load
  await startEngine();
  const { readCheckpointDir, loadCheckpointDir } = await import('../../io/checkpoint-dir.js');
  const { torchJobFiles, baseWeightsAsIs, JOB_PATHS } = await import('../../io/torch-job.js');
  const { namedToSafetensors } = await import('../../io/safetensors.js');
  const files = await readModelDir(o.base);
  let contents;
  try {
    contents = readCheckpointDir(files);
  } catch (err) {
    throw new UserError((err as Error).message);
  }
  for (const n of contents.notices) log(`note: ${n}`);
  const train = await loadRecords(o.train, log);
  const validation = o.eval ? await loadRecords(o.eval, log) : undefined;

  // 2b. windows resolved against the base, as ReaderSession does before every run
  let config: TrainConfig;
  try {
    const resolved = resolveWindows(
      { maxLength: overrides.maxLength, stride: overrides.stride, maxQueryLength: overrides.maxQueryLength },
      contents.config,
    );
    for (const n of resolved.notes) log(`note: ${n}`);
    config = trainConfig({ ...overrides, ...resolved.settings });
  } catch (err) {
    throw new UserError((err as Error).message);
  }

  // 3. build; the base's weights copied as they are when the program can read them
  const why = baseWeightsAsIs(contents.config, contents);
  const job = torchJobFiles({
    base: { name: o.base, config: contents.config, tokenizer: contents.tokenizer },
    train,
    validation,
    config,
    datasetHash: await hashDataset(train),
    baseWeights: why === null ? { copied: true } : { copied: false, why },
  });
  const written: ExportFile[] = [...job.files];
  for (const name of await readdir(o.base)) {
    const path = join(o.base, name);
    if (!(await stat(path)).isFile()) continue;
    if (name === 'model.safetensors' && why !== null) continue;
    written.push({ name: `${JOB_PATHS.base}/${name}`, bytes: new Uint8Array(await readFile(path)) });
  }
  if (why !== null) {
    log(`note: ${o.base}/model.safetensors: ${why}`);
    const loaded = loadCheckpointDir(files, { seed: 0 });
    try {
      written.push({
        name: `${JOB_PATHS.base}/model.safetensors`,
        bytes: namedToSafetensors(loaded.params.toNamed(), { metadata: { format: 'pt' } }),
      });
    } finally {
      loaded.params.dispose();
    }
  }
  written.push(...(await jobProgramFiles()));
  written.push({
    name: 'README.txt',
    bytes: new TextEncoder().encode(
      howToRun([
        validation !== undefined
          ? `  spanwright eval --model ${join(out, 'model')} --data ${join(out, 'questions/validation.json')}`
          : `  spanwright eval --model ${join(out, 'model')} --data YOUR_VALIDATION_FILE`,
        `  spanwright export --model ${join(out, 'model')} --out DIR --int8 --onnx`,
      ]),
    ),
  });

  // 4. write, all or nothing
  await mkdir(join(out, 'questions'), { recursive: true });
  await mkdir(join(out, JOB_PATHS.base), { recursive: true });
  await writeFilesAtomically(out, written);
  return {
    out,
    windows: job.windows,
    questions: job.train.length,
    updates: job.plan.totalUpdates,
    config,
    baseWeights: why === null ? 'copied' : 'rewritten',
    files: written.map((f) => f.name),
  };
}

/** A job goes into a new or empty folder: writing over another job's files would mix two runs. */
export async function refuseFilledFolder(out: string): Promise<void> {
  let names: string[];
  try {
    names = await readdir(out);
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return;
    throw new UserError(`${out}: cannot be read as a folder (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`);
  }
  if (names.length > 0) throw new UserError(`${out}: the folder is not empty; a job folder is written into a new or empty folder`);
}

/** The program's files (jobs/torch/), as they go into a job folder. */
export async function jobProgramFiles(): Promise<ExportFile[]> {
  const out: ExportFile[] = [];
  for (const name of PROGRAM_FILES) {
    try {
      out.push({ name, bytes: new Uint8Array(await readFile(join(PROGRAM_DIR, name))) });
    } catch {
      throw new UserError(`${join(PROGRAM_DIR, name)}: the job program is missing from this installation`);
    }
  }
  return out;
}

/** A job folder's README.txt: the two ways to run it, then `back` (the way back into Spanwright). */
export function howToRun(back: string[]): string {
  return [
    'A Spanwright job for PyTorch (torch.distributed). Run it from this folder:',
    '',
    '  CPU processes on one machine (gloo), e.g. 2:',
    '    torchrun --standalone --nproc_per_node 2 train_reader.py',
    "  (Debian's torch 1.13 on Python 3.11: add --redirects 1 --tee 1 after torchrun,",
    '   or its launcher fails reading the default "0")',
    '',
    '  one process per GPU on a node (nccl), e.g. 8:',
    '    torchrun --standalone --nproc_per_node 8 train_reader.py --device cuda',
    '',
    '  --resume continues from the newest checkpoint in checkpoints/.',
    '',
    'Back in Spanwright, model/ is a model directory:',
    ...back,
    '',
  ].join('\n');
}

export function register(program: Command): void {
  program
    .command('job')
    .description("write a job folder that fine-tunes the reader on PyTorch's distributed training (torchrun; CPUs or GPUs)")
    .requiredOption('--train <file>', 'training questions (SQuAD JSON layout, JSONL or CSV)')
    .option('--eval <file>', 'validation questions, copied into the folder for `eval` afterwards')
    .option('--base <dir>', 'the base model directory', DEFAULT_BASE)
    .requiredOption('--out <dir>', 'the job folder to write (new or empty)')
    .option('--epochs <n>', 'as for train')
    .option('--lr <x>', "as for train (default by the base's hidden size)")
    .option('--batch <n>', 'windows per micro-batch, as for train')
    .option('--accumulate <n>', "micro-batches per update, as for train; they are shared out among torchrun's processes")
    .option('--max-len <n>', 'tokens per window, as for train')
    .option('--stride <n>', 'as for train')
    .option('--max-query <n>', 'as for train')
    .option('--seed <n>', 'as for train: the data order, and the dropout generator of the program')
    .option('--dropout <rate>', "both dropout rates of the run (default: the base's config.json)")
    .option('--checkpoint-every <n>', 'a checkpoint every this many updates (default: every epoch)')
    .option('--json', 'print {out, windows, questions, updates, baseWeights} as one JSON object on the last line')
    .addHelpText(
      'after',
      `
The folder holds the questions (SQuAD 2.0 layout), the windows the engine would train on
(windows.safetensors), the settings (job.json), the base directory and train_reader.py.
Each update's micro-batches (--accumulate of --batch windows) are shared out among the
processes, so the losses do not depend on how many there are; an --accumulate that the
process count divides keeps every process busy.

Example:
  spanwright job --train questions.jsonl --eval validation.jsonl --out runs/job --accumulate 8
  cd runs/job && torchrun --standalone --nproc_per_node 8 train_reader.py --device cuda
  spanwright eval --model runs/job/model --data runs/job/questions/validation.json`,
    )
    .action((o: JobOptions) =>
      runCommand(async () => {
        const log = (line: string) => process.stderr.write(`${line}\n`);
        const job = await writeTorchJob(o, log);
        if (o.json) {
          printJson({ out: job.out, windows: job.windows, questions: job.questions, updates: job.updates, baseWeights: job.baseWeights });
          return;
        }
        process.stdout.write(
          `job folder: ${job.out} — ${job.questions} questions, ${job.windows} windows of ${job.config.maxLength} tokens, ` +
            `${job.updates} updates of up to ${job.config.batchSize * job.config.gradAccumulation} windows; base weights ${job.baseWeights}\n` +
            `run it: cd ${job.out} && torchrun --standalone --nproc_per_node 2 train_reader.py   (README.txt there has more)\n`,
        );
      }),
    );
}
