// defines: dropout (the seeded inverted-dropout op), dropoutConfig (its kernel for 'wasm')
//
//   y = x ⊙ M / (1 − rate),  M the counter-based mask of dropout-mask.ts
//
// Why not tf.dropout: it draws a uniform tensor in JavaScript (a stateful generator),
// then adds, floors, divides and multiplies — five [B·T, H] tensors per site, saved
// for the backward — and its mask cannot be recomputed. Here one kernel (kernels.c,
// dropout_range) applies the mask; the backward is the same kernel on dy, because the
// mask is a pure function of (seed, element index). Without the kernel the op
// multiplies by keepMultipliers in plain tfjs — the same mask on every backend.

import * as tf from '@tensorflow/tfjs';
import { dropoutMask, keepMultipliers } from './dropout-mask.js';
import { hasKernel, runKernel } from './fused-op.js';
import { jobRunner, RATE, split } from './jobs.js';
import { f32, JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

export const DROPOUT = 'SpanwrightDropout';

/** Inverted dropout of x at `rate` ∈ [0, 1), mask seeded by `seed` (uint32); rate 0 returns x. */
export function dropout<R extends tf.Rank>(x: tf.Tensor<R>, rate: number, seed: number): tf.Tensor<R> {
  const mask = dropoutMask(seed, rate); // validates the rate
  if (rate === 0) return x;
  if (!hasKernel(DROPOUT)) return tf.mul(x, tf.tensor(keepMultipliers(mask, x.size), x.shape)) as tf.Tensor<R>;
  const attrs = { rate, seed };
  const fused = tf.customGrad((...args: unknown[]) => ({
    value: runKernel(DROPOUT, { x: args[0] as tf.Tensor }, attrs)[0],
    // inverts "y = x ⊙ M / (1 − rate)": the same mask on dy
    gradFunc: (dy: tf.Tensor | tf.Tensor[]) => runKernel(DROPOUT, { x: dy as tf.Tensor }, attrs),
  }));
  return fused(x) as tf.Tensor<R>;
}

interface DropoutArgs {
  inputs: { x: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { rate: number; seed: number };
}

function dropoutKernel({ inputs: { x }, backend, attrs }: DropoutArgs): tf.TensorInfo {
  if (x.dtype !== 'float32') throw new Error(`${DROPOUT} (src/kernels/dropout.ts): float32 only, got ${x.dtype}`);
  const y = backend.makeOutput(x.shape.slice(), 'float32');
  const n = x.shape.reduce((p, d) => p * d, 1);
  if (n === 0) return y;
  const mask = dropoutMask(attrs.seed, attrs.rate);
  const run = jobRunner(backend, { ns: n * RATE.streamNs, inputs: [x], outputs: [y] });
  try {
    const { tasks, per } = split(n, run.threads, 4);
    run.run(JOB.dropout, tasks, [run.input(x), run.output(y), n, mask.mix | 0, mask.threshold | 0, f32(mask.scale), per]);
  } finally {
    run.finish();
  }
  return y;
}

export const dropoutConfig: tf.KernelConfig = {
  kernelName: DROPOUT,
  backendName: 'wasm',
  kernelFunc: dropoutKernel as unknown as tf.KernelFunc,
};
