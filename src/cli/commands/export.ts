// defines: the `export` command — a model directory (config.json, model.safetensors,
// vocab.txt or tokenizer.json) to an export directory: config, weights (fp32 or fp16),
// optionally int8 weights and ONNX graphs, the vocabulary and a model card
// (src/io/export.ts). With --int8 the engine measures the int8 weights' logit drift.
import { mkdir, readdir } from 'node:fs/promises';
import { basename, resolve } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { readModelDir, writeFilesAtomically } from '../../node/model-dir.js';
import type { ModelCardInfo } from '../../io/model-card.js';

interface ExportOptions {
  model: string;
  out: string;
  fp16?: boolean;
  int8?: boolean;
  onnx?: boolean;
  force?: boolean;
  json?: boolean;
}

export function register(program: Command): void {
  program
    .command('export')
    .description('write a model directory for other tools: safetensors (fp32/fp16), int8, ONNX, vocabulary, model card')
    .requiredOption('--model <dir>', 'a model directory: config.json, model.safetensors and vocab.txt or tokenizer.json')
    .requiredOption('--out <dir>', 'the folder to write (created if missing)')
    .option('--fp16', 'store model.safetensors as float16')
    .option('--int8', 'also write model.int8.safetensors (per-row symmetric int8 weights) and measure its logit drift')
    .option('--onnx', 'also write model.onnx (and model.int8.onnx with --int8)')
    .option('--force', 'overwrite files already in --out')
    .option('--json', 'print the export report as one JSON object on the last line of output')
    .addHelpText(
      'after',
      `
Files written: config.json, model.safetensors, vocab.txt or tokenizer.json, MODEL_CARD.md,
and with the options model.int8.safetensors, model.onnx, model.int8.onnx. Each file is
written under a temporary name and renamed, so an interrupted export leaves no half file.

JSON output: {out, files: [{name, bytes}], int8?: {maxAbsError, tensor, drift}, notices}.

Examples:
  spanwright export --model tiny-models/base --out exported
  spanwright export --model runs/best --out exported --int8 --onnx`,
    )
    .action((options: ExportOptions) => runCommand(() => exportCommand(options)));
}

async function exportCommand(options: ExportOptions): Promise<void> {
  const files = await readModelDir(options.model);

  // refuse to overwrite before any heavy work
  const planned = ['config.json', 'model.safetensors', files.vocab.file, 'MODEL_CARD.md'];
  if (options.int8) planned.push('model.int8.safetensors');
  if (options.onnx) planned.push('model.onnx', ...(options.int8 ? ['model.int8.onnx'] : []));
  await mkdir(options.out, { recursive: true });
  const existing = new Set(await readdir(options.out));
  const clash = planned.filter((name) => existing.has(name));
  if (clash.length > 0 && !options.force)
    throw new UserError(`${options.out}: already holds ${clash.join(', ')}; pass --force to overwrite`);

  // the engine is loaded only here, so other commands start without tfjs
  const tf = await import('@tensorflow/tfjs');
  const { loadCheckpointDir } = await import('../../io/checkpoint-dir.js');
  const { exportModel } = await import('../../io/export.js');
  const { quantizeModel } = await import('../../io/int8.js');
  const { measureInt8Drift } = await import('../../io/int8-check.js');
  await tf.setBackend('cpu'); // a few forward passes only; the cpu backend needs no wasm files
  let loaded;
  try {
    loaded = loadCheckpointDir(files);
  } catch (err) {
    throw new UserError((err as Error).message);
  }
  const { config, vocab, params, report } = loaded;
  // the engine's own view: canonical BERT names, every parameter (a missing head was initialised, with a notice)
  const named = params.toNamed();
  params.dispose();
  // an MLM head the checkpoint lacked was only initialised to build the engine: it does not travel
  const freshMlm = report.missing.filter((name) => name.startsWith('cls.'));
  for (const name of freshMlm) named.delete(name);

  const quantized = options.int8 ? quantizeModel(named) : undefined;
  const drift = quantized ? measureInt8Drift(config, named, quantized) : undefined;
  const unused =
    report.unexpected.length > 0
      ? [
          `left out ${report.unexpected.length} tensor(s) the reader does not use: ${report.unexpected.slice(0, 5).join(', ')}${report.unexpected.length > 5 ? ', …' : ''}`,
        ]
      : [];
  const card: Omit<ModelCardInfo, 'config' | 'files' | 'int8'> = {
    baseModel: `the model directory "${basename(resolve(options.model))}"`,
    date: new Date().toISOString(),
    notes: [
      ...report.notices,
      ...unused,
      ...(freshMlm.length > 0 ? ['the export holds no MLM head (cls.predictions.*), as the source had none'] : []),
    ],
  };
  const { files: out, report: exported } = exportModel({
    config,
    tensors: named,
    vocab,
    fp16: options.fp16,
    int8: quantized,
    onnx: options.onnx,
    card: { ...card, int8: drift ? { drift } : undefined },
  });

  await writeFilesAtomically(options.out, out);

  const worst = quantized?.report.reduce((a, t) => (t.maxAbsError > a.maxAbsError ? t : a));
  if (options.json) {
    printJson({
      out: options.out,
      files: exported.files,
      ...(worst ? { int8: { maxAbsError: worst.maxAbsError, tensor: worst.name, drift } } : {}),
      notices: card.notes,
    });
    return;
  }
  const stdout = process.stdout;
  stdout.write(`exported ${options.model} to ${options.out}:\n`);
  for (const f of exported.files) stdout.write(`  ${f.name.padEnd(24)} ${f.bytes.toLocaleString('en-US').padStart(14)} bytes\n`);
  if (worst && drift) {
    stdout.write(`int8: largest weight error ${worst.maxAbsError.toExponential(3)} (${worst.name}); `);
    stdout.write(
      `logit drift ${drift.maxAbsLogitDiff.toExponential(3)} over a spread of ${drift.logitSpread.toFixed(3)} on ${drift.probe}\n`,
    );
  }
  for (const n of card.notes ?? []) stdout.write(`note: ${n}\n`);
}
