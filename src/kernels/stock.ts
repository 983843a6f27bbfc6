// defines: rememberStock, runStock — the stock tfjs-backend-wasm kernels a fast path
// hands back the cases it does not cover (a Sum over trailing axes, a gather along
// another axis, an Identity of strings). register.ts records each stock config here
// before swapping the fast one in.

import type * as tf from '@tensorflow/tfjs';

const stock = new Map<string, tf.KernelConfig>();

/** Keeps the stock config displaced by a fast path (called by register.ts only). */
export function rememberStock(config: tf.KernelConfig): void {
  stock.set(config.kernelName, config);
}

/** Runs the stock 'wasm' kernel `name` on the same arguments. */
export function runStock(name: string, args: unknown): tf.TensorInfo | tf.TensorInfo[] {
  const config = stock.get(name);
  if (!config) throw new Error(`src/kernels: no stock wasm kernel ${name} was recorded (call registerFastKernels)`);
  return config.kernelFunc(args as Parameters<tf.KernelFunc>[0]);
}
