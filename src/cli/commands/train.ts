// defines: the `train` command, and trainReader — fine-tune a base reader on a question
// file, evaluate it, and write the trained model directory with its card. `demo` runs the
// same function on the shipped base and demo data.
//
//   1. load      the base model directory and the question files
//   2. train     src/train/finetune.ts (the loop the browser worker runs too), with
//                checkpoints on disk under <out>/checkpoints
//   3. measure   SQuAD 2.0 EM/F1 on the eval file, with the tuned no-answer threshold
//   4. write     <out>/config.json, model.safetensors, vocabulary, MODEL_CARD.md
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { loadReader, loadRecords, startEngine, writeFilesAtomically } from '../model-dir.js';
import { countProgress, trainingProgress } from '../progress.js';
import { readerWarnings } from '../../eval/reader-warnings.js';
import { scoresObject, scoresTable } from '../scores.js';
import { hashDataset } from '../../data/hash.js';
import type { QARecord } from '../../data/record.js';
import { DEFAULT_TRAIN_CONFIG, suggestedLearningRate, trainConfig, type TrainConfig } from '../../train/config.js';
import { configFromHf } from '../../model/config.js';
import type { EvaluationReport } from '../../eval/report.js';

export const DEFAULT_BASE = 'tiny-models/base';

export interface TrainOptions {
  train: string;
  eval?: string;
  base: string;
  out: string;
  epochs?: string;
  lr?: string;
  batch?: string;
  accumulate?: string;
  maxLen?: string;
  stride?: string;
  maxQuery?: string;
  seed?: string;
  resume?: boolean;
  json?: boolean;
}

function int(name: string, v: string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isInteger(n) || n < 0) throw new UserError(`--${name} must be a whole number, not "${v}"`);
  return n;
}

function num(name: string, v: string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isFinite(n) || n <= 0) throw new UserError(`--${name} must be a positive number, not "${v}"`);
  return n;
}

/**
 * The hidden size of the base directory's config.json, or null when it cannot be read
 * (loading the base later reports the problem with its file and field).
 */
export function baseHiddenSize(dir: string): number | null {
  try {
    const path = join(dir, 'config.json');
    return configFromHf(JSON.parse(readFileSync(path, 'utf8')) as Record<string, unknown>, path).hiddenSize;
  } catch {
    return null;
  }
}

/**
 * The train config from the command's options over the defaults; without --lr, the rate
 * suggested for the base's width (src/train/config.ts, suggestedLearningRate).
 */
export function configFromOptions(o: TrainOptions): TrainConfig {
  const overrides: Partial<TrainConfig> = {};
  const set = <K extends keyof TrainConfig>(k: K, v: TrainConfig[K] | undefined) => {
    if (v !== undefined) overrides[k] = v;
  };
  set('epochs', int('epochs', o.epochs));
  const hidden = o.lr === undefined ? baseHiddenSize(o.base) : null;
  set('learningRate', num('lr', o.lr) ?? (hidden === null ? undefined : suggestedLearningRate(hidden)));
  set('batchSize', int('batch', o.batch));
  set('gradAccumulation', int('accumulate', o.accumulate));
  set('maxLength', int('max-len', o.maxLen));
  set('stride', int('stride', o.stride));
  set('maxQueryLength', int('max-query', o.maxQuery));
  set('seed', int('seed', o.seed));
  // a short window keeps at most a third of itself for the question, unless told otherwise
  if (overrides.maxLength !== undefined && overrides.maxQueryLength === undefined) {
    overrides.maxQueryLength = Math.min(DEFAULT_TRAIN_CONFIG.maxQueryLength, Math.floor(overrides.maxLength / 3));
  }
  const c = { ...DEFAULT_TRAIN_CONFIG, ...overrides };
  if (c.stride >= c.maxLength - c.maxQueryLength - 3) {
    throw new UserError(`--stride ${c.stride} must be below the context tokens a window holds: max length ${c.maxLength} − question tokens ${c.maxQueryLength} − 3`);
  }
  try {
    return trainConfig(overrides);
  } catch (err) {
    throw new UserError((err as Error).message);
  }
}

export interface TrainRun {
  config: TrainConfig;
  train: QARecord[];
  evalRecords: QARecord[] | null;
  before: EvaluationReport | null;
  after: EvaluationReport | null;
  out: string;
  files: Array<{ name: string; bytes: number }>;
  seconds: number;
}

/** Steps 1–4; `log` takes human-readable lines (stderr). */
export async function trainReader(
  o: { train: string; eval?: string; base: string; out: string; resume?: boolean; measureBase?: boolean; int8?: boolean; onnx?: boolean },
  config: TrainConfig,
  log: (line: string) => void,
): Promise<TrainRun> {
  const started = performance.now();
  // 1. load
  await startEngine();
  const { fineTune } = await import('../../train/finetune.js');
  const { evaluateRecords } = await import('../../eval/evaluate.js');
  const { exportModel } = await import('../../io/export.js');
  const { quantizeModel } = await import('../../io/int8.js');
  const { int8AccuracyCost } = await import('../../io/int8-check.js');
  const { FsCheckpointStore } = await import('../fs-store.js');
  const base = await loadReader(o.base);
  for (const n of base.report.notices) log(`note: ${n}`);
  if (config.maxLength > base.config.maxPositions) {
    throw new UserError(`--max-len ${config.maxLength} exceeds the ${base.config.maxPositions} positions of ${o.base} (max_position_embeddings)`);
  }
  const train = await loadRecords(o.train, log);
  const evalRecords = o.eval ? await loadRecords(o.eval, log) : null;
  const datasetHash = await hashDataset(train);
  const featureOptions = { maxLen: config.maxLength, stride: config.stride, maxQueryTokens: config.maxQueryLength };
  const reader = (params: typeof base.params) => ({ params, config: base.config, tokenizer: base.tokenizer });
  const evaluate = (label: string, params: typeof base.params) => {
    const bar = countProgress(label);
    try {
      return evaluateRecords(reader(params), evalRecords!, { features: featureOptions, onProgress: bar.update }).report;
    } finally {
      bar.stop();
    }
  };

  const before = evalRecords && o.measureBase ? evaluate('evaluating the base', base.params) : null;

  // 2. train
  const store = new FsCheckpointStore<import('../../train/finetune.js').RunMeta>(join(o.out, 'checkpoints'));
  let resumeFrom: string | undefined;
  if (o.resume) {
    const saved = (await store.list()).filter((c) => c.meta.datasetHash === datasetHash);
    const last = saved[saved.length - 1];
    if (last === undefined) throw new UserError(`${join(o.out, 'checkpoints')}: no checkpoint of this training data to resume from`);
    resumeFrom = last.id;
    log(`resuming from checkpoint ${last.id} (update ${last.meta.step})`);
  }
  const progress = trainingProgress();
  const abort = new AbortController();
  const onSigint = () => {
    log('\nstopping after this update; the run can continue with --resume');
    abort.abort();
  };
  process.once('SIGINT', onSigint);
  let result;
  try {
    result = await fineTune({
      base: { params: base.params, config: base.config, name: o.base },
      tokenizer: base.tokenizer,
      train,
      validation: evalRecords ?? undefined,
      config,
      datasetHash,
      store,
      resumeFrom,
      hooks: { onEvent: progress.onEvent, signal: abort.signal },
    });
  } finally {
    progress.stop();
    process.off('SIGINT', onSigint);
  }
  if (result.outcome.status === 'stopped') {
    result.params.dispose();
    throw new UserError(`stopped at update ${result.outcome.state.trainer.update}; continue with the same command and --resume`, 130);
  }

  // 3. measure
  const after = evalRecords ? evaluate('evaluating the trained reader', result.params) : null;

  // 4. write
  const named = result.params.toNamed();
  for (const name of base.report.missing.filter((n) => n.startsWith('cls.'))) named.delete(name);
  const quantized = o.int8 ? quantizeModel(named) : undefined;
  const accuracy = quantized && evalRecords
    ? int8AccuracyCost(base.config, named, quantized, evalRecords, (await import('../../eval/evaluate.js')).buildWindows(base.tokenizer, evalRecords, featureOptions))
    : undefined;
  const { files } = exportModel({
    config: base.config,
    tensors: named,
    vocab: base.vocab,
    int8: quantized,
    onnx: o.onnx,
    card: {
      baseModel: o.base,
      dataset: { hash: datasetHash, records: train.length, train: train.length, validation: evalRecords?.length },
      settings: config,
      metrics: after
        ? {
            withoutThreshold: after.summary,
            withThreshold: after.tuned ? { ...after.tuned.summary, threshold: after.tuned.threshold } : undefined,
          }
        : undefined,
      date: new Date().toISOString(),
      int8: accuracy ? { accuracy } : undefined,
      notes: [
        `fine-tuned for ${result.plan.totalUpdates} updates (${config.epochs} epochs over ${result.windows} windows of ${config.maxLength} tokens)`,
        ...(before ? [`the base reader scored EM ${before.summary.em?.toFixed(1)} / F1 ${before.summary.f1?.toFixed(1)} on the same validation questions`] : []),
      ],
    },
  });
  await writeFilesAtomically(o.out, files);
  result.params.dispose();
  base.params.dispose();
  return {
    config,
    train,
    evalRecords,
    before,
    after,
    out: o.out,
    files: files.map((f) => ({ name: f.name, bytes: f.bytes.length })),
    seconds: (performance.now() - started) / 1000,
  };
}

export function register(program: Command): void {
  const d = DEFAULT_TRAIN_CONFIG;
  program
    .command('train')
    .description('fine-tune a base reader on labelled questions, evaluate it, and write the trained model directory')
    .requiredOption('--train <file>', 'training questions (SQuAD JSON layout, JSONL or CSV)')
    .option('--eval <file>', 'validation questions, scored during and after training')
    .option('--base <dir>', 'the base model directory', DEFAULT_BASE)
    .requiredOption('--out <dir>', 'where the trained model directory (and its checkpoints/) go')
    .option('--epochs <n>', `passes over the training windows (default ${d.epochs})`)
    .option('--lr <x>', `peak learning rate after warmup (default by the base's hidden size: ${suggestedLearningRate(256)} up to 256, ${suggestedLearningRate(512)} up to 512, ${suggestedLearningRate(768)} above)`)
    .option('--batch <n>', `windows per micro-batch (default ${d.batchSize})`)
    .option('--accumulate <n>', `micro-batches per optimizer update (default ${d.gradAccumulation})`)
    .option('--max-len <n>', `tokens per window, special tokens included (default ${d.maxLength})`)
    .option('--stride <n>', `context tokens shared by neighbouring windows of a long passage (default ${d.stride})`)
    .option('--max-query <n>', `question tokens kept (default ${d.maxQueryLength}, or a third of --max-len)`)
    .option('--seed <n>', `seed for data order and dropout (default ${d.seed})`)
    .option('--resume', 'continue from the last checkpoint in <out>/checkpoints')
    .option('--json', 'print the evaluation as one JSON object on the last line: {em, f1, total, answerable, unanswerable, threshold, tuned}')
    .addHelpText(
      'after',
      `
Warmup ${d.warmupRatio * 100}% of updates then linear decay; AdamW with weight decay ${d.weightDecay}
(none on biases and LayerNorm); gradient clipping at global norm ${d.maxGradNorm}.
Ctrl-C stops after the current update and saves a checkpoint; --resume continues it.

Example:
  spanwright train --train tiny-models/demo/train.jsonl --eval tiny-models/demo/validation.jsonl --out runs/mine`,
    )
    .action((o: TrainOptions) =>
      runCommand(async () => {
        const config = configFromOptions(o);
        const log = (line: string) => process.stderr.write(`${line}\n`);
        const run = await trainReader({ train: o.train, eval: o.eval, base: o.base, out: o.out, resume: o.resume }, config, log);
        if (o.json) {
          printJson(run.after ? scoresObject(run.after) : { em: null, f1: null, total: 0 });
          return;
        }
        if (run.after) process.stdout.write(`${scoresTable([{ label: 'trained', scores: run.after.summary }])}\n`);
        if (run.after?.tuned) process.stdout.write(`with the tuned no-answer threshold ${run.after.tuned.threshold.toFixed(2)}: EM ${run.after.tuned.summary.em?.toFixed(1)} F1 ${run.after.tuned.summary.f1?.toFixed(1)}\n`);
        if (run.after) for (const w of readerWarnings(run.after.tuned?.summary ?? run.after.summary)) process.stdout.write(`${w}\n`);
        process.stdout.write(`model directory: ${run.out} (${run.files.map((f) => f.name).join(', ')}) in ${run.seconds.toFixed(0)} s\n`);
      }),
    );
}
