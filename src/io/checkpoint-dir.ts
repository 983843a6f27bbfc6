// defines: readCheckpointDir, loadCheckpointDir, CheckpointDirFiles — a user's model
// directory (HF-style `config.json`, `model.safetensors` in the common BERT naming, and
// `vocab.txt` or `tokenizer.json`) from file contents to a ReaderConfig, weights and a
// tokenizer. The caller reads the files: Node in src/cli, the browser from a file picker.
//
// 1. config.json → ReaderConfig (src/model/config.ts configFromHf).
// 2. model.safetensors → NamedTensors, F16/BF16 widened to F32 (safetensors.ts).
// 3. the vocabulary → WordPieceTokenizer; its size must not exceed the config's vocab_size
//    (token ids index the embedding table); a smaller one is allowed with a notice.
// 4. loadCheckpointDir also builds ReaderParams and its report {loaded, missing, unexpected}.

import { configFromHf, type ReaderConfig } from '../model/config.js';
import { ReaderParams, type LoadReport } from '../model/params.js';
import { WordPieceTokenizer } from '../text/wordpiece.js';
import { parseJson } from '../data/json-syntax.js';
import { readSafetensors, type SafetensorsDtype } from './safetensors.js';
import type { NamedTensors } from './tensors.js';

export interface CheckpointDirFiles {
  /** text of config.json */
  configJson: string;
  /** bytes of model.safetensors */
  safetensors: Uint8Array;
  /** the vocabulary: vocab.txt text or tokenizer.json text (exactly one) */
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
  /** how to name the files in error messages (default: the plain file names) */
  names?: { config?: string; weights?: string; vocab?: string };
}

export interface CheckpointDirContents {
  config: ReaderConfig;
  /** the raw config.json object, kept so an export can carry unknown keys along */
  configObject: Record<string, unknown>;
  tensors: NamedTensors;
  /** each tensor's stored dtype */
  dtypes: Map<string, SafetensorsDtype>;
  metadata: Record<string, string>;
  tokenizer: WordPieceTokenizer;
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
  /** things the user should know (vocabulary smaller than the embedding table, …) */
  notices: string[];
}

/** Steps 1–3: parse and check the files; no tfjs involved. */
export function readCheckpointDir(files: CheckpointDirFiles): CheckpointDirContents {
  const configName = files.names?.config ?? 'config.json';
  const weightsName = files.names?.weights ?? 'model.safetensors';
  const vocabName = files.names?.vocab ?? files.vocab.file;

  // 1.
  const parsed = parseJson(files.configJson);
  if (!parsed.ok) throw new Error(`${configName}: not valid JSON at line ${parsed.line}, column ${parsed.column}: ${parsed.message}`);
  const config = configFromHf(parsed.value, configName);

  // 2.
  const { tensors, dtypes, metadata } = readSafetensors(files.safetensors, weightsName);

  // the config's layer count against the layers the weights hold, before anything is built from it
  let layers = 0;
  for (const name of tensors.keys()) {
    const m = /(?:^|\.)encoder\.layer\.(\d+)\./.exec(name);
    if (m) layers = Math.max(layers, Number(m[1]) + 1);
  }
  if (layers > 0 && layers !== config.numLayers) {
    throw new Error(
      `${configName}: field num_hidden_layers is ${config.numLayers}, but ${weightsName} holds ${layers} encoder layer(s); is this the config of another model?`,
    );
  }

  // 3.
  const tokenizer =
    files.vocab.file === 'tokenizer.json'
      ? WordPieceTokenizer.fromTokenizerJson(files.vocab.text, vocabName)
      : WordPieceTokenizer.fromVocabTxt(files.vocab.text, {}, vocabName);
  const notices: string[] = [];
  if (tokenizer.vocabSize > config.vocabSize) {
    throw new Error(
      `${vocabName}: the vocabulary has ${tokenizer.vocabSize} tokens but ${configName} field vocab_size is ${config.vocabSize}; ` +
        'token ids past the embedding table cannot be read (is this the vocabulary of another model?)',
    );
  }
  if (tokenizer.vocabSize < config.vocabSize) {
    notices.push(
      `${vocabName} has ${tokenizer.vocabSize} tokens, fewer than the ${config.vocabSize} rows of the embedding table; the extra rows are never used`,
    );
  }
  const halves = [...dtypes.values()].filter((d) => d === 'F16' || d === 'BF16');
  if (halves.length > 0)
    notices.push(`${weightsName}: ${halves.length} tensor(s) stored as ${[...new Set(halves)].join('/')} were widened to float32`);

  return {
    config,
    configObject: parsed.value as Record<string, unknown>,
    tensors,
    dtypes,
    metadata,
    tokenizer,
    vocab: files.vocab,
    notices,
  };
}

/** Steps 1–4: the files as a ready engine model, with what was and was not loaded. */
export function loadCheckpointDir(
  files: CheckpointDirFiles,
  opts: { seed?: number } = {},
): CheckpointDirContents & { params: ReaderParams; report: LoadReport } {
  const contents = readCheckpointDir(files);
  // (ReaderParams.fromNamed refuses NaN or infinite weights, naming the file and the tensor)
  const { params, report } = ReaderParams.fromNamed(contents.config, contents.tensors, {
    seed: opts.seed,
    source: files.names?.weights ?? 'model.safetensors',
  });
  report.notices.unshift(...contents.notices);
  return { ...contents, params, report };
}
