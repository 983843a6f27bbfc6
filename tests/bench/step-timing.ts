// defines: the training-step timing both engine benchmarks share — Node's (engine.ts) and
// the browser's (browser/step-worker.ts): the two configs, the synthetic batch, and
// timeSteps, which alternates thread counts step by step. No Node or DOM API here.

import * as tf from '@tensorflow/tfjs';
import { setKernelThreads } from '../../src/kernels/threads.js';
import type { PresetName, ReaderConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import type { SpanBatch } from '../../src/train/batches.js';
import { trainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';

/** 30522: BERT's uncased vocabulary; the shipped tiny vocabulary is of the same order (~30 000). */
export const VOCAB = 30522;

export interface BenchConfig {
  name: string;
  preset: PresetName;
  seqLen: number;
  batch: number;
}

export const CONFIGS: BenchConfig[] = [
  { name: 'L2-H128-T256-B16', preset: 'tiny', seqLen: 256, batch: 16 },
  { name: 'L4-H256-T384-B8', preset: 'small', seqLen: 384, batch: 8 },
];

export function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

export function syntheticBatch(B: number, T: number, vocab: number): SpanBatch {
  const inputIds = new Int32Array(B * T);
  for (let i = 0; i < inputIds.length; i++) inputIds[i] = 5 + ((i * 7919) % (vocab - 5));
  const tokenTypeIds = new Int32Array(B * T).map((_, i) => (i % T > T / 4 ? 1 : 0));
  return {
    size: B,
    seqLen: T,
    inputIds,
    tokenTypeIds,
    attentionMask: new Int32Array(B * T).fill(1),
    startPositions: new Int32Array(B).fill(T / 2),
    endPositions: new Int32Array(B).fill(T / 2 + 2),
  };
}

/**
 * Median step time (ms) of the real trainer on the current backend for each thread
 * count in `threadCounts`: `warmup` steps, then `rounds` rounds of one step per count,
 * so that a burst of other work on the machine falls on every count alike.
 * `afterStep` runs after each timed step (the Node bench notes the heap there).
 */
export function timeSteps(
  config: ReaderConfig,
  bc: BenchConfig,
  warmup: number,
  rounds: number,
  threadCounts: number[],
  afterStep: () => void = () => {},
): number[] {
  const tc = trainConfig({
    batchSize: bc.batch,
    gradAccumulation: 1,
    maxLength: bc.seqLen,
    stride: bc.seqLen / 4,
    maxQueryLength: bc.seqLen / 4,
    epochs: 1,
    trimPadding: false,
  });
  const params = ReaderParams.init(config, 1);
  const trainer = new Trainer(params, config, tc, planTraining(tc, 1000 * bc.batch));
  const batch = syntheticBatch(bc.batch, bc.seqLen, config.vocabSize);
  try {
    for (let i = 0; i < warmup; i++) {
      setKernelThreads(threadCounts[i % threadCounts.length]);
      trainer.step([batch]);
    }
    const times = threadCounts.map(() => [] as number[]);
    for (let r = 0; r < rounds; r++) {
      threadCounts.forEach((n, i) => {
        setKernelThreads(n);
        const t0 = performance.now();
        trainer.step([batch]);
        times[i].push(performance.now() - t0);
        afterStep();
      });
    }
    return times.map(median);
  } finally {
    trainer.dispose();
    params.dispose();
  }
}

/** Best GFLOP/s of a plain 2-D 512³ product with the fast kernels on `threads` threads. */
export function gemmGflops(threads: number): number {
  const n = 512;
  const a = tf.randomUniform([n, n]);
  const b = tf.randomUniform([n, n]);
  setKernelThreads(threads);
  let best = 0;
  for (let rep = 0; rep < 8; rep++) {
    const t0 = performance.now();
    const c = tf.matMul(a, b);
    c.dataSync();
    const ms = performance.now() - t0;
    c.dispose();
    if (rep > 0) best = Math.max(best, (2 * n * n * n) / ms / 1e6);
  }
  tf.dispose([a, b]);
  return best;
}
