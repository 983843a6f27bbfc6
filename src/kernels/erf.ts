// defines: erfConfig — Erf for 'wasm' on our SIMD polynomial (kernels.c, erf_range)
//
// Exact GELU, 0.5·x·(1 + erf(x/√2)), is what the checkpoints were trained with, and
// stock tfjs-backend-wasm evaluates erf one scalar at a time. This kernel keeps the
// exact-erf semantics (max abs error vs a float64 reference is measured in
// tests/kernels/erf.test.ts) four lanes at a time.
//
// The gradient is tfjs-core's Erf gradient, dy · 2/√π · exp(−x²), in stock ops.

import * as tf from '@tensorflow/tfjs';
import { jobRunner, RATE, split } from './jobs.js';
import { JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

function erf({ inputs, backend }: { inputs: { x: tf.TensorInfo }; backend: WasmBackendLike }): tf.TensorInfo {
  const { x } = inputs;
  if (x.dtype !== 'float32') {
    throw new Error(`Erf (src/kernels/erf.ts): float32 only, got ${x.dtype}`);
  }
  const out = backend.makeOutput(x.shape.slice(), 'float32');
  const n = x.shape.reduce((p, d) => p * d, 1);
  if (n === 0) return out;
  const run = jobRunner(backend, { ns: n * RATE.geluNs, inputs: [x], outputs: [out] });
  try {
    const { tasks, per } = split(n, run.threads, 4);
    run.run(JOB.erf, tasks, [run.input(x), run.output(out), n, per]);
  } finally {
    run.finish();
  }
  return out;
}

export const erfConfig: tf.KernelConfig = {
  kernelName: tf.Erf,
  backendName: 'wasm',
  kernelFunc: erf as unknown as tf.KernelFunc,
};
