// The fused attention op (src/kernels/attention.ts): its wasm kernels (kernels.c,
// attention_forward_head / attention_backward_head) against the same op's plain-tfjs path run
// on tfjs's stock 'cpu' backend (the reference library), values and gradients, with
// padding keys, tails (T not a multiple of 4), several head counts and dropout; and
// the dropout mask's own properties (dropout-mask.ts).
//
// Tolerance: |wasm − cpu| ≤ 2e-5 + 1e-4·max|cpu| per output. Both sides add the same
// float32 products in different orders (T ≤ 40 terms of magnitude < 4 each: about
// T·2⁻²⁴·4 ≈ 1e-5 per dot product, common practice bound) and the wasm softmax uses
// its own exp (relative error ~1e-7, kernels.c exp_neg). A dropout mask that differed
// in a single element would move a context value by about P·|V|·1/(1 − rate) ≈ 1e-2.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { attention, FUSED_ATTENTION, type AttentionOptions } from '../../src/kernels/attention.js';
import { dropoutMask, keepMultipliers, lowbias32 } from '../../src/kernels/dropout-mask.js';
import { maxAbsDiff, readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

interface Case {
  B: number;
  T: number;
  N: number;
  D: number;
  /** real (unpadded) length of each row */
  lengths: number[];
  rate: number;
  seed: number;
}

function inputsOf(c: Case) {
  const H = c.N * c.D;
  const rows = c.B * c.T;
  const bias = new Float32Array(c.B * c.T);
  for (let b = 0; b < c.B; b++) for (let t = c.lengths[b]; t < c.T; t++) bias[b * c.T + t] = -10000;
  // magnitudes like a trained layer's: scores of order ±4 before the 1/√D scale
  return {
    q: uniform(rows * H, 3 + c.T).map((x) => 2 * x),
    k: uniform(rows * H, 5 + c.T).map((x) => 2 * x),
    v: uniform(rows * H, 7 + c.T),
    dy: uniform(rows * H, 9 + c.T),
    bias,
    H,
    rows,
  };
}

function opts(c: Case): AttentionOptions {
  return { numHeads: c.N, dropoutRate: c.rate, dropoutSeed: c.seed };
}

/** The context, then the gradients of Σ context ⊙ dy with respect to q, k and v, on one backend. */
function runCase(backend: 'cpu' | 'wasm', c: Case): { context: Float32Array; dq: Float32Array; dk: Float32Array; dv: Float32Array } {
  const x = inputsOf(c);
  const tensors = () => ({
    q: tf.tensor2d(x.q, [x.rows, x.H]),
    k: tf.tensor2d(x.k, [x.rows, x.H]),
    v: tf.tensor2d(x.v, [x.rows, x.H]),
    bias: tf.tensor2d(x.bias, [c.B, c.T]),
  });
  const context = runOn(backend, () => {
    const t = tensors();
    return attention(t.q, t.k, t.v, t.bias, opts(c));
  }).values as Float32Array;
  const grads: Float32Array[] = [];
  for (let which = 0; which < 3; which++) {
    grads.push(
      runOn(backend, () => {
        const t = tensors();
        const dy = tf.tensor2d(x.dy, [x.rows, x.H]);
        const f = (q: tf.Tensor, k: tf.Tensor, v: tf.Tensor) =>
          tf.sum(tf.mul(attention(q as tf.Tensor2D, k as tf.Tensor2D, v as tf.Tensor2D, t.bias, opts(c)), dy));
        return tf.grads(f)([t.q, t.k, t.v])[which];
      }).values as Float32Array,
    );
  }
  return { context, dq: grads[0], dk: grads[1], dv: grads[2] };
}

function expectClose(got: Float32Array, want: Float32Array, what: string): void {
  let scale = 0;
  for (const w of want) scale = Math.max(scale, Math.abs(w));
  const tol = 2e-5 + 1e-4 * scale;
  const d = maxAbsDiff(got, want);
  if (d.max > tol) throw new Error(`${what}: |wasm − cpu| ${d.max} > ${tol} at ${d.at}: wasm ${d.got}, cpu ${d.want}`);
}

const CASES: Case[] = [
  { B: 2, T: 8, N: 2, D: 4, lengths: [8, 5], rate: 0, seed: 1 },
  { B: 1, T: 13, N: 3, D: 8, lengths: [13], rate: 0, seed: 2 }, // T and H tails
  { B: 3, T: 7, N: 1, D: 5, lengths: [7, 1, 4], rate: 0, seed: 3 }, // one real key only
  { B: 2, T: 40, N: 2, D: 16, lengths: [40, 23], rate: 0.1, seed: 4 },
  { B: 2, T: 11, N: 4, D: 3, lengths: [9, 11], rate: 0.5, seed: 0xdeadbeef },
];

describe('fused attention kernels vs the plain-tfjs op on cpu', () => {
  it('the fused kernel is what the op reaches on wasm, and not on cpu', () => {
    expect(tf.getKernel(FUSED_ATTENTION, 'wasm')).toBeDefined();
    expect(tf.getKernel(FUSED_ATTENTION, 'cpu')).toBeUndefined();
  });

  for (const c of CASES) {
    it(`B ${c.B}, T ${c.T}, N ${c.N}, D ${c.D}, lengths ${c.lengths}, dropout ${c.rate}: context and dq, dk, dv`, () => {
      const want = runCase('cpu', c);
      const got = runCase('wasm', c);
      expectClose(got.context, want.context, 'context');
      expectClose(got.dq, want.dq, 'dq');
      expectClose(got.dk, want.dk, 'dk');
      expectClose(got.dv, want.dv, 'dv');
    });
  }

  it('padding keys get no weight: changing V at padded rows leaves the context unchanged', () => {
    const c = CASES[0];
    const x = inputsOf(c);
    const other = x.v.slice();
    for (let t = 5; t < 8; t++) for (let h = 0; h < x.H; h++) other[(8 + t) * x.H + h] += 3;
    const run = (v: Float32Array) =>
      runOn('wasm', () =>
        attention(
          tf.tensor2d(x.q, [x.rows, x.H]),
          tf.tensor2d(x.k, [x.rows, x.H]),
          tf.tensor2d(v, [x.rows, x.H]),
          tf.tensor2d(x.bias, [c.B, c.T]),
          opts(c),
        ),
      ).values;
    expect(maxAbsDiff(run(x.v), run(other)).max).toBeLessThan(1e-6);
  });

  it('inference (no gradient recorded) gives the same context as the recorded path, and nothing leaks', () => {
    const c = CASES[3];
    const x = inputsOf(c);
    const plain = runOn('wasm', () =>
      attention(
        tf.tensor2d(x.q, [x.rows, x.H]),
        tf.tensor2d(x.k, [x.rows, x.H]),
        tf.tensor2d(x.v, [x.rows, x.H]),
        tf.tensor2d(x.bias, [c.B, c.T]),
        opts(c),
      ),
    ).values;
    void tf.setBackend('wasm');
    const before = tf.memory().numTensors;
    const v = tf.tidy(() => tf.variable(tf.tensor2d(x.v, [x.rows, x.H]), true, 'attention-test-v'));
    const q = tf.tensor2d(x.q, [x.rows, x.H]);
    const k = tf.tensor2d(x.k, [x.rows, x.H]);
    const bias = tf.tensor2d(x.bias, [c.B, c.T]);
    let context: Float32Array = new Float32Array(0);
    const { value, grads } = tf.variableGrads(() => {
      const out = attention(q, k, v as unknown as tf.Tensor2D, bias, opts(c));
      context = out.dataSync() as Float32Array;
      return tf.sum(out) as tf.Scalar;
    }, [v]);
    expect(Array.from(context)).toEqual(Array.from(plain));
    expect(grads['attention-test-v'].shape).toEqual([x.rows, x.H]);
    tf.dispose([value, grads['attention-test-v'], v, q, k, bias]);
    expect(tf.memory().numTensors).toBe(before);
  });

  it('dropout follows its seed: the same seed repeats exactly, another seed differs', () => {
    const c = CASES[3];
    const a = runCase('wasm', c).context;
    const again = runCase('wasm', c).context;
    const other = runCase('wasm', { ...c, seed: c.seed + 1 }).context;
    expect(Array.from(again)).toEqual(Array.from(a));
    expect(maxAbsDiff(other, a).max).toBeGreaterThan(1e-3);
  });

  it('names the shape that does not fit', () => {
    const q = tf.zeros([6, 4]) as tf.Tensor2D;
    const bias = tf.zeros([2, 4]) as tf.Tensor2D;
    expect(() => attention(q, q, q, bias, { numHeads: 2, dropoutRate: 0, dropoutSeed: 0 })).toThrow(
      'attention: q has shape [6,4], expected [8, 4]',
    );
    const q8 = tf.zeros([8, 4]) as tf.Tensor2D;
    expect(() => attention(q8, q8, q8, bias, { numHeads: 3, dropoutRate: 0, dropoutSeed: 0 })).toThrow(
      'hidden size 4 is not a multiple of numHeads 3',
    );
    expect(() => attention(q8, q8, q8, bias, { numHeads: 2, dropoutRate: 1, dropoutSeed: 0 })).toThrow('dropout rate must be in [0, 1)');
    tf.dispose([q, bias, q8]);
  });
});

describe('the dropout mask (dropout-mask.ts)', () => {
  it('keeps 1 − rate of the elements (binomial, within 5σ) and scales them by 1/(1 − rate)', () => {
    const n = 200_000;
    for (const rate of [0.1, 0.5, 0.9]) {
      const mask = dropoutMask(12345, rate);
      const m = keepMultipliers(mask, n);
      const scale = Math.fround(1 / Math.fround(1 - rate));
      let kept = 0;
      let other = 0;
      for (const x of m) {
        if (x === scale) kept++;
        else if (x !== 0) other++;
      }
      expect(other).toBe(0);
      const sigma = Math.sqrt(n * rate * (1 - rate));
      expect(Math.abs(kept - n * (1 - rate))).toBeLessThan(5 * sigma);
    }
  });

  it('masks of neighbouring seeds and of offset windows are independent (agreement near chance)', () => {
    const n = 100_000;
    const rate = 0.5;
    const a = keepMultipliers(dropoutMask(7, rate), n);
    const b = keepMultipliers(dropoutMask(8, rate), n);
    const shifted = keepMultipliers(dropoutMask(7, rate), n, 1);
    let same = 0;
    let sameShift = 0;
    for (let i = 0; i < n; i++) {
      if ((a[i] === 0) === (b[i] === 0)) same++;
      if ((shifted[i] === 0) === (a[i] === 0)) sameShift++;
    }
    // chance agreement is n/2 with σ = √n/2
    expect(Math.abs(same - n / 2)).toBeLessThan(5 * (Math.sqrt(n) / 2));
    expect(Math.abs(sameShift - n / 2)).toBeLessThan(5 * (Math.sqrt(n) / 2));
    // and a window starting at `first` is the tail of the window starting at 0
    expect(Array.from(shifted.subarray(0, 10))).toEqual(Array.from(a.subarray(1, 11)));
  });

  it('rate 0 keeps everything; lowbias32 is a bijection on a sample (no collisions among 65536 inputs)', () => {
    expect(keepMultipliers(dropoutMask(3, 0), 1000).every((x) => x === 1)).toBe(true);
    const seen = new Set<number>();
    for (let i = 0; i < 65536; i++) seen.add(lowbias32(i * 65521));
    expect(seen.size).toBe(65536);
  });
});
