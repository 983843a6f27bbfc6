// defines: adamwUpdate (one parameter's AdamW update as one op), adamwConfig (its
// kernel for 'wasm')
//
// The per-element part of torch.optim.AdamW's update (src/train/adamw.ts has the
// order and the float64 scalars):
//   g ← g·gradScale;  p ← p·decay;  m ← β1·m + (1 − β1)·g;  v ← β2·v + (1 − β2)·g·g
//   p ← p + (m·(−stepSize)) / (√v / √(1 − β2ᵗ) + ε)
//
// Why one kernel: as tfjs ops this is 11–13 elementwise kernels per parameter, each
// a pass over memory; for the [30522, 128] word embeddings that was ~60 ms of an
// L2-H128-T256-B16 step here. The kernel (kernels.c, adamw_range) makes one pass and
// performs the same float32 operations in the same order, one rounding each, so it
// gives the tfjs ops' results (tests/kernels/adamw-update.test.ts compares them).
// Without the kernel the op composes exactly those tfjs ops.

import * as tf from '@tensorflow/tfjs';
import { hasKernel, runKernel } from './fused-op.js';
import { jobRunner, RATE, split } from './jobs.js';
import { f32, JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

export const ADAMW_UPDATE = 'SpanwrightAdamW';

/** The update's scalars, worked out in float64 by the caller (each used as float32). */
export interface AdamWScalars {
  /** multiplies the gradient first (the clip factor); 1 = none */
  gradScale: number;
  /** 1 − lr·λ, or null for a parameter without weight decay */
  decayFactor: number | null;
  beta1: number;
  beta2: number;
  /** lr / (1 − β1ᵗ) */
  stepSize: number;
  /** √(1 − β2ᵗ) */
  correction2Sqrt: number;
  epsilon: number;
}

/** [p, m, v] after one update; the inputs are left as they are. */
export function adamwUpdate(p: tf.Tensor, g: tf.Tensor, m: tf.Tensor, v: tf.Tensor, s: AdamWScalars): [tf.Tensor, tf.Tensor, tf.Tensor] {
  for (const [name, t] of [
    ['gradient', g],
    ['m', m],
    ['v', v],
  ] as const) {
    if (t.size !== p.size) throw new Error(`adamwUpdate: ${name} has shape [${t.shape}], the parameter [${p.shape}]`);
  }
  if (!hasKernel(ADAMW_UPDATE)) return composedUpdate(p, g, m, v, s);
  const [p2, m2, v2] = runKernel(ADAMW_UPDATE, { p, g, m, v }, s);
  return [p2, m2, v2];
}

/** The same update in plain tfjs ops (the order of src/train/adamw.ts before the kernel). */
function composedUpdate(p: tf.Tensor, raw: tf.Tensor, m0: tf.Tensor, v0: tf.Tensor, s: AdamWScalars): [tf.Tensor, tf.Tensor, tf.Tensor] {
  return tf.tidy(() => {
    const g = s.gradScale === 1 ? raw : tf.mul(raw, tf.scalar(s.gradScale));
    const decayed = s.decayFactor === null ? p : tf.mul(p, tf.scalar(s.decayFactor));
    const m = tf.add(tf.mul(m0, tf.scalar(s.beta1)), tf.mul(g, tf.scalar(1 - s.beta1)));
    const v = tf.add(tf.mul(v0, tf.scalar(s.beta2)), tf.mul(tf.mul(g, tf.scalar(1 - s.beta2)), g));
    const denom = tf.add(tf.div(tf.sqrt(v), tf.scalar(s.correction2Sqrt)), tf.scalar(s.epsilon));
    const updated = tf.add(decayed, tf.div(tf.mul(m, tf.scalar(-s.stepSize)), denom));
    return [updated, m, v] as [tf.Tensor, tf.Tensor, tf.Tensor];
  });
}

interface AdamWArgs {
  inputs: { p: tf.TensorInfo; g: tf.TensorInfo; m: tf.TensorInfo; v: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: AdamWScalars;
}

function adamwKernel({ inputs: { p, g, m, v }, backend, attrs: s }: AdamWArgs): tf.TensorInfo[] {
  for (const t of [p, g, m, v]) {
    if (t.dtype !== 'float32') throw new Error(`${ADAMW_UPDATE} (src/kernels/adamw-update.ts): float32 only, got ${t.dtype}`);
  }
  const outs = [0, 1, 2].map(() => backend.makeOutput(p.shape.slice(), 'float32'));
  const n = p.shape.reduce((a, d) => a * d, 1);
  if (n === 0) return outs;
  const run = jobRunner(backend, { ns: 2 * n * RATE.streamNs, inputs: [p, g, m, v], outputs: outs });
  try {
    const { tasks, per } = split(n, run.threads, 4);
    run.run(JOB.adamw, tasks, [
      ...[run.input(p), run.input(g), run.input(m), run.input(v)],
      ...outs.map((o) => run.output(o)),
      n,
      f32(s.gradScale),
      s.gradScale === 1 ? 0 : 1,
      f32(s.decayFactor ?? 1),
      s.decayFactor === null ? 0 : 1,
      ...[f32(s.beta1), f32(1 - s.beta1), f32(s.beta2), f32(1 - s.beta2)],
      ...[f32(-s.stepSize), f32(s.correction2Sqrt), f32(s.epsilon)],
      per,
    ]);
  } finally {
    run.finish();
  }
  return outs;
}

export const adamwConfig: tf.KernelConfig = {
  kernelName: ADAMW_UPDATE,
  backendName: 'wasm',
  kernelFunc: adamwKernel as unknown as tf.KernelFunc,
};
