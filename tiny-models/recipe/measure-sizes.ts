// defines: the size measurement behind the shipped base reader — training tokens/s of
// candidate encoder sizes with the real engine (wasm + fast kernels), for
//   fine-tuning   Trainer.step (span loss) on 8 windows of 384 tokens, and the time it
//                 implies for 2 epochs over ~450 windows (≈ 300 questions)
//   pretraining   Trainer.mlmStep (head on masked positions only) on 32 rows of 128,
//                 the step the recipe's pretraining takes through the core loop
//
// (An earlier version also timed a head decoding every position, as the reference for
// the masked-positions head; measured-sizes.json keeps that figure, `denseMlmTokensPerS`,
// and a new measurement leaves it null.)
//
//   npx tsx tiny-models/recipe/measure-sizes.ts [--vocab N] [--steps N] [--json FILE]
//
// Each figure is the median of N timed steps after one warm-up step. Inputs are
// synthetic ids (speed does not depend on which ids), so nothing here reads the corpus.

import { writeFileSync } from 'node:fs';
import * as tf from '@tensorflow/tfjs';
import { presetConfig, paramCount, type ReaderConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { collateMlm, type SpanBatch } from '../../src/train/batches.js';
import { trainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';
import { useWasm } from './wasm.js';

export interface Candidate {
  name: string;
  overrides: Partial<ReaderConfig>;
}

export const CANDIDATES: Candidate[] = [
  { name: 'L2-H128', overrides: { numLayers: 2, hiddenSize: 128, numHeads: 2, intermediateSize: 512 } },
  { name: 'L4-H128', overrides: { numLayers: 4, hiddenSize: 128, numHeads: 2, intermediateSize: 512 } },
  { name: 'L4-H256', overrides: { numLayers: 4, hiddenSize: 256, numHeads: 4, intermediateSize: 1024 } },
];

/** ~300 questions make ≈ 450 windows of 384 tokens; 2 epochs (the brief's fine-tuning target). */
const FINETUNE_TOKENS = 450 * 2 * 384;

export interface SizeMeasurement {
  name: string;
  params: number;
  finetuneTokensPerS: number;
  finetuneMinutes: number;
  pretrainTokensPerS: number;
  denseMlmTokensPerS: number | null;
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

function timeSteps(steps: number, run: () => void): number {
  run(); // warm-up: kernels compiled, buffers allocated
  const times: number[] = [];
  for (let i = 0; i < steps; i++) {
    const t0 = performance.now();
    run();
    times.push(performance.now() - t0);
  }
  return median(times);
}

function syntheticIds(count: number, vocab: number, salt: number): Int32Array {
  const ids = new Int32Array(count);
  for (let i = 0; i < count; i++) ids[i] = 5 + ((i * 7919 + salt * 104729) % (vocab - 5));
  return ids;
}

function spanBatch(B: number, T: number, vocab: number): SpanBatch {
  return {
    size: B,
    seqLen: T,
    inputIds: syntheticIds(B * T, vocab, 1),
    tokenTypeIds: new Int32Array(B * T).map((_, i) => (i % T > T / 8 ? 1 : 0)),
    attentionMask: new Int32Array(B * T).fill(1),
    startPositions: new Int32Array(B).map((_, b) => 100 + b),
    endPositions: new Int32Array(B).map((_, b) => 105 + b),
  };
}

function mlmBatchOf(B: number, T: number, vocab: number, seed: number) {
  const rows = [];
  for (let b = 0; b < B; b++)
    rows.push({ inputIds: syntheticIds(T, vocab, b + 7), tokenTypeIds: new Int32Array(T), attentionMask: new Int32Array(T).fill(1) });
  return collateMlm(rows, { probability: 0.15, maskId: 4, vocabSize: vocab, specialIds: [0, 1, 2, 3, 4] }, seed, false);
}

export async function measureSizes(vocab: number, steps: number, log: (line: string) => void = () => {}): Promise<SizeMeasurement[]> {
  await useWasm();
  const out: SizeMeasurement[] = [];
  for (const candidate of CANDIDATES) {
    const config = presetConfig('tiny', vocab, { ...candidate.overrides, maxPositions: 512 });
    const params = ReaderParams.init(config, 1);

    // fine-tuning: span loss, 8 × 384
    const tc = trainConfig({ batchSize: 8, gradAccumulation: 1 });
    const trainer = new Trainer(params, config, tc, planTraining(tc, 1000));
    const span = spanBatch(8, 384, vocab);
    const spanMs = timeSteps(steps, () => void trainer.step([span], 1e-5));
    const finetuneTokensPerS = (8 * 384 * 1000) / spanMs;

    // pretraining: masked positions only, 32 × 128
    let seed = 0;
    const mlmMs = timeSteps(steps, () => void trainer.mlmStep([mlmBatchOf(32, 128, vocab, seed++)], 1e-5));
    const pretrainTokensPerS = (32 * 128 * 1000) / mlmMs;
    const denseMlmTokensPerS: number | null = null;
    trainer.dispose();
    params.dispose();

    const m: SizeMeasurement = {
      name: candidate.name,
      params: paramCount(config).total,
      finetuneTokensPerS,
      finetuneMinutes: FINETUNE_TOKENS / finetuneTokensPerS / 60,
      pretrainTokensPerS,
      denseMlmTokensPerS,
    };
    log(
      `${m.name}: ${(m.params / 1e6).toFixed(2)} M params; fine-tune 8×384 ${m.finetuneTokensPerS.toFixed(0)} tok/s ` +
        `(≈ ${m.finetuneMinutes.toFixed(1)} min for 2 epochs × 450 windows); pretrain 32×128 ${m.pretrainTokensPerS.toFixed(0)} tok/s` +
        (m.denseMlmTokensPerS === null
          ? ''
          : `; dense-head MLM 16×128 ${m.denseMlmTokensPerS.toFixed(0)} tok/s (sparse/dense ${(m.pretrainTokensPerS / m.denseMlmTokensPerS).toFixed(2)}×)`) +
        `; tensors live ${tf.memory().numTensors}`,
    );
    out.push(m);
  }
  return out;
}

async function main(argv: string[]): Promise<void> {
  const get = (flag: string) => {
    const i = argv.indexOf(flag);
    return i >= 0 ? argv[i + 1] : undefined;
  };
  const vocab = Number(get('--vocab') ?? 12000);
  const steps = Number(get('--steps') ?? 3);
  const result = await measureSizes(vocab, steps, (line) => process.stdout.write(`${line}\n`));
  const json = get('--json');
  if (json !== undefined)
    writeFileSync(json, `${JSON.stringify({ vocab, steps, measuredAt: new Date().toISOString(), sizes: result }, null, 2)}\n`);
}

if (import.meta.url === `file://${process.argv[1]}`) await main(process.argv.slice(2));
