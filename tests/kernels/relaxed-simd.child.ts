// Run by tests/kernels/relaxed-simd.test.ts as
//   node --experimental-wasm-relaxed-simd --import tsx tests/kernels/relaxed-simd.child.ts
// (Node 20's V8 validates relaxed SIMD only behind that flag). Runs the same kernels on
// the relaxed-SIMD and the SIMD128 builds, and the relaxed build on 1 and 2 threads, over
// shared test heaps (SharedHeapBackend), and prints one JSON line of their outputs'
// differences for the test to judge.
import { startKernelThreads } from '../../src/node/kernel-threads.js';
import { fusedAttentionConfig, fusedAttentionGradConfig } from '../../src/kernels/attention.js';
import { setJobSharing } from '../../src/kernels/jobs.js';
import { batchMatMulConfig } from '../../src/kernels/matmul.js';
import { stopKernelThreads } from '../../src/kernels/threads.js';
import { fastModuleFor, relaxedSimdSupported, setKernelOptions } from '../../src/kernels/wasm-module.js';
import { uniform } from './backends.js';
import { SharedHeapBackend } from './shared-heap.js';

const [M, K, N] = [130, 300, 70];
const [B, T, H, heads] = [2, 29, 24, 3];

function outputs(heap: SharedHeapBackend): Record<string, Float32Array> {
  const a = heap.tensor(uniform(M * K, 1), [M, K]);
  const b = heap.tensor(uniform(K * N, 2), [K, N]);
  const q = heap.tensor(uniform(B * T * H, 3), [B * T, H]);
  const k = heap.tensor(uniform(B * T * H, 4), [B * T, H]);
  const v = heap.tensor(uniform(B * T * H, 5), [B * T, H]);
  const dy = heap.tensor(uniform(B * T * H, 6), [B * T, H]);
  const bias = heap.tensor(new Float32Array(B * T), [B, T]);
  const attrs = { numHeads: heads, dropoutRate: 0.1, dropoutSeed: 3, keepProbs: true };
  const gemm = (tA: boolean, tB: boolean, x = a, y = b) =>
    batchMatMulConfig.kernelFunc({ inputs: { a: x, b: y }, backend: heap, attrs: { transposeA: tA, transposeB: tB } } as never) as never;
  const [context, probs] = fusedAttentionConfig.kernelFunc({
    inputs: { q, k, v, keyBias: bias },
    backend: heap,
    attrs,
  } as never) as never[];
  const [dq, dk, dv] = fusedAttentionGradConfig.kernelFunc({ inputs: { q, k, v, probs, dy }, backend: heap, attrs } as never) as never[];
  return {
    gemm: heap.read(gemm(false, false)),
    gemmAtA: heap.read(gemm(true, false, a, a)),
    context: heap.read(context),
    dq: heap.read(dq),
    dk: heap.read(dk),
    dv: heap.read(dv),
  };
}

function compare(x: Record<string, Float32Array>, y: Record<string, Float32Array>) {
  return Object.fromEntries(
    Object.keys(x).map((key) => {
      let max = 0;
      let scale = 0;
      let differing = 0;
      for (let i = 0; i < x[key].length; i++) {
        max = Math.max(max, Math.abs(x[key][i] - y[key][i]));
        scale = Math.max(scale, Math.abs(y[key][i]));
        if (x[key][i] !== y[key][i]) differing++;
      }
      return [key, { max, scale, differing, length: x[key].length }];
    }),
  );
}

setKernelOptions({ relaxedSimd: 'off' });
const plainHeap = new SharedHeapBackend();
const plain = outputs(plainHeap);
setKernelOptions({ relaxedSimd: 'auto' });
const relaxedHeap = new SharedHeapBackend();
const relaxed = outputs(relaxedHeap);
// the relaxed build shared with a second thread
setJobSharing('always');
await startKernelThreads(2, relaxedHeap);
const relaxedTwo = outputs(relaxedHeap);
stopKernelThreads();
console.log(
  JSON.stringify({
    supported: relaxedSimdSupported(),
    builds: { plain: fastModuleFor(plainHeap).build.relaxed, relaxed: fastModuleFor(relaxedHeap).build.relaxed },
    K,
    relaxedVsPlain: compare(relaxed, plain),
    twoThreadsVsOne: compare(relaxedTwo, relaxed),
  }),
);
