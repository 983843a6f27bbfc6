// defines: the `job` command, and writeTorchJob — a self-contained job folder for
// fine-tuning on PyTorch's distributed training (torchrun, DistributedDataParallel), for
// when one machine's CPU is not enough: more cores, several machines, or GPUs.
//
//   1. settle   the train config from the same options as `train`, and the two of its own
//   2. load     the base directory (every file of it) and the question files, as `train` does
//   3. build    the folder's files: ReaderSession.torchJob (src/session), which the
//               workbench's Export screen calls too, so both write the same folder
//   4. write    them, all or nothing, into a new or empty folder
//
// The folder's layout and the program's contract: DEVELOPERS.md, "Job folders for
// torch.distributed". What comes back — <job>/model — is a model directory that `eval`,
// `export` and the workbench read.
import { mkdir, readFile, readdir, stat } from 'node:fs/promises';
import { join } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { loadRecords, readModelDir, startEngine, writeFilesAtomically } from '../../node/model-dir.js';
import type { TrainConfig } from '../../train/config.js';
import { configFromOptions, DEFAULT_BASE, type TrainOptions } from './train.js';
import type { ExportFile } from '../../io/export.js';
import { JOB_PATHS } from '../../io/torch-job.js';
import { jobProgramFiles, refuseFilledFolder } from '../../node/job-folder.js';

export { howToRun } from '../../io/torch-job.js';

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
  // 1. what `train` would use, with the two settings this command adds
  const config: TrainConfig = { ...configFromOptions(o as TrainOptions) };
  if (o.dropout !== undefined) {
    const d = Number(o.dropout);
    if (!(d >= 0 && d < 1)) throw new UserError(`--dropout must be a rate in [0, 1), not "${o.dropout}"`);
    config.dropout = d;
  }
  if (o.checkpointEvery !== undefined) {
    const n = Number(o.checkpointEvery);
    if (!Number.isInteger(n) || n < 0)
      throw new UserError(`--checkpoint-every must be a whole number of updates, not "${o.checkpointEvery}"`);
    config.checkpointEvery = n;
  }
  const out = o.out;
  await refuseFilledFolder(out);

  // 2. load
  await startEngine();
  const { ReaderSession } = await import('../../session/reader-session.js');
  const session = new ReaderSession(null, { jobProgram: jobProgramFiles });
  try {
    const files = await readModelDir(o.base);
    try {
      const info = session.loadBase({
        name: o.base,
        files,
        names: files.names! as { config: string; weights: string; vocab: string },
        directory: await folderFiles(o.base, { 'model.safetensors': files.safetensors }),
      });
      for (const n of info.notices) log(`note: ${n}`);
    } catch (err) {
      throw new UserError((err as Error).message);
    }
    const train = await loadRecords(o.train, log);
    const validation = o.eval ? await loadRecords(o.eval, log) : undefined;

    // 3. build
    let job;
    try {
      job = await session.torchJob({ train, validation, config, folder: out });
    } catch (err) {
      if (err instanceof UserError) throw err;
      throw new UserError((err as Error).message);
    }
    for (const n of job.notes) log(`note: ${n}`);

    // 4. write, all or nothing
    await mkdir(join(out, 'questions'), { recursive: true });
    await mkdir(join(out, JOB_PATHS.base), { recursive: true });
    await writeFilesAtomically(out, job.files);
    return {
      out,
      windows: job.windows,
      questions: job.questions,
      updates: job.updates,
      config: job.config,
      baseWeights: job.baseWeights,
      files: job.files.map((f) => f.name),
    };
  } finally {
    session.dispose();
  }
}

/** Every file of a folder (not its subfolders), by name; `known` gives bytes already read. */
async function folderFiles(dir: string, known: Record<string, Uint8Array>): Promise<ExportFile[]> {
  const out: ExportFile[] = [];
  for (const name of (await readdir(dir)).sort()) {
    const path = join(dir, name);
    if (!(await stat(path)).isFile()) continue;
    out.push({ name, bytes: known[name] ?? new Uint8Array(await readFile(path)) });
  }
  return out;
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
