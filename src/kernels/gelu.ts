// defines: biasGelu (the fused op gelu(x + b), exact GELU), biasGeluConfig and
// biasGeluGradConfig (its kernels for 'wasm')
//
//   y = ½·u·(1 + erf(u/√2)),  u = x + b     (Hendrycks & Gimpel 2016, the erf form)
//
// Shapes: R rows (B·T), I columns (the feed-forward width); b is [I].
//
// Why fused: as tfjs ops this was six [R, I] elementwise kernels forward and about
// ten backward, each saving or producing an [R, I] tensor (the widest activations
// of the step), plus the bias gradient's Sum. The kernels (kernels.c, bias_gelu_rows
// / bias_gelu_dx_rows, then sum_cols for db) keep only x for the backward and return db
// with dx.
// Without the kernels (any backend but 'wasm' with registerFastKernels) the op
// composes the same tfjs ops the encoder used before — the tests' reference.

import * as tf from '@tensorflow/tfjs';
import { hasKernel, recordingGradients, runKernel } from './fused-op.js';
import { jobRunner, RATE, split } from './jobs.js';
import { JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

export const BIAS_GELU = 'SpanwrightBiasGelu';
export const BIAS_GELU_GRAD = 'SpanwrightBiasGeluGrad';

/** gelu(x + b), exact (erf) GELU; x [R, I], b [I]. */
export function biasGelu(x: tf.Tensor2D, b: tf.Tensor1D): tf.Tensor2D {
  if (x.rank !== 2 || b.rank !== 1 || b.shape[0] !== x.shape[1]) {
    throw new Error(`biasGelu: bias [${b.shape}] does not fit x [${x.shape}] (expected [${x.shape[1]}])`);
  }
  if (!hasKernel(BIAS_GELU)) return composedBiasGelu(x, b);
  if (!recordingGradients()) return runKernel(BIAS_GELU, { x, b }, {})[0] as tf.Tensor2D;
  const fused = tf.customGrad((...args: unknown[]) => {
    const [xi, bi] = args as [tf.Tensor2D, tf.Tensor1D];
    (args[2] as tf.GradSaveFunc)([xi, bi]);
    return {
      value: runKernel(BIAS_GELU, { x: xi, b: bi }, {})[0],
      // inverts "y = ½·u·(1 + erf(u/√2)), u = x + b" (kernels.c, bias_gelu_dx_rows)
      gradFunc: (dy: tf.Tensor | tf.Tensor[], saved: tf.Tensor[]) =>
        runKernel(BIAS_GELU_GRAD, { x: saved[0], b: saved[1], dy: dy as tf.Tensor }, {}),
    };
  });
  return fused(x, b) as tf.Tensor2D;
}

/** The same function in plain tfjs ops. */
function composedBiasGelu(x: tf.Tensor2D, b: tf.Tensor1D): tf.Tensor2D {
  return tf.tidy(() => {
    const u = tf.add(x, b); // [R, I]
    return tf.mul(tf.mul(u, 0.5), tf.add(1, tf.erf(tf.mul(u, Math.SQRT1_2)))) as tf.Tensor2D;
  });
}

// ---- the kernels -------------------------------------------------------------------

interface GeluArgs {
  inputs: { x: tf.TensorInfo; b: tf.TensorInfo; dy?: tf.TensorInfo };
  backend: WasmBackendLike;
}

function checkFloat(name: string, ...ts: tf.TensorInfo[]): void {
  for (const t of ts) if (t.dtype !== 'float32') throw new Error(`${name} (src/kernels/gelu.ts): float32 only, got ${t.dtype}`);
}

function biasGeluForward({ inputs: { x, b }, backend }: GeluArgs): tf.TensorInfo {
  checkFloat(BIAS_GELU, x, b);
  const [rows, n] = x.shape;
  const y = backend.makeOutput([rows, n], 'float32');
  if (rows * n === 0) return y;
  const run = jobRunner(backend, { ns: rows * n * RATE.geluNs, inputs: [x, b], outputs: [y] });
  try {
    const { tasks, per } = split(rows, run.threads);
    run.run(JOB.biasGelu, tasks, [run.input(x), run.input(b), run.output(y), rows, n, per]);
  } finally {
    run.finish();
  }
  return y;
}

function biasGeluBackward({ inputs: { x, b, dy }, backend }: GeluArgs): tf.TensorInfo[] {
  if (!dy) throw new Error(`${BIAS_GELU_GRAD} (src/kernels/gelu.ts): dy is missing`);
  checkFloat(BIAS_GELU_GRAD, x, b, dy);
  const [rows, n] = x.shape;
  const dx = backend.makeOutput([rows, n], 'float32');
  const db = backend.makeOutput([n], 'float32');
  if (n === 0) return [dx, db];
  const run = jobRunner(backend, { ns: rows * n * RATE.geluGradNs, inputs: [x, b, dy], outputs: [dx, db] });
  try {
    const X = run.input(x);
    const B = run.input(b);
    const DY = run.input(dy);
    const DX = run.output(dx);
    const DB = run.output(db);
    const byRows = split(rows, run.threads);
    run.run(JOB.biasGeluDx, byRows.tasks, [X, B, DY, DX, rows, n, byRows.per]);
    // db = Σ_rows dx, by columns (each column's sum in row order on one thread)
    const byCols = split(n, run.threads, 32);
    run.run(JOB.sumCols, byCols.tasks, [DX, DB, rows, n, byCols.per]);
  } finally {
    run.finish();
  }
  return [dx, db];
}

export const biasGeluConfig: tf.KernelConfig = {
  kernelName: BIAS_GELU,
  backendName: 'wasm',
  kernelFunc: biasGeluForward as unknown as tf.KernelFunc,
};

export const biasGeluGradConfig: tf.KernelConfig = {
  kernelName: BIAS_GELU_GRAD,
  backendName: 'wasm',
  kernelFunc: biasGeluBackward as unknown as tf.KernelFunc,
};
