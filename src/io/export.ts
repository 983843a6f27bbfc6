// defines: exportModel, ExportFile, ExportRequest, ExportReport — a model directory as a
// list of {name, bytes}, which the CLI writes to a folder and the browser offers as
// downloads. No tfjs here: measurements that need the engine (int8 drift and accuracy,
// see int8-check.ts) are made by the caller and passed in.
//
// The directory:
//   config.json              HF-style config (src/model/config.ts configToHf)
//   model.safetensors        all weights, F32 (or F16 with `fp16`), metadata {"format": "pt"}
//   vocab.txt | tokenizer.json   the vocabulary exactly as it was given
//   model.int8.safetensors   with `int8`: weight matrices I8 + `<name>.scale` F32 (int8.ts)
//   model.onnx               with `onnx`: the forward graph, fp32 (onnx.ts)
//   model.int8.onnx          with `onnx` and `int8`: the same with int8 weight initializers
//   MODEL_CARD.md            provenance, settings, scores, int8 errors, files, caution

import { configToHf, type ReaderConfig } from '../model/config.js';
import { int8ToSafetensors, quantizeModel, type Int8TensorReport, type QuantizedModel } from './int8.js';
import { renderModelCard, type ModelCardInfo } from './model-card.js';
import { exportOnnx } from './onnx.js';
import { namedToSafetensors } from './safetensors.js';
import type { NamedTensors } from './tensors.js';

export interface ExportFile {
  name: string;
  bytes: Uint8Array;
}

export interface ExportRequest {
  config: ReaderConfig;
  /** the weights in checkpoint layout (ReaderParams.toNamed()); optimizer moments excluded */
  tensors: NamedTensors;
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
  /** store model.safetensors as F16 (half the size; weights rounded to binary16) */
  fp16?: boolean;
  /** also write model.int8.safetensors (and model.int8.onnx with `onnx`) */
  int8?: boolean | QuantizedModel;
  /** also write model.onnx */
  onnx?: boolean;
  /** what the card says beyond the files; `config` and `files` are filled in here */
  card: Omit<ModelCardInfo, 'config' | 'files' | 'int8'> & { int8?: Omit<NonNullable<ModelCardInfo['int8']>, 'tensors'> };
}

export interface ExportReport {
  files: Array<{ name: string; bytes: number }>;
  /** per-tensor int8 errors, when int8 was requested */
  int8?: Int8TensorReport[];
}

const CARD_FILE = 'MODEL_CARD.md';

const DESCRIPTIONS: Record<string, string> = {
  'config.json': 'the encoder configuration (HF-style keys)',
  'model.safetensors': 'all weights',
  'vocab.txt': 'the WordPiece vocabulary, one token per line',
  'tokenizer.json': 'the tokenizer, with its WordPiece vocabulary',
  'model.int8.safetensors': 'weight matrices as int8 with per-row scales; the rest float32',
  'model.onnx': 'the forward graph, ONNX opset 17, float32 weights',
  'model.int8.onnx': 'the forward graph, ONNX opset 17, int8 weights with DequantizeLinear',
};

export function exportModel(req: ExportRequest): { files: ExportFile[]; report: ExportReport } {
  // weights only: a checkpoint keeps the optimizer's state apart (src/io/checkpoint-store.ts), so none reaches here
  const weights: NamedTensors = req.tensors;
  const encoder = new TextEncoder();
  const files: ExportFile[] = [];
  files.push({ name: 'config.json', bytes: encoder.encode(`${JSON.stringify(configToHf(req.config), null, 2)}\n`) });
  files.push({
    name: 'model.safetensors',
    bytes: namedToSafetensors(weights, { dtype: req.fp16 ? 'F16' : 'F32', metadata: { format: 'pt' } }),
  });
  files.push({ name: req.vocab.file, bytes: encoder.encode(req.vocab.text) });

  const quantized = req.int8 === true ? quantizeModel(weights) : req.int8 ? req.int8 : null;
  if (quantized) files.push({ name: 'model.int8.safetensors', bytes: int8ToSafetensors(quantized, { format: 'pt' }) });
  if (req.onnx) {
    files.push({ name: 'model.onnx', bytes: exportOnnx(req.config, weights) });
    if (quantized) files.push({ name: 'model.int8.onnx', bytes: exportOnnx(req.config, weights, { int8: quantized }) });
  }

  const listed = files.map((f) => ({
    name: f.name,
    bytes: f.bytes.length,
    description: f.name === 'model.safetensors' ? `all weights, ${req.fp16 ? 'float16' : 'float32'}` : (DESCRIPTIONS[f.name] ?? ''),
  }));
  const notes = [...(req.card.notes ?? [])];
  if (req.fp16)
    notes.push('model.safetensors holds float16 weights (IEEE 754 binary16, rounded to nearest); the ONNX graphs keep float32.');
  const card: ModelCardInfo = {
    ...req.card,
    config: req.config,
    files: listed,
    notes,
    int8: quantized ? { ...(req.card.int8 ?? {}), tensors: quantized.report } : undefined,
  };
  files.push({ name: CARD_FILE, bytes: encoder.encode(renderModelCard(card)) });

  return {
    files,
    report: {
      files: files.map((f) => ({ name: f.name, bytes: f.bytes.length })),
      int8: quantized?.report,
    },
  };
}
