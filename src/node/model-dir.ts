// defines: readModelDir, loadReader, writeFilesAtomically, loadRecords, startEngine — what
// the CLI commands and the recipe share on the Node side: reading a model directory and a
// question file from disk, writing output files so an interruption leaves no half file,
// and starting the wasm engine with its fast kernels.
import { readFile, readdir } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { readBytes } from './read-files.js';
import { UserError } from './user-error.js';
import { loadDataset } from '../data/load.js';
import type { QARecord } from '../data/record.js';
import type { CheckpointDirFiles } from '../io/checkpoint-dir.js';

/** The files of a model directory: config.json, model.safetensors, vocab.txt or tokenizer.json. */
export async function readModelDir(dir: string): Promise<CheckpointDirFiles> {
  let names: string[];
  try {
    names = await readdir(dir);
  } catch {
    throw new UserError(`${dir}: not a readable folder`);
  }
  for (const needed of ['config.json', 'model.safetensors']) {
    if (!names.includes(needed)) {
      throw new UserError(`${dir}: no ${needed} (a model directory holds config.json, model.safetensors and vocab.txt or tokenizer.json)`);
    }
  }
  const vocabFile = names.includes('vocab.txt') ? 'vocab.txt' : names.includes('tokenizer.json') ? 'tokenizer.json' : null;
  if (vocabFile === null) throw new UserError(`${dir}: no vocab.txt or tokenizer.json`);
  const path = (n: string) => join(dir, n);
  return {
    configJson: await readFile(path('config.json'), 'utf8'),
    safetensors: await readBytes(path('model.safetensors')),
    vocab: { file: vocabFile, text: await readFile(path(vocabFile), 'utf8') },
    names: { config: path('config.json'), weights: path('model.safetensors'), vocab: path(vocabFile) },
  };
}

/** A model directory as a ready reader (tfjs must be started first). */
export async function loadReader(dir: string) {
  const files = await readModelDir(dir);
  const { loadCheckpointDir } = await import('../io/checkpoint-dir.js');
  try {
    return loadCheckpointDir(files);
  } catch (err) {
    throw new UserError((err as Error).message);
  }
}

export { writeFilesAtomically } from './write-files.js';

/**
 * The valid records of a question file. Errors are reported (file, record, field) and
 * those records left out; a file with no usable record is an error.
 */
export async function loadRecords(path: string, log: (line: string) => void): Promise<QARecord[]> {
  const result = loadDataset(await readBytes(path), path);
  const errors = result.problems.filter((p) => p.severity === 'error');
  if (errors.length > 0) {
    log(
      `${path}: ${errors.length} record(s) with errors left out (run \`spanwright check ${path}\` for the full report); first: ${errors[0]!.message}`,
    );
  }
  if (result.records.length === 0) throw new UserError(`${path}: no usable questions`);
  return result.records;
}

let started = false;

/** tfjs on the wasm backend with the project's fast kernels (src/kernels/register.ts) on every core (kernel-threads.ts). */
export async function startEngine(): Promise<typeof import('@tensorflow/tfjs')> {
  const tf = await import('@tensorflow/tfjs');
  if (!started) {
    const { setWasmPaths } = await import('@tensorflow/tfjs-backend-wasm');
    const { registerFastKernels } = await import('../kernels/register.js');
    const require = createRequire(import.meta.url);
    const wasmDir = dirname(require.resolve('@tensorflow/tfjs-backend-wasm/dist/tfjs-backend-wasm.wasm'));
    setWasmPaths(`${wasmDir}/`);
    registerFastKernels();
    if (!(await tf.setBackend('wasm'))) throw new Error('the wasm backend failed to start');
    await tf.ready();
    // the kernels' helper threads: every core unless --threads or SPANWRIGHT_THREADS says fewer
    const { startKernelThreads } = await import('./kernel-threads.js');
    await startKernelThreads(undefined, tf.backend() as never);
    started = true;
  }
  return tf;
}
