// defines: torchJobFiles, TorchJobRequest, TorchJob, maskedLmJobFiles, MaskedLmJobRequest,
// JOB_FORMAT, JOB_PATHS, JOB_PROGRAM_FILES, howToRun, baseWeightsAsIs — the data files of a job folder for PyTorch's
// distributed training (jobs/torch/): the same run the engine would take, handed to
// torch.distributed when one CPU is not enough. Two kinds: fine-tuning on labelled
// questions (torchJobFiles, `spanwright job`) and masked-LM pretraining on packed rows
// (maskedLmJobFiles, the base recipe's `--job`). No Node APIs here: the callers add the
// base directory and the program files and write the folder; a page could zip the same list.
//
//   1. questions     the cleaned training (and validation) questions in the SQuAD 2.0
//                    JSON layout, read back so the windows below follow the order a
//                    reader of that file sees (writing groups questions by passage)
//   2. windows       the engine's own training windows of those questions
//                    (src/train/finetune.ts trainingWindows), as int32 arrays, with the
//                    data order of every epoch (src/train/batches.ts epochOrder): the
//                    Python side needs no tokenizer and reads what the engine would read
//   3. settings      job.json: the resolved train config, its plan (updates, warmup),
//                    the reader config in the engine's spelling (for checkpoint metas),
//                    the dataset hash, and where everything is
//
// Layout and the program's contract: DEVELOPERS.md, "Job folders for torch.distributed".

import { parseDataset, writeDataset } from '../data/load.js';
import type { QARecord } from '../data/record.js';
import type { ReaderConfig } from '../model/config.js';
import { parameterShapes } from '../model/config.js';
import type { FeatureTokenizer } from '../text/features.js';
import { epochOrder } from '../train/batches.js';
import type { TrainConfig } from '../train/config.js';
import { trainingWindows } from '../train/finetune.js';
import type { PackedSequences } from '../train/mlm-data.js';
import { planTraining, type TrainPlan } from '../train/schedule.js';
import type { ExportFile } from './export.js';
import { writeSafetensors } from './safetensors.js';
import type { NamedTensors } from './tensors.js';

/** job.json's "format"; the program refuses a folder of another format or a later version. */
export const JOB_FORMAT = 'spanwright-torch-job';
export const JOB_VERSION = 1;

/** Where things sit inside the folder (DEVELOPERS.md lists the whole layout). */
export const JOB_PATHS = {
  settings: 'job.json',
  train: 'questions/train.json',
  validation: 'questions/validation.json',
  windows: 'windows.safetensors',
  base: 'base',
  program: 'train_reader.py',
  /** masked-LM jobs: the packed rows in shards, and their data order */
  rows: 'rows',
  order: 'order.safetensors',
} as const;

/**
 * The program's files (jobs/torch/), beside job.json in every job folder. The CLI reads
 * them from the installation (src/node/job-folder.ts jobProgramFiles), the workbench's
 * worker has them in its bundle (workers/job-program.ts); both give this list.
 */
export const JOB_PROGRAM_FILES = ['train_reader.py', 'reader_model.py', 'job_files.py', 'masking.py'] as const;

/** Packed rows per shard file of a masked-LM job: 65 536 rows of 128 tokens are 32 MiB. */
export const ROWS_PER_SHARD = 65_536;

export interface TorchJobRequest {
  /** the base reader the run starts from, as the engine loaded it */
  base: { name: string; config: ReaderConfig; tokenizer: FeatureTokenizer };
  train: readonly QARecord[];
  validation?: readonly QARecord[];
  /** the train config with its window fields already resolved against the base (resolveWindows) */
  config: TrainConfig;
  /** src/data/hash.ts hashDataset of `train` */
  datasetHash: string;
  /** what job.json says about base/model.safetensors (baseWeightsAsIs) */
  baseWeights: { copied: boolean; why?: string };
  /** ISO 8601 time written into job.json (a test fixes it) */
  now?: string;
}

export interface TorchJob {
  files: ExportFile[];
  plan: TrainPlan;
  windows: number;
  /** the training questions in the order the windows were built from */
  train: QARecord[];
  settings: Record<string, unknown>;
}

/** Steps 1–3. */
export function torchJobFiles(req: TorchJobRequest): TorchJob {
  const encoder = new TextEncoder();
  const files: ExportFile[] = [];
  // 1. questions, and the training ones as the file gives them back
  const trainText = writeDataset(req.train, 'squad');
  const reread = parseDataset(trainText, JOB_PATHS.train);
  if (reread.records.length !== req.train.length) {
    throw new Error(`${JOB_PATHS.train}: ${req.train.length} questions were written but ${reread.records.length} read back`);
  }
  const train = reread.records;
  files.push({ name: JOB_PATHS.train, bytes: encoder.encode(trainText) });
  if (req.validation && req.validation.length > 0) {
    files.push({ name: JOB_PATHS.validation, bytes: encoder.encode(writeDataset(req.validation, 'squad')) });
  }

  // 2. windows and their order
  const { features } = trainingWindows({ tokenizer: req.base.tokenizer, train, config: req.config, base: req.base });
  const N = features.length;
  const T = req.config.maxLength;
  const plan = planTraining(req.config, N);
  const column = (field: 'inputIds' | 'tokenTypeIds' | 'attentionMask') => {
    const out = new Int32Array(N * T);
    features.forEach((f, i) => out.set(f[field], i * T));
    return out;
  };
  const order = new Int32Array(plan.epochs * N);
  for (let e = 0; e < plan.epochs; e++) order.set(epochOrder(N, req.config.seed, e), e * N);
  const windows = writeSafetensors(
    [
      ['input_ids', { dtype: 'I32', shape: [N, T], data: column('inputIds') }], // [N, T]
      ['token_type_ids', { dtype: 'I32', shape: [N, T], data: column('tokenTypeIds') }], // [N, T]
      ['attention_mask', { dtype: 'I32', shape: [N, T], data: column('attentionMask') }], // [N, T]
      ['start_positions', { dtype: 'I32', shape: [N], data: Int32Array.from(features, (f) => f.startPosition) }], // [N]
      ['end_positions', { dtype: 'I32', shape: [N], data: Int32Array.from(features, (f) => f.endPosition) }], // [N]
      ['epoch_order', { dtype: 'I32', shape: [plan.epochs, N], data: order }], // [E, N]
    ],
    {
      // which question each window was cut from, for anyone tracing a window back
      'spanwright.window-records': JSON.stringify(features.map((f) => [f.recordId, f.window])),
    },
  );
  files.push({ name: JOB_PATHS.windows, bytes: windows });

  // 3. settings
  const settings = {
    format: JOB_FORMAT,
    version: JOB_VERSION,
    task: 'span',
    written: req.now ?? new Date().toISOString(),
    base: {
      name: req.base.name,
      folder: JOB_PATHS.base,
      weights: req.baseWeights.copied ? 'copied' : 'rewritten',
      ...(req.baseWeights.why ? { why: req.baseWeights.why } : {}),
    },
    reader: req.base.config,
    train: req.config,
    plan,
    datasetHash: req.datasetHash,
    windows: {
      file: JOB_PATHS.windows,
      count: N,
      maxLength: req.config.maxLength,
      stride: req.config.stride,
      maxQueryLength: req.config.maxQueryLength,
      questionMatch: req.base.config.questionMatch ?? null,
    },
    questions: {
      train: JOB_PATHS.train,
      count: train.length,
      validation: req.validation && req.validation.length > 0 ? JOB_PATHS.validation : null,
    },
    program: JOB_PATHS.program,
  };
  files.unshift({ name: JOB_PATHS.settings, bytes: encoder.encode(`${JSON.stringify(settings, null, 2)}\n`) });
  return { files, plan, windows: N, train, settings };
}

export interface MaskedLmJobRequest {
  /** the starting weights' name (a folder, or "random start, seed N") and config */
  base: { name: string; config: ReaderConfig };
  /** the packed `[CLS] … [SEP]` rows (src/train/mlm-data.ts packDocuments) */
  rows: PackedSequences;
  /** the run's settings: rows per update (batchSize × gradAccumulation), epochs, rate, warmup, mlmProbability */
  config: TrainConfig;
  /** BERT's masking: the ids a row's [MASK] and random draws use, and the ids never chosen */
  masking: { maskId: number; vocabSize: number; specialIds: readonly number[] };
  /** names the training data, for checkpoints (the recipe's manifest hash) */
  datasetHash: string;
  rowsPerShard?: number;
  now?: string;
}

/**
 * The data files of a masked-LM job: job.json (task "masked-lm"), the rows in shards
 * `rows/rows-00000.safetensors` … (input_ids I32 [R_s, T], lengths I32 [R_s]) and
 * order.safetensors (epoch_order I32 [E, R], the engine's permutation of each epoch). The
 * program masks each micro-batch as the engine's collateMlm does, from the same seeds.
 */
export function maskedLmJobFiles(req: MaskedLmJobRequest): { files: ExportFile[]; plan: TrainPlan; settings: Record<string, unknown> } {
  const R = req.rows.count;
  const T = req.rows.maxLength;
  if (T !== req.config.maxLength)
    throw new Error(`masked-LM job: rows of ${T} tokens, but the config's maxLength is ${req.config.maxLength}`);
  const per = req.rowsPerShard ?? ROWS_PER_SHARD;
  const plan = planTraining(req.config, R);
  const files: ExportFile[] = [];
  const shards: Array<{ file: string; rows: number }> = [];
  for (let first = 0, n = 0; first < R; first += per, n++) {
    const last = Math.min(R, first + per);
    const file = `${JOB_PATHS.rows}/rows-${String(n).padStart(5, '0')}.safetensors`;
    files.push({
      name: file,
      bytes: writeSafetensors([
        ['input_ids', { dtype: 'I32', shape: [last - first, T], data: req.rows.inputIds.slice(first * T, last * T) }], // [R_s, T]
        ['lengths', { dtype: 'I32', shape: [last - first], data: req.rows.lengths.slice(first, last) }], // [R_s]
      ]),
    });
    shards.push({ file, rows: last - first });
  }
  const order = new Int32Array(plan.epochs * R);
  for (let e = 0; e < plan.epochs; e++) order.set(epochOrder(R, req.config.seed, e), e * R);
  files.push({ name: JOB_PATHS.order, bytes: writeSafetensors([['epoch_order', { dtype: 'I32', shape: [plan.epochs, R], data: order }]]) });
  const settings = {
    format: JOB_FORMAT,
    version: JOB_VERSION,
    task: 'masked-lm',
    written: req.now ?? new Date().toISOString(),
    base: { name: req.base.name, folder: JOB_PATHS.base, weights: 'written' },
    reader: req.base.config,
    train: req.config,
    plan,
    datasetHash: req.datasetHash,
    rows: { count: R, maxLength: T, shards, order: JOB_PATHS.order },
    masking: { probability: req.config.mlmProbability, ...req.masking, specialIds: [...req.masking.specialIds] },
    program: JOB_PATHS.program,
  };
  files.unshift({ name: JOB_PATHS.settings, bytes: new TextEncoder().encode(`${JSON.stringify(settings, null, 2)}\n`) });
  return { files, plan, settings };
}

/**
 * Whether the base's model.safetensors can be copied as it is for the program, which
 * finds tensors by the engine's names (and widens half precision as the engine does):
 * null when it can, else why the weights the engine starts from (ReaderParams.toNamed)
 * are written instead — a head the engine initialised afresh, or names spelt another
 * way (no `bert.` prefix, LayerNorm gamma/beta).
 */
export function baseWeightsAsIs(config: ReaderConfig, stored: { tensors: NamedTensors }): string | null {
  const missing = [...parameterShapes(config).keys()].filter((name) => !stored.tensors.has(name));
  if (missing.length === 0) return null;
  return `it has no tensor named ${missing.slice(0, 3).join(', ')}${missing.length > 3 ? ', …' : ''}; the weights the engine starts from are written instead`;
}

/** A job folder's README.txt: the two ways to run it, then `back` (the way back into Spanwright). */
export function howToRun(back: readonly string[]): string {
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
