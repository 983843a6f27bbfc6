// defines: useBackend — switch tfjs to 'cpu' or 'wasm' inside a Node test.
//
// For 'wasm' the .wasm binaries are served from node_modules by absolute path (Node has
// no page to resolve relative URLs against), and the project's fast kernels from
// src/kernels/register.ts are registered, since stock wasm lacks UnsortedSegmentSum
// (tf.gather's gradient) — docs/DESIGN.md, measured facts.

import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import { setWasmPaths } from '@tensorflow/tfjs-backend-wasm';
import { registerFastKernels } from '../../src/kernels/register.js';

export type BackendName = 'cpu' | 'wasm';

let wasmPathsSet = false;

/** Makes `name` the active tfjs backend (registering the fast kernels for wasm). */
export async function useBackend(name: BackendName): Promise<void> {
  if (name === 'wasm') {
    if (!wasmPathsSet) {
      const dist = fileURLToPath(new URL('../../node_modules/@tensorflow/tfjs-backend-wasm/dist/', import.meta.url));
      setWasmPaths(dist);
      wasmPathsSet = true;
    }
    registerFastKernels();
  }
  const ok = await tf.setBackend(name);
  if (!ok) throw new Error(`tfjs backend "${name}" failed to initialise`);
  await tf.ready();
}
