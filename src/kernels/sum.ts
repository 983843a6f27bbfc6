// defines: sumConfig — Sum for 'wasm', fast over leading axes
//
// Every bias gradient is a Sum of a [B·T, H] (or [B·T, I]) gradient over axis 0.
// Stock tfjs-backend-wasm 4.22 reduces only over trailing axes, so it first
// transposes the input to put the reduced axes last (a scalar transpose of the
// whole gradient): 81 Sums took 270–420 ms of one L2-H128-T256-B16 step here. The
// reduce-over-leading-axes case runs as one pass of column sums (kernels.c,
// sum_cols, by blocks of columns); every other case — trailing or scattered axes, a full
// reduction, int32 or bool input — goes to the stock kernel unchanged.
//
// Semantics as tf.sum: out = Σ over the reduced axes, shape without them (or with
// 1s there when keepDims).

import * as tf from '@tensorflow/tfjs';
import { runStock } from './stock.js';
import { jobRunner, RATE, split } from './jobs.js';
import { JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

interface SumArgs {
  inputs: { x: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { axis: number | number[]; keepDims: boolean };
}

/** How many leading axes `axis` names exactly, or 0 when it is not such a prefix (or is all axes). */
function leadingAxes(axis: number | number[], shape: number[]): number {
  const axes = [...tf.util.parseAxisParam(axis, shape)].sort((a, b) => a - b);
  if (axes.length === 0 || axes.length >= shape.length) return 0;
  return axes.every((a, i) => a === i) ? axes.length : 0;
}

function sum(args: SumArgs): tf.TensorInfo | tf.TensorInfo[] {
  const {
    inputs: { x },
    backend,
    attrs: { axis, keepDims },
  } = args;
  const lead = x.dtype === 'float32' ? leadingAxes(axis, x.shape) : 0;
  if (lead === 0) return runStock(tf.Sum, args);
  const kept = x.shape.slice(lead);
  const m = x.shape.slice(0, lead).reduce((p, d) => p * d, 1);
  const n = kept.reduce((p, d) => p * d, 1);
  const out = backend.makeOutput(keepDims ? [...new Array<number>(lead).fill(1), ...kept] : kept, 'float32');
  if (n === 0) return out;
  const run = jobRunner(backend, { ns: m * n * RATE.streamNs, inputs: [x], outputs: [out] });
  try {
    const { tasks, per } = split(n, run.threads, 32);
    run.run(JOB.sumCols, tasks, [run.input(x), run.output(out), m, n, per]);
  } finally {
    run.finish();
  }
  return out;
}

export const sumConfig: tf.KernelConfig = {
  kernelName: tf.Sum,
  backendName: 'wasm',
  kernelFunc: sum as unknown as tf.KernelFunc,
};
