// defines: attention (the fused multi-head attention op), fusedAttentionConfig and
// fusedAttentionGradConfig (its forward and backward kernels for 'wasm')
//
//   context = concat_heads( dropout( softmax( Q Kᵀ/√D + keyBias ) ) · V )
//
// Shapes: B batch, T tokens, N heads, D head size, H = N·D. q, k, v and the result
// are the Linear layers' [B·T, H] matrices; keyBias is [B, T] (0 for a real key,
// −10000 for padding, broadcast over heads and queries).
//
// Why fused: as separate tfjs ops, every layer kept the [B·N, T, T] scores, their
// scaled and masked copies, the softmax, the dropout noise and mask, and the dropped
// probabilities for the backward — most of the 1–3.3 GB wasm heap peak measured for
// the L2/L4 bench configs — plus four head transposes each way. The fused kernels
// (kernels.c, attention_forward_head / attention_backward_head) take the heads by strides,
// keep only P (the softmax, before dropout) for the backward, and recompute the
// dropout mask from its seed there (dropout-mask.ts).
//
// Each head is one task of the kernels' job (jobs.ts), so heads run on several threads
// when there are (every head writes its own columns of the outputs).
//
// The op picks its path by backend: with the fused kernel registered for the active
// backend (registerFastKernels on 'wasm') it runs the kernels under one
// tf.customGrad; otherwise it composes plain tfjs ops — the same function with the
// same dropout mask, and the reference tests/kernels/attention.test.ts compares the
// kernels against on tfjs's cpu backend.

import * as tf from '@tensorflow/tfjs';
import { dropoutMask, keepMultipliers } from './dropout-mask.js';
import { hasKernel, recordingGradients, runKernel } from './fused-op.js';
import { jobRunner, RATE } from './jobs.js';
import { f32, JOB } from './pool-layout.js';
import type { WasmBackendLike } from './wasm-module.js';

export const FUSED_ATTENTION = 'SpanwrightFusedAttention';
export const FUSED_ATTENTION_GRAD = 'SpanwrightFusedAttentionGrad';

export interface AttentionOptions {
  numHeads: number;
  /** dropout on the attention probabilities, in [0, 1); 0 at inference */
  dropoutRate: number;
  /** seeds this site's dropout mask (uint32) */
  dropoutSeed: number;
}

interface AttentionAttrs {
  numHeads: number;
  dropoutRate: number;
  dropoutSeed: number;
  /** also output P (the backward needs it) */
  keepProbs: boolean;
}

/** Multi-head attention on [B·T, H] projections; returns the heads' context [B·T, H]. */
export function attention(q: tf.Tensor2D, k: tf.Tensor2D, v: tf.Tensor2D, keyBias: tf.Tensor2D, opts: AttentionOptions): tf.Tensor2D {
  const [B, T] = keyBias.shape;
  const H = q.shape[1];
  for (const [name, t] of [
    ['q', q],
    ['k', k],
    ['v', v],
  ] as const) {
    if (t.rank !== 2 || t.shape[0] !== B * T || t.shape[1] !== H) {
      throw new Error(`attention: ${name} has shape [${t.shape}], expected [${B * T}, ${H}] (B·T from keyBias [${B}, ${T}])`);
    }
  }
  if (!Number.isInteger(opts.numHeads) || opts.numHeads <= 0 || H % opts.numHeads !== 0) {
    throw new Error(`attention: hidden size ${H} is not a multiple of numHeads ${opts.numHeads}`);
  }
  dropoutMask(opts.dropoutSeed, opts.dropoutRate); // validates the rate
  if (!hasKernel(FUSED_ATTENTION)) return composedAttention(q, k, v, keyBias, opts);
  const attrs = { numHeads: opts.numHeads, dropoutRate: opts.dropoutRate, dropoutSeed: opts.dropoutSeed };
  if (!recordingGradients()) {
    // no gradient will be asked for: P is not kept at all
    return runKernel(FUSED_ATTENTION, { q, k, v, keyBias }, { ...attrs, keepProbs: false })[0] as tf.Tensor2D;
  }
  const fused = tf.customGrad((...args: unknown[]) => {
    const [qi, ki, vi, bi] = args as tf.Tensor2D[];
    const save = args[4] as tf.GradSaveFunc;
    const [context, probs] = runKernel(FUSED_ATTENTION, { q: qi, k: ki, v: vi, keyBias: bi }, { ...attrs, keepProbs: true });
    save([qi, ki, vi, probs]);
    return {
      value: context,
      // inverts the whole forward line above (kernels.c, attention_backward_head, steps 1–5)
      gradFunc: (dy: tf.Tensor | tf.Tensor[], saved: tf.Tensor[]) => {
        const [sq, sk, sv, sp] = saved;
        const [dq, dk, dv] = runKernel(FUSED_ATTENTION_GRAD, { q: sq, k: sk, v: sv, probs: sp, dy: dy as tf.Tensor }, attrs);
        return [dq, dk, dv, tf.zerosLike(bi)]; // keyBias comes from the attention mask: no gradient
      },
    };
  });
  return fused(q, k, v, keyBias) as tf.Tensor2D;
}

/** The same function in plain tfjs ops: the fallback off wasm and the tests' reference. */
function composedAttention(q: tf.Tensor2D, k: tf.Tensor2D, v: tf.Tensor2D, keyBias: tf.Tensor2D, opts: AttentionOptions): tf.Tensor2D {
  return tf.tidy(() => {
    const [B, T] = keyBias.shape;
    const H = q.shape[1];
    const N = opts.numHeads;
    const D = H / N;
    const heads = (t: tf.Tensor2D, perm: number[], shape: [number, number, number]): tf.Tensor3D =>
      tf.reshape(tf.transpose(tf.reshape(t, [B, T, N, D]), perm), shape);
    const qh = heads(q, [0, 2, 1, 3], [B * N, T, D]); // [B·N, T, D]
    const kT = heads(k, [0, 2, 3, 1], [B * N, D, T]); // [B·N, D, T]
    const vh = heads(v, [0, 2, 1, 3], [B * N, T, D]); // [B·N, T, D]
    const scores = tf.mul(tf.matMul(qh, kT), 1 / Math.sqrt(D)); // [B·N, T, T]
    const masked = tf.add(tf.reshape(scores, [B, N, T, T]), tf.reshape(keyBias, [B, 1, 1, T])); // [B, N, T, T]
    let probs: tf.Tensor = tf.softmax(masked, -1); // [B, N, T, T]
    if (opts.dropoutRate > 0) {
      const keep = keepMultipliers(dropoutMask(opts.dropoutSeed, opts.dropoutRate), B * N * T * T);
      probs = tf.mul(probs, tf.tensor4d(keep, [B, N, T, T])); // [B, N, T, T]
    }
    const context = tf.matMul(tf.reshape(probs, [B * N, T, T]) as tf.Tensor3D, vh); // [B·N, T, D]
    return tf.reshape(tf.transpose(tf.reshape(context, [B, N, T, D]), [0, 2, 1, 3]), [B * T, H]) as tf.Tensor2D; // [B·T, H]
  });
}

// ---- the kernels -------------------------------------------------------------------

interface ForwardArgs {
  inputs: { q: tf.TensorInfo; k: tf.TensorInfo; v: tf.TensorInfo; keyBias: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: AttentionAttrs;
}

interface BackwardArgs {
  inputs: { q: tf.TensorInfo; k: tf.TensorInfo; v: tf.TensorInfo; probs: tf.TensorInfo; dy: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: AttentionAttrs;
}

function sizes(keyBias: tf.TensorInfo, q: tf.TensorInfo, numHeads: number) {
  const [B, T] = keyBias.shape;
  const H = q.shape[1];
  return { B, T, N: numHeads, D: H / numHeads, H };
}

/**
 * Estimated one-thread time: the four T×T·D products of a head at GEMM speed, plus
 * ~10 ns per score for the softmax and the dropout mask (measured: 46 ms forward, 72 ms
 * backward for the 32 heads of L2-H128-T256-B16 here).
 */
function attentionNs(B: number, N: number, T: number, D: number, backward: boolean): number {
  const heads = B * N;
  const products = backward ? 4 : 2;
  return heads * ((products * 2 * T * T * D) / RATE.gemmFlops + (backward ? 12 : 8) * T * T);
}

function fusedAttentionForward({ inputs, backend, attrs }: ForwardArgs): tf.TensorInfo[] {
  const { q, k, v, keyBias } = inputs;
  for (const t of [q, k, v, keyBias]) {
    if (t.dtype !== 'float32') throw new Error(`${FUSED_ATTENTION} (src/kernels/attention.ts): float32 only, got ${t.dtype}`);
  }
  const { B, T, N, D, H } = sizes(keyBias, q, attrs.numHeads);
  const context = backend.makeOutput([B * T, H], 'float32');
  const probs = attrs.keepProbs ? backend.makeOutput([B * N, T, T], 'float32') : null;
  const outputs = probs ? [context, probs] : [context];
  if (B * T * H === 0) return outputs;
  const mask = dropoutMask(attrs.dropoutSeed, attrs.dropoutRate);
  const run = jobRunner(backend, {
    ns: attentionNs(B, N, T, D, false),
    inputs: [q, k, v, keyBias],
    outputs: [context, probs],
    scratch: 2 * T * T * 4, // each thread's two T×T planes (the scores when P is not kept, the dropped P)
  });
  try {
    const args = [run.input(q), run.input(k), run.input(v), run.input(keyBias), run.output(context), probs ? run.output(probs) : 0];
    const scratch = run.scratch();
    run.run(JOB.attentionForward, B * N, [
      ...args,
      ...[scratch.addr, scratch.strideFloats, T, N, D, f32(1 / Math.sqrt(D))],
      ...[attrs.dropoutRate > 0 ? 1 : 0, mask.mix | 0, mask.threshold | 0, f32(mask.scale)],
    ]);
  } finally {
    run.finish();
  }
  return outputs;
}

function fusedAttentionBackward({ inputs, backend, attrs }: BackwardArgs): tf.TensorInfo[] {
  const { q, k, v, probs, dy } = inputs;
  const [BN, T] = probs.shape;
  const N = attrs.numHeads;
  const B = BN / N;
  const H = q.shape[1];
  const D = H / N;
  const dq = backend.makeOutput([B * T, H], 'float32');
  const dk = backend.makeOutput([B * T, H], 'float32');
  const dv = backend.makeOutput([B * T, H], 'float32');
  if (B * T * H === 0) return [dq, dk, dv];
  const mask = dropoutMask(attrs.dropoutSeed, attrs.dropoutRate);
  const run = jobRunner(backend, {
    ns: attentionNs(B, N, T, D, true),
    inputs: [q, k, v, probs, dy],
    outputs: [dq, dk, dv],
    scratch: 2 * T * T * 4, // each thread's dPd (then dS) and Pd
  });
  try {
    const args = [
      run.input(q),
      run.input(k),
      run.input(v),
      run.input(probs),
      run.input(dy),
      run.output(dq),
      run.output(dk),
      run.output(dv),
    ];
    const scratch = run.scratch();
    run.run(JOB.attentionBackward, B * N, [
      ...args,
      ...[scratch.addr, scratch.strideFloats, T, N, D, f32(1 / Math.sqrt(D))],
      ...[attrs.dropoutRate > 0 ? 1 : 0, mask.mix | 0, mask.threshold | 0, f32(mask.scale)],
    ]);
  } finally {
    run.finish();
  }
  return [dq, dk, dv];
}

export const fusedAttentionConfig: tf.KernelConfig = {
  kernelName: FUSED_ATTENTION,
  backendName: 'wasm',
  kernelFunc: fusedAttentionForward as unknown as tf.KernelFunc,
};

export const fusedAttentionGradConfig: tf.KernelConfig = {
  kernelName: FUSED_ATTENTION_GRAD,
  backendName: 'wasm',
  kernelFunc: fusedAttentionBackward as unknown as tf.KernelFunc,
};
