// The kernel thread pool (src/kernels/threads.ts, jobs.ts; kernels.c "Jobs"): every
// fast kernel gives the same bits on one thread and on two. How a job is cut into tasks
// never changes what an output element sums or in which order (kernels.c), so the
// check is exact equality, not a tolerance: one bit of difference means a task wrote
// another's output, read a stale argument, or summed in another order.
//
//   1. copies — Node's tfjs heap is not shared, so the pool copies operands into its
//      own shared memory: every op through tfjs on wasm, jobs shared however small
//      (setJobSharing('always')), on 1 and on 2 threads, and against the cpu backend
//      (the reference library) within the existing kernel tests' tolerance
//   2. in place — a shared heap as tfjs's threaded build has in the browser
//      (SharedHeapBackend): the kernels write the tensors where they are, and match 1
//   3. the helper did take tasks; small jobs stay on one thread unless forced
//
// Every result here is compared against a result computed on one thread (the path that
// does not involve the pool at all), so a pool that silently ran nothing would fail.

import * as tf from '@tensorflow/tfjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startKernelThreads } from '../../src/node/kernel-threads.js';
import { adamwUpdate } from '../../src/kernels/adamw-update.js';
import { attention, fusedAttentionConfig, fusedAttentionGradConfig } from '../../src/kernels/attention.js';
import { dropout } from '../../src/kernels/dropout.js';
import { biasGelu } from '../../src/kernels/gelu.js';
import { jobRunner, setJobSharing, split } from '../../src/kernels/jobs.js';
import { layerNorm, layerNormGradConfig } from '../../src/kernels/layer-norm.js';
import { batchMatMulConfig } from '../../src/kernels/matmul.js';
import { POOL_BYTES, POOL_FAILED } from '../../src/kernels/pool-layout.js';
import {
  kernelPoolFor,
  kernelThreadCount,
  kernelThreadsReady,
  setKernelThreads,
  stopKernelThreads,
  useKernelThreads,
  type KernelThreadStart,
} from '../../src/kernels/threads.js';
import type { WasmBackendLike } from '../../src/kernels/wasm-module.js';
import { maxAbsDiff, readyBoth, runOn, uniform } from './backends.js';
import { SharedHeapBackend } from './shared-heap.js';

type Outputs = Record<string, Float32Array>;

/** Each case: named outputs of ops on the current backend (values and gradients). */
const CASES: Record<string, () => Outputs> = {
  'matMul, all four transposes, tails': () => {
    const out: Outputs = {};
    const a = tf.tensor2d(uniform(203 * 71, 1), [203, 71]);
    const b = tf.tensor2d(uniform(71 * 93, 2), [71, 93]);
    out.nn = tf.matMul(a, b).dataSync() as Float32Array;
    out.tn = tf.matMul(tf.transpose(a), tf.transpose(a), true, false).dataSync() as Float32Array;
    out.nt = tf.matMul(a, tf.transpose(b), false, true).dataSync() as Float32Array;
    out.tt = tf.matMul(tf.transpose(a), tf.transpose(b), true, true).dataSync() as Float32Array;
    // a wide one: cut by columns
    out.wide = tf
      .matMul(tf.tensor2d(uniform(20 * 300, 3), [20, 300]), tf.tensor2d(uniform(300 * 517, 4), [300, 517]))
      .dataSync() as Float32Array;
    return out;
  },
  'batched and broadcast matMul': () => ({
    same: tf
      .matMul(tf.tensor3d(uniform(3 * 41 * 50, 5), [3, 41, 50]), tf.tensor3d(uniform(3 * 50 * 29, 6), [3, 50, 29]))
      .dataSync() as Float32Array,
    one: tf
      .matMul(tf.tensor3d(uniform(41 * 50, 7), [1, 41, 50]), tf.tensor3d(uniform(3 * 50 * 29, 8), [3, 50, 29]))
      .dataSync() as Float32Array,
    both: tf
      .matMul(tf.tensor4d(uniform(2 * 20 * 30, 9), [2, 1, 20, 30]), tf.tensor4d(uniform(3 * 30 * 10, 10), [1, 3, 30, 10]))
      .dataSync() as Float32Array,
  }),
  'attention with padding and dropout, and its gradients': () => {
    const [B, T, N, D] = [3, 37, 3, 8];
    const H = N * D;
    const bias = new Float32Array(B * T);
    for (let t = 30; t < T; t++) bias[T + t] = -10000;
    const q = tf.tensor2d(uniform(B * T * H, 11), [B * T, H]);
    const k = tf.tensor2d(uniform(B * T * H, 12), [B * T, H]);
    const v = tf.tensor2d(uniform(B * T * H, 13), [B * T, H]);
    const dy = tf.tensor2d(uniform(B * T * H, 14), [B * T, H]);
    const f = (qi: tf.Tensor, ki: tf.Tensor, vi: tf.Tensor) =>
      tf.sum(
        tf.mul(
          attention(qi as tf.Tensor2D, ki as tf.Tensor2D, vi as tf.Tensor2D, tf.tensor2d(bias, [B, T]), {
            numHeads: N,
            dropoutRate: 0.1,
            dropoutSeed: 77,
          }),
          dy,
        ),
      );
    const { value, grads } = tf.valueAndGrads(f)([q, k, v]);
    return {
      value: value.dataSync() as Float32Array,
      dq: grads[0].dataSync() as Float32Array,
      dk: grads[1].dataSync() as Float32Array,
      dv: grads[2].dataSync() as Float32Array,
    };
  },
  'biasGelu, layerNorm, dropout and their gradients': () => {
    const [R, I] = [123, 70];
    const x = tf.tensor2d(uniform(R * I, 15), [R, I]);
    const b = tf.tensor1d(uniform(I, 16));
    const g = tf.tensor1d(uniform(I, 17));
    const dy = tf.tensor2d(uniform(R * I, 18), [R, I]);
    const f = (xi: tf.Tensor, bi: tf.Tensor, gi: tf.Tensor) =>
      tf.sum(
        tf.mul(dropout(layerNorm(biasGelu(xi as tf.Tensor2D, bi as tf.Tensor1D), gi as tf.Tensor1D, bi as tf.Tensor1D, 1e-12), 0.1, 5), dy),
      );
    const { value, grads } = tf.valueAndGrads(f)([x, b, g]);
    return {
      value: value.dataSync() as Float32Array,
      dx: grads[0].dataSync() as Float32Array,
      db: grads[1].dataSync() as Float32Array,
      dg: grads[2].dataSync() as Float32Array,
    };
  },
  'AdamW, erf, leading-axis Sum, the embedding gradient': () => {
    const n = 4099;
    const p = tf.tensor1d(uniform(n, 19));
    const [np, nm, nv] = adamwUpdate(p, tf.tensor1d(uniform(n, 20)), tf.tensor1d(uniform(n, 21)), tf.abs(tf.tensor1d(uniform(n, 22))), {
      gradScale: 0.5,
      decayFactor: 0.999,
      beta1: 0.9,
      beta2: 0.999,
      stepSize: 1e-3,
      correction2Sqrt: 0.3,
      epsilon: 1e-6,
    });
    const table = tf.tensor2d(uniform(301 * 24, 23), [301, 24]);
    const ids = tf.tensor1d(
      new Int32Array(500).map((_, i) => (i * 37) % 301),
      'int32',
    );
    const embeddingGrad = tf.grad((t: tf.Tensor) => tf.sum(tf.mul(tf.gather(t, ids), tf.tensor2d(uniform(500 * 24, 24), [500, 24]))))(
      table,
    );
    return {
      p: np.dataSync() as Float32Array,
      m: nm.dataSync() as Float32Array,
      v: nv.dataSync() as Float32Array,
      erf: tf.erf(tf.tensor1d(uniform(n, 25).map((x) => 3 * x))).dataSync() as Float32Array,
      sum: tf.sum(tf.tensor3d(uniform(7 * 13 * 75, 26), [7, 13, 75]), [0, 1]).dataSync() as Float32Array,
      embeddingGrad: embeddingGrad.dataSync() as Float32Array,
    };
  },
};

function runAll(): Record<string, Outputs> {
  const all: Record<string, Outputs> = {};
  for (const [name, f] of Object.entries(CASES)) all[name] = tf.tidy(() => f());
  return all;
}

function expectSameBits(got: Outputs, want: Outputs, label: string): void {
  expect(Object.keys(got)).toEqual(Object.keys(want));
  for (const key of Object.keys(want)) {
    const a = new Uint32Array(got[key].buffer, got[key].byteOffset, got[key].length);
    const b = new Uint32Array(want[key].buffer, want[key].byteOffset, want[key].length);
    const at = a.findIndex((bits, i) => bits !== b[i]);
    expect(at, `${label} ${key}: first differing element ${at} (${got[key][at]} vs ${want[key][at]})`).toBe(-1);
    expect(a.length).toBe(b.length);
  }
}

let oneThread: Record<string, Outputs>;
let pool: ReturnType<typeof kernelPoolFor>;

beforeAll(async () => {
  await readyBoth();
  oneThread = runAll(); // before any pool exists: the plain one-thread path
  await startKernelThreads(2, tf.backend() as unknown as WasmBackendLike);
  pool = kernelPoolFor(tf.backend() as unknown as WasmBackendLike);
});

afterAll(() => {
  setJobSharing('auto');
  stopKernelThreads();
});

describe('kernel threads over copies (Node: the tfjs heap is not shared)', () => {
  it('starts two threads that work in their own shared memory', () => {
    expect(pool).not.toBeNull();
    expect(pool!.copies).toBe(true);
    expect(kernelThreadCount()).toBe(2);
  });

  it('gives the one-thread bits with every job shared, at 2 threads and again at 1', () => {
    setJobSharing('always');
    try {
      const before = pool!.tasksTaken();
      const two = runAll();
      const after = pool!.tasksTaken();
      for (const name of Object.keys(CASES)) expectSameBits(two[name], oneThread[name], `${name} (2 threads)`);
      // the jobs really were shared: both threads ran some of their tasks
      expect(after[0]).toBeGreaterThan(before[0]);
      expect(after[1]).toBeGreaterThan(before[1]);
      setKernelThreads(1);
      expect(kernelThreadCount()).toBe(1);
      const one = runAll();
      for (const name of Object.keys(CASES)) expectSameBits(one[name], oneThread[name], `${name} (threads set to 1)`);
    } finally {
      setKernelThreads(2);
      setJobSharing('auto');
    }
  });

  it('agrees with the cpu backend (the reference library) on the threaded path', () => {
    setJobSharing('always');
    try {
      for (const [name, f] of Object.entries(CASES)) {
        // 'both': tfjs 4.22's cpu BatchMatMul sizes a mutual broadcast by the larger batch
        // alone (600 values for [2,1,20,30]·[1,3,30,10], not 1200), so it is no reference
        const keys = Object.keys(oneThread[name]).filter((key) => key !== 'both');
        const wasm = runOn('wasm', () => tf.concat(keys.map((key) => tf.tensor1d(f()[key]))));
        const cpu = runOn('cpu', () => tf.concat(keys.map((key) => tf.tensor1d(f()[key]))));
        const scale = Math.max(...Array.from(cpu.values, Math.abs));
        const d = maxAbsDiff(wasm.values, cpu.values);
        // the kernel tests' bound (tests/kernels/attention.test.ts): 2e-5 + 1e-4·max|cpu|; the
        // dropout masks are the same function on both backends
        expect(d.max, `${name}: element ${d.at}, ${d.got} vs ${d.want}`).toBeLessThanOrEqual(2e-5 + 1e-4 * scale);
      }
    } finally {
      setJobSharing('auto');
    }
  });

  it('keeps small jobs on one thread unless told otherwise, and cuts tasks by the rules', () => {
    const backend = tf.backend() as unknown as WasmBackendLike;
    const info = (t: tf.Tensor): tf.TensorInfo => ({ dataId: t.dataId, shape: t.shape, dtype: t.dtype });
    const [x, y, big, bigOut] = [tf.zeros([1000]), tf.zeros([1000]), tf.zeros([2 ** 21]), tf.zeros([2 ** 21])];
    const threadsFor = (ns: number, inputs: tf.Tensor[], outputs: tf.Tensor[]): number => {
      const run = jobRunner(backend, { ns, inputs: inputs.map(info), outputs: outputs.map(info) });
      run.finish();
      return run.threads;
    };
    expect(threadsFor(1000, [x], [y])).toBe(1);
    expect(threadsFor(50e6, [x], [y])).toBe(2);
    // 16 MB to copy (~1.4 ms) for 0.5 ms saved: stays home
    expect(threadsFor(1e6, [big], [bigOut])).toBe(1);
    setJobSharing('always');
    expect(threadsFor(1000, [x], [y])).toBe(2);
    setJobSharing('auto');
    tf.dispose([x, y, big, bigOut]);
    expect(split(100, 1)).toEqual({ tasks: 1, per: 100 });
    expect(split(100, 2, 4)).toEqual({ tasks: 7, per: 16 }); // 8 wanted: 12.5 rounded up to 16
    expect(split(0, 2)).toEqual({ tasks: 0, per: 1 });
    expect(split(1e9, 2).tasks).toBeLessThanOrEqual(32767);
  });

  it('copies in only the inputs the pool does not hold: an output feeds the next job without a copy', () => {
    const a = tf.tensor2d(uniform(300 * 200, 41), [300, 200]);
    const b = tf.tensor2d(uniform(200 * 100, 42), [200, 100]);
    const want = tf.tidy(() => {
      setKernelThreads(1);
      const r = tf.matMul(tf.matMul(a, b), tf.transpose(b)).dataSync() as Float32Array;
      setKernelThreads(2);
      return r;
    });
    setJobSharing('always');
    try {
      const cache = pool!.cache!;
      const before = { ...cache.counts };
      const c = tf.matMul(a, b); // a and b copied in (or held from earlier tests), c out
      const afterFirst = { ...cache.counts };
      const d = tf.matMul(c, b, false, true); // c and b held: nothing copied in
      expect(cache.counts.missBytes).toBe(afterFirst.missBytes);
      expect(cache.counts.hitBytes - afterFirst.hitBytes).toBe((300 * 100 + 200 * 100) * 4);
      expect(afterFirst.missBytes + afterFirst.hitBytes - before.missBytes - before.hitBytes).toBe((300 * 200 + 200 * 100) * 4);
      expectSameBits({ d: d.dataSync() as Float32Array }, { d: want }, 'chained through the cache');
      tf.dispose([c, d]);
    } finally {
      setJobSharing('auto');
      tf.dispose([a, b]);
    }
  });
});

describe('a kernel thread that fails to start', () => {
  it('leaves the engine on one thread, with the same results', async () => {
    const backend = tf.backend() as unknown as WasmBackendLike;
    // a stand-in helper that fails as runKernelThread does when its instance traps
    useKernelThreads(
      () => ({
        postMessage: (start: KernelThreadStart) => {
          Atomics.store(new Int32Array(start.memory.buffer, start.pool, POOL_BYTES / 4), POOL_FAILED, 1);
        },
        terminate: () => undefined,
      }),
      2,
    );
    await expect(kernelThreadsReady(backend)).resolves.toBe(1);
    expect(kernelThreadCount()).toBe(1);
    expect(kernelPoolFor(backend)).toBeNull();
    const name = 'matMul, all four transposes, tails';
    expectSameBits(tf.tidy(CASES[name]), oneThread[name], 'after a failed start');
  });
});

describe('kernel threads in place (a shared heap, as in the browser)', () => {
  it('matMul, attention and the LayerNorm backward give the one-thread bits on a shared tfjs-like heap', async () => {
    stopKernelThreads();
    const heap = new SharedHeapBackend();
    const [M, K, N] = [600, 256, 300]; // a few ms each, so the helper wakes before the caller is done
    const a = heap.tensor(uniform(M * K, 31), [M, K]);
    const b = heap.tensor(uniform(K * N, 32), [K, N]);
    const [B, T, Nh, D] = [2, 33, 2, 8];
    const H = Nh * D;
    const q = heap.tensor(uniform(B * T * H, 33), [B * T, H]);
    const kk = heap.tensor(uniform(B * T * H, 34), [B * T, H]);
    const v = heap.tensor(uniform(B * T * H, 35), [B * T, H]);
    const bias = heap.tensor(new Float32Array(B * T), [B, T]);
    const dy = heap.tensor(uniform(B * T * H, 36), [B * T, H]);
    const x = heap.tensor(uniform(B * T * H, 37), [B * T, H]);
    const gamma = heap.tensor(uniform(H, 38), [H]);
    const mean = heap.tensor(uniform(B * T, 39), [B * T]);
    const rstd = heap.tensor(
      uniform(B * T, 40).map((r) => 1 + Math.abs(r)),
      [B * T],
    );
    const attnAttrs = { numHeads: Nh, dropoutRate: 0.1, dropoutSeed: 9, keepProbs: true };
    const run = (): Float32Array[] => {
      const c = batchMatMulConfig.kernelFunc({
        inputs: { a, b },
        backend: heap,
        attrs: { transposeA: false, transposeB: false },
      } as never) as tf.TensorInfo;
      const ct = batchMatMulConfig.kernelFunc({
        inputs: { a, b: a },
        backend: heap,
        attrs: { transposeA: true, transposeB: false },
      } as never) as tf.TensorInfo;
      const [context, probs] = fusedAttentionConfig.kernelFunc({
        inputs: { q, k: kk, v, keyBias: bias },
        backend: heap,
        attrs: attnAttrs,
      } as never) as tf.TensorInfo[];
      const grads = fusedAttentionGradConfig.kernelFunc({
        inputs: { q, k: kk, v, probs, dy },
        backend: heap,
        attrs: attnAttrs,
      } as never) as tf.TensorInfo[];
      const ln = layerNormGradConfig.kernelFunc({
        inputs: { x, gamma, mean, rstd, dy },
        backend: heap,
        attrs: {},
      } as never) as tf.TensorInfo[];
      return [c, ct, context, probs, ...grads, ...ln].map((t) => heap.read(t));
    };
    const single = run(); // no pool yet: job_run on this thread
    setJobSharing('always');
    await startKernelThreads(2, heap);
    const inPlace = kernelPoolFor(heap);
    expect(inPlace?.copies).toBe(false);
    const before = inPlace!.tasksTaken()[1];
    let shared: Float32Array[] = [];
    for (let round = 0; round < 3; round++) {
      shared = run();
      shared.forEach((values, i) => expectSameBits({ [i]: values }, { [i]: single[i] }, `in place, round ${round}`));
    }
    expect(inPlace!.tasksTaken()[1]).toBeGreaterThan(before);
    // and the same bits as tfjs's own wasm heap on one thread
    const viaTfjs = tf.tidy(
      () => tf.matMul(tf.tensor2d(uniform(M * K, 31), [M, K]), tf.tensor2d(uniform(K * N, 32), [K, N])).dataSync() as Float32Array,
    );
    expectSameBits({ c: shared[0] }, { c: viaTfjs }, 'in place vs tfjs heap');
    setJobSharing('auto');
    stopKernelThreads();
  });
});
