// defines: useWasm — tfjs on its wasm backend in Node, with the project's fast kernels.
//
// Node has no page to resolve the .wasm files against, so their folder is given by
// absolute path; the fast kernels (src/kernels/register.ts) are registered after the
// backend is chosen, as that module asks.

import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import { setWasmPaths } from '@tensorflow/tfjs-backend-wasm';
import { startKernelThreads } from '../../src/node/kernel-threads.js';
import { registerFastKernels } from '../../src/kernels/register.js';

export async function useWasm(): Promise<void> {
  setWasmPaths(fileURLToPath(new URL('../../node_modules/@tensorflow/tfjs-backend-wasm/dist/', import.meta.url)));
  if (!(await tf.setBackend('wasm'))) throw new Error('tfjs: the wasm backend failed to initialise');
  await tf.ready();
  registerFastKernels();
  await startKernelThreads(undefined, tf.backend() as never); // every core unless SPANWRIGHT_THREADS says fewer
}
