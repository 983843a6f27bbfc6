// Test helper: a stand-in for tfjs's wasm backend whose heap is a SHARED
// WebAssembly.Memory, as tfjs's threaded-simd build has in a cross-origin isolated page.
// Node's tfjs has no such build, so this is how the pool's in-place mode (the browser's)
// runs here: the fast kernels' kernelFuncs are called on it directly, with tensors it
// places in its heap. Only what src/kernels/wasm-module.ts's WasmBackendLike names is
// provided; malloc is a bump allocator that never frees (a test's heap is small).

import type * as tf from '@tensorflow/tfjs';
import type { WasmBackendLike } from '../../src/kernels/wasm-module.js';

export class SharedHeapBackend implements WasmBackendLike {
  readonly memory = new WebAssembly.Memory({ initial: 512, maximum: 65536, shared: true });
  private top = 1024;
  private nextId = 1;
  private readonly offsets = new Map<object, { memoryOffset: number }>();

  readonly wasm = {
    wasmMemory: this.memory,
    get HEAPU8(): Uint8Array {
      return heap(this.wasmMemory);
    },
    _malloc: (bytes: number): number => this.malloc(bytes),
    _free: (): void => {},
  };

  readonly dataIdMap = { get: (dataId: object) => this.offsets.get(dataId) };

  private malloc(bytes: number): number {
    const addr = this.top;
    this.top = (addr + bytes + 63) & ~63;
    const have = this.memory.buffer.byteLength;
    if (this.top > have) this.memory.grow(Math.ceil((this.top - have) / 65536));
    return addr;
  }

  makeOutput(shape: number[], dtype: tf.DataType): tf.TensorInfo {
    const dataId = { id: this.nextId++ };
    const size = shape.reduce((p, d) => p * d, 1);
    this.offsets.set(dataId, { memoryOffset: this.malloc(size * 4) });
    return { dataId, shape, dtype };
  }

  incRef(): void {}

  /** A tensor holding `values`. */
  tensor(values: Float32Array | Int32Array, shape: number[]): tf.TensorInfo {
    const info = this.makeOutput(shape, values instanceof Int32Array ? 'int32' : 'float32');
    new Uint8Array(this.memory.buffer).set(new Uint8Array(values.buffer, values.byteOffset, values.byteLength), this.offset(info));
    return info;
  }

  /** A copy of a float32 tensor's values. */
  read(info: tf.TensorInfo): Float32Array {
    const size = info.shape.reduce((p, d) => p * d, 1);
    return new Float32Array(this.memory.buffer, this.offset(info), size).slice();
  }

  private offset(info: tf.TensorInfo): number {
    return this.offsets.get(info.dataId)!.memoryOffset;
  }
}

function heap(memory: WebAssembly.Memory): Uint8Array {
  return new Uint8Array(memory.buffer);
}
