// defines: layerNorm (the fused op), layerNormConfig and layerNormGradConfig (its
// kernels for 'wasm')
//
//   y = (x − μ)/√(σ² + eps) · γ + β   per row; μ, σ² the row's mean and biased
//   variance, as torch.nn.LayerNorm (Ba et al. 2016)
//
// Shapes: R rows (B·T), H columns; γ, β [H].
//
// Why fused: as tfjs ops a LayerNorm was nine kernels forward and about twenty
// backward over [R, H], each saving or producing a tensor, and five per layer pair
// ran per step. The kernels (kernels.c, layer_norm_rows; layer_norm_dx_rows then
// layer_norm_dparams_cols) keep x with each row's μ and 1/σ for the backward and
// return dγ and dβ with dx.
// Without the kernels the op composes the tfjs ops the encoder used before.

import * as tf from '@tensorflow/tfjs';
import { hasKernel, recordingGradients, runKernel } from './fused-op.js';
import { jobRunner, RATE, split } from './jobs.js';
import { f32, JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

export const LAYER_NORM = 'SpanwrightLayerNorm';
export const LAYER_NORM_GRAD = 'SpanwrightLayerNormGrad';

/** LayerNorm over the last axis of x [R, H] with weight γ and bias β [H]. */
export function layerNorm(x: tf.Tensor2D, gamma: tf.Tensor1D, beta: tf.Tensor1D, eps: number): tf.Tensor2D {
  const H = x.shape[1];
  if (x.rank !== 2 || gamma.shape[0] !== H || beta.shape[0] !== H || gamma.rank !== 1 || beta.rank !== 1) {
    throw new Error(`layerNorm: weight [${gamma.shape}] and bias [${beta.shape}] do not fit x [${x.shape}] (expected [${H}])`);
  }
  if (!hasKernel(LAYER_NORM)) return composedLayerNorm(x, gamma, beta, eps);
  if (!recordingGradients()) return runKernel(LAYER_NORM, { x, gamma, beta }, { eps, keepStats: false })[0] as tf.Tensor2D;
  const fused = tf.customGrad((...args: unknown[]) => {
    const [xi, gi, bi] = args as [tf.Tensor2D, tf.Tensor1D, tf.Tensor1D];
    const [y, mean, rstd] = runKernel(LAYER_NORM, { x: xi, gamma: gi, beta: bi }, { eps, keepStats: true });
    (args[3] as tf.GradSaveFunc)([xi, gi, mean, rstd]);
    return {
      value: y,
      // inverts "y = (x − μ)·σ⁻¹·γ + β" (kernels.c, layer_norm_dx_rows, layer_norm_dparams_cols)
      gradFunc: (dy: tf.Tensor | tf.Tensor[], saved: tf.Tensor[]) =>
        runKernel(LAYER_NORM_GRAD, { x: saved[0], gamma: saved[1], mean: saved[2], rstd: saved[3], dy: dy as tf.Tensor }, {}),
    };
  });
  return fused(x, gamma, beta) as tf.Tensor2D;
}

/** The same function in plain tfjs ops. */
function composedLayerNorm(x: tf.Tensor2D, gamma: tf.Tensor1D, beta: tf.Tensor1D, eps: number): tf.Tensor2D {
  return tf.tidy(() => {
    const mean = tf.mean(x, -1, true); // [R, 1]
    const centred = tf.sub(x, mean); // [R, H]
    const variance = tf.mean(tf.square(centred), -1, true); // [R, 1]
    const normed = tf.mul(centred, tf.rsqrt(tf.add(variance, eps))); // [R, H]
    return tf.add(tf.mul(normed, gamma), beta) as tf.Tensor2D;
  });
}

// ---- the kernels -------------------------------------------------------------------

interface ForwardArgs {
  inputs: { x: tf.TensorInfo; gamma: tf.TensorInfo; beta: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { eps: number; keepStats: boolean };
}

interface BackwardArgs {
  inputs: { x: tf.TensorInfo; gamma: tf.TensorInfo; mean: tf.TensorInfo; rstd: tf.TensorInfo; dy: tf.TensorInfo };
  backend: WasmBackendLike;
}

function checkFloat(name: string, ts: tf.TensorInfo[]): void {
  for (const t of ts) if (t.dtype !== 'float32') throw new Error(`${name} (src/kernels/layer-norm.ts): float32 only, got ${t.dtype}`);
}

function layerNormForward({ inputs: { x, gamma, beta }, backend, attrs }: ForwardArgs): tf.TensorInfo[] {
  checkFloat(LAYER_NORM, [x, gamma, beta]);
  const [rows, n] = x.shape;
  const y = backend.makeOutput([rows, n], 'float32');
  const stats = attrs.keepStats ? [backend.makeOutput([rows], 'float32'), backend.makeOutput([rows], 'float32')] : [];
  if (rows * n === 0) return [y, ...stats];
  const run = jobRunner(backend, { ns: rows * n * RATE.streamNs, inputs: [x, gamma, beta], outputs: [y, ...stats] });
  try {
    const args = [run.input(x), run.input(gamma), run.input(beta), run.output(y)];
    const [mean, rstd] = stats.length ? [run.output(stats[0]), run.output(stats[1])] : [0, 0];
    const { tasks, per } = split(rows, run.threads);
    run.run(JOB.layerNorm, tasks, [...args, mean, rstd, rows, n, f32(attrs.eps), per]);
  } finally {
    run.finish();
  }
  return [y, ...stats];
}

function layerNormBackward({ inputs: { x, gamma, mean, rstd, dy }, backend }: BackwardArgs): tf.TensorInfo[] {
  checkFloat(LAYER_NORM_GRAD, [x, gamma, mean, rstd, dy]);
  const [rows, n] = x.shape;
  const dx = backend.makeOutput([rows, n], 'float32');
  const dgamma = backend.makeOutput([n], 'float32');
  const dbeta = backend.makeOutput([n], 'float32');
  if (n === 0) return [dx, dgamma, dbeta];
  const run = jobRunner(backend, { ns: 2 * rows * n * RATE.streamNs, inputs: [x, gamma, mean, rstd, dy], outputs: [dx, dgamma, dbeta] });
  try {
    const X = run.input(x);
    const MEAN = run.input(mean);
    const RSTD = run.input(rstd);
    const DY = run.input(dy);
    const byRows = split(rows, run.threads);
    run.run(JOB.layerNormDx, byRows.tasks, [X, run.input(gamma), MEAN, RSTD, DY, run.output(dx), rows, n, byRows.per]);
    // dγ and dβ sum over rows: by columns, each in row order on one thread
    const byCols = split(n, run.threads, 4);
    run.run(JOB.layerNormDparams, byCols.tasks, [X, MEAN, RSTD, DY, run.output(dgamma), run.output(dbeta), rows, n, byCols.per]);
  } finally {
    run.finish();
  }
  return [dx, dgamma, dbeta];
}

export const layerNormConfig: tf.KernelConfig = {
  kernelName: LAYER_NORM,
  backendName: 'wasm',
  kernelFunc: layerNormForward as unknown as tf.KernelFunc,
};

export const layerNormGradConfig: tf.KernelConfig = {
  kernelName: LAYER_NORM_GRAD,
  backendName: 'wasm',
  kernelFunc: layerNormBackward as unknown as tf.KernelFunc,
};
