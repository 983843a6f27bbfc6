// defines: torchJobFiles, TorchJobRequest, TorchJob, JOB_FORMAT, baseWeightsAsIs — the
// data files of a job folder for PyTorch's distributed training (jobs/torch/): the same
// fine-tuning run the engine would take, handed to torch.distributed when one CPU is not
// enough. No Node APIs here: the CLI (src/cli/commands/job.ts) adds the base directory and
// the program files and writes the folder; a page could zip the same list.
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
} as const;

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
