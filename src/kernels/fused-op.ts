// defines: hasKernel, recordingGradients — what a fused op (attention.ts, gelu.ts,
// layer-norm.ts) asks before choosing its path.
//
// A fused op runs its own kernels when they are registered for the active backend
// (registerFastKernels on 'wasm') and composes plain tfjs ops otherwise. With its
// kernels, it keeps what its backward needs only while tfjs is recording a gradient
// tape — the same test tfjs's engine applies before saving tensors (Engine.isTapeOn:
// inside a gradient computation and not inside another kernel).

import * as tf from '@tensorflow/tfjs';

/** True when `kernelName` has a kernel on the active backend. */
export function hasKernel(kernelName: string): boolean {
  return tf.getKernel(kernelName, tf.getBackend()) !== undefined;
}

/** True while tfjs records operations for a gradient (tf.grad, tf.variableGrads, …). */
export function recordingGradients(): boolean {
  const state = tf.engine().state;
  return state.gradientDepth > 0 && state.kernelDepth === 0;
}

/** runKernel, always as an array of tensors. */
export function runKernel(name: string, inputs: Record<string, tf.Tensor>, attrs: object): tf.Tensor[] {
  const out = tf.engine().runKernel(name, inputs as unknown as tf.NamedTensorMap, attrs as unknown as tf.NamedAttrMap);
  return Array.isArray(out) ? out : [out as tf.Tensor];
}
