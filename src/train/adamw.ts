// defines: AdamW (the optimizer and the one owner of its moments), decaysWeight,
// AdamWState (the moments and step counts as plain data, for checkpoints).
//
// Adam with decoupled weight decay (Loshchilov & Hutter, "Decoupled Weight Decay
// Regularization", ICLR 2019), in the exact order torch.optim.AdamW (1.13,
// `_single_tensor_adamw`) applies it to each parameter p with gradient g at its step t:
//
//   1. p ← p · (1 − lr·λ)                         decay first, on the old weights
//   2. m ← β1·m + (1 − β1)·g
//   3. v ← β2·v + (1 − β2)·g²
//   4. p ← p − (lr / (1 − β1ᵗ)) · m / (√v / √(1 − β2ᵗ) + ε)
//
// The bias corrections and step size are worked out in float64 on the CPU, as torch
// does with Python floats, and only the per-element work is tensor code. As in torch,
// a parameter that got no gradient this step is skipped entirely (no decay, no step),
// and each parameter counts its own steps.

import * as tf from '@tensorflow/tfjs';
import type { OptimizerState } from '../io/checkpoint-store.js';
import { adamwUpdate } from '../kernels/adamw-update.js';

export interface AdamWOptions {
  /** β1, first-moment decay (torch default 0.9). */
  beta1: number;
  /** β2, second-moment decay (torch default 0.999). */
  beta2: number;
  /** ε added to the corrected √v (DEVELOPERS.md: 1e-6, as BERT used). */
  epsilon: number;
  /** λ, decoupled weight decay (0.01); 0 for parameters `decaysWeight` rejects. */
  weightDecay: number;
}

export const DEFAULT_ADAMW: Readonly<AdamWOptions> = Object.freeze({
  beta1: 0.9,
  beta2: 0.999,
  epsilon: 1e-6,
  weightDecay: 0.01,
});

/** Weight decay applies to every parameter except biases and LayerNorm (DEVELOPERS.md). */
export function decaysWeight(name: string): boolean {
  return !(name.endsWith('.bias') || name.includes('LayerNorm'));
}

/**
 * The optimizer's state as plain data, every part keyed by parameter name: first and
 * second moments and how many updates each parameter has had (torch's per-parameter
 * `state['step']`) — the checkpoint's optimizer part (src/io/checkpoint-store.ts).
 */
export type AdamWState = OptimizerState;

interface Slot {
  m: tf.Variable;
  v: tf.Variable;
  step: number;
  decay: boolean;
}

export class AdamW {
  readonly options: Readonly<AdamWOptions>;
  private readonly params: Map<string, tf.Variable>;
  private readonly slots = new Map<string, Slot>();
  private disposed = false;

  /** Creates both moments (zeros) for every parameter, once. */
  constructor(params: Map<string, tf.Variable>, options: Partial<AdamWOptions> = {}) {
    this.options = Object.freeze({ ...DEFAULT_ADAMW, ...options });
    this.params = params;
    for (const [name, p] of params) {
      // inside tidy so the zeros the variables copy from are freed
      const [m, v] = tf.tidy(() => [tf.variable(tf.zerosLike(p), false), tf.variable(tf.zerosLike(p), false)]);
      this.slots.set(name, { m, v, step: 0, decay: decaysWeight(name) });
    }
  }

  /**
   * One update of every parameter that has a gradient in `grads` (keyed by parameter
   * name). `gradScale` multiplies each gradient first — the global-norm clip factor.
   * The gradients stay with the caller.
   */
  apply(grads: Map<string, tf.Tensor>, lr: number, gradScale = 1): void {
    this.assertLive();
    for (const name of grads.keys()) {
      if (!this.slots.has(name)) throw new Error(`AdamW.apply: gradient for unknown parameter "${name}"`);
    }
    const { beta1, beta2, epsilon, weightDecay } = this.options;
    tf.tidy(() => {
      for (const [name, p] of this.params) {
        const raw = grads.get(name);
        if (raw === undefined) continue;
        const slot = this.slots.get(name)!;
        const t = slot.step + 1;
        // 1–4 in one op (src/kernels/adamw-update.ts: one wasm kernel, or the same tfjs ops elsewhere)
        const [updated, m, v] = adamwUpdate(p, raw, slot.m, slot.v, {
          gradScale,
          decayFactor: slot.decay && weightDecay !== 0 ? 1 - lr * weightDecay : null,
          beta1,
          beta2,
          stepSize: lr / (1 - beta1 ** t),
          correction2Sqrt: Math.sqrt(1 - beta2 ** t),
          epsilon,
        });
        slot.m.assign(m);
        slot.v.assign(v);
        p.assign(updated);
        slot.step = t;
      }
    });
  }

  /** Updates taken by the parameter `name` (0 before its first). */
  stepOf(name: string): number {
    const slot = this.slots.get(name);
    if (slot === undefined) throw new Error(`AdamW.stepOf: unknown parameter "${name}"`);
    return slot.step;
  }

  /** A copy of the moments and step counts, in the shape of each parameter's variable. */
  exportState(): AdamWState {
    this.assertLive();
    const state: AdamWState = { m: new Map(), v: new Map(), step: {} };
    for (const [name, slot] of this.slots) {
      state.step[name] = slot.step;
      state.m.set(name, { shape: [...slot.m.shape], data: Float32Array.from(slot.m.dataSync()) });
      state.v.set(name, { shape: [...slot.v.shape], data: Float32Array.from(slot.v.dataSync()) });
    }
    return state;
  }

  /**
   * Replaces the moments and step counts with `state` (from `exportState`, perhaps
   * through a checkpoint). Every parameter must be present with its own shape; on any
   * mismatch it throws naming the tensor and changes nothing.
   */
  importState(state: AdamWState): void {
    this.assertLive();
    for (const [name, slot] of this.slots) {
      const step = state.step[name];
      if (typeof step !== 'number' || !Number.isInteger(step) || step < 0) {
        throw new Error(`AdamW.importState: step["${name}"] must be a whole number ≥ 0, got ${String(step)}`);
      }
      for (const part of ['m', 'v'] as const) {
        const key = `${part}["${name}"]`;
        const tensor = state[part].get(name);
        if (tensor === undefined) throw new Error(`AdamW.importState: ${key} is missing`);
        const want = slot.m.shape;
        if (tensor.shape.length !== want.length || tensor.shape.some((d, i) => d !== want[i])) {
          throw new Error(`AdamW.importState: ${key} has shape [${tensor.shape}], expected [${want}]`);
        }
        if (tensor.data.length !== slot.m.size) {
          throw new Error(`AdamW.importState: ${key} holds ${tensor.data.length} values, expected ${slot.m.size}`);
        }
      }
    }
    for (const [name, slot] of this.slots) {
      const m = state.m.get(name)!;
      const v = state.v.get(name)!;
      tf.tidy(() => {
        slot.m.assign(tf.tensor(m.data, slot.m.shape, 'float32'));
        slot.v.assign(tf.tensor(v.data, slot.v.shape, 'float32'));
      });
      slot.step = state.step[name]!;
    }
  }

  /** Frees the moments. The parameters belong to their owner and are left alone. */
  dispose(): void {
    if (this.disposed) return;
    for (const slot of this.slots.values()) {
      slot.m.dispose();
      slot.v.dispose();
    }
    this.slots.clear();
    this.disposed = true;
  }

  private assertLive(): void {
    if (this.disposed) throw new Error('AdamW: used after dispose()');
  }
}
