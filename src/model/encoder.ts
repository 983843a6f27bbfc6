// defines: the reader's forward pass — embeddings, self-attention, feed-forward, the
// encoder layer, the encoder, the span head (spanLogits) and the MLM head (mlmLogits).
//
// Post-LayerNorm BERT (Devlin et al. 2019; DEVELOPERS.md "Architecture"):
//   x = LN(word[ids] + pos[0..T) + type[tt]), dropout
//   per layer:  a = LN(x + dropout(Wo·MHA(x)))
//               x = LN(a + dropout(W2·act(W1·a)))
//   span head:  [start, end] = x·Wqaᵀ + bqa
//
// Shapes: B batch, T tokens, H hidden, N heads, D head size (H / N), I feed-forward
// width, V vocabulary. Token-wise work runs on [B·T, H] matrices so every Linear layer
// is one 2-D product x·Wᵀ with W kept [out, in] as PyTorch's Linear stores it (see
// params.ts); attention takes Q, K, V in that layout too and splits the heads itself.
//
// Tensor discipline: these functions create intermediates freely and return new
// tensors; the caller wraps them in tf.tidy (or tf.variableGrads) and owns the result.

import * as tf from '@tensorflow/tfjs';
import { attention } from '../kernels/attention.js';
import { dropout as seededDropout } from '../kernels/dropout.js';
import { biasGelu } from '../kernels/gelu.js';
import { layerNorm as fusedLayerNorm } from '../kernels/layer-norm.js';
import type { ReaderConfig } from './config.js';
import type { ReaderParams } from './params.js';
import { seedFor } from './random.js';

/** One batch of features; every tensor int32 [B, T]. */
export interface ReaderInputs {
  inputIds: tf.Tensor2D;
  tokenTypeIds: tf.Tensor2D;
  /** 1 = a real token, 0 = padding */
  attentionMask: tf.Tensor2D;
}

export interface ForwardOptions {
  /** dropout on when true */
  training: boolean;
  /** fixes every dropout mask of one step; each dropout site derives its own seed from it */
  dropoutSeed?: number;
}

/** Added to attention scores of padding keys: BERT's (1 − mask)·(−10000). */
const MASKED_SCORE = -10000;

/** Everything one forward call needs besides the tensors. */
interface Pass {
  params: ReaderParams;
  config: ReaderConfig;
  opts: ForwardOptions;
}

// ---- small parts -------------------------------------------------------------------

/**
 * x·Wᵀ with W kept [out, in]: torch.nn.functional.linear's product. The fast GEMM takes
 * the transpose as swapped strides (src/kernels/matmul.ts); its gradients are dy·W and
 * dyᵀ·x, so a training step has one transposed right operand per Linear in either layout.
 */
function product(pass: Pass, name: string, x: tf.Tensor2D): tf.Tensor2D {
  return tf.matMul(x, pass.params.get(`${name}.weight`), false, true);
}

/** x·Wᵀ + b. */
function linear(pass: Pass, name: string, x: tf.Tensor2D): tf.Tensor2D {
  return tf.add(product(pass, name, x), pass.params.get(`${name}.bias`));
}

/** LayerNorm over the last axis (Ba et al. 2016), biased variance as PyTorch; one fused op (src/kernels/layer-norm.ts). */
function layerNorm(pass: Pass, name: string, x: tf.Tensor2D): tf.Tensor2D {
  return fusedLayerNorm(
    x,
    pass.params.get(`${name}.weight`) as tf.Tensor1D,
    pass.params.get(`${name}.bias`) as tf.Tensor1D,
    pass.config.layerNormEps,
  );
}

/**
 * act(x·W + b): exact GELU 0.5·u·(1 + erf(u/√2)) as one fused bias+GELU op
 * (src/kernels/gelu.ts), or its sigmoid form u·σ(1.702u) (Hendrycks & Gimpel 2016).
 */
function linearActivation(pass: Pass, name: string, x: tf.Tensor2D): tf.Tensor2D {
  if (pass.config.activation === 'gelu_sigmoid') {
    const u = linear(pass, name, x);
    return tf.mul(u, tf.sigmoid(tf.mul(u, 1.702)));
  }
  return biasGelu(product(pass, name, x), pass.params.get(`${name}.bias`) as tf.Tensor1D);
}

/**
 * Inverted dropout (scaled by 1/(1 − rate) while training), off at inference. `site`
 * names the place in the network so each site gets its own mask from one step seed;
 * the mask is a pure function of that seed (src/kernels/dropout-mask.ts).
 */
function dropout<R extends tf.Rank>(pass: Pass, x: tf.Tensor<R>, rate: number, site: string): tf.Tensor<R> {
  if (!pass.opts.training || rate === 0) return x;
  return seededDropout(x, rate, seedFor(pass.opts.dropoutSeed ?? 0, site));
}

// ---- the parts of the diagram -------------------------------------------------------

/** x = dropout(LN(word[ids] + pos[0..T) + type[tt])). */
function embeddings(pass: Pass, inputs: ReaderInputs): tf.Tensor2D {
  const [B, T] = inputs.inputIds.shape;
  const { hiddenSize: H, maxPositions } = pass.config;
  if (T > maxPositions) throw new Error(`reader: ${T} tokens per sequence exceed maxPositions (${maxPositions})`);
  const word = tf.gather(pass.params.get('bert.embeddings.word_embeddings.weight'), tf.reshape(inputs.inputIds, [B * T])); // [B·T, H]
  const type = tf.gather(pass.params.get('bert.embeddings.token_type_embeddings.weight'), tf.reshape(inputs.tokenTypeIds, [B * T])); // [B·T, H]
  const position = tf.slice(pass.params.get('bert.embeddings.position_embeddings.weight'), [0, 0], [T, H]); // [T, H]
  const summed = tf.add(tf.reshape(tf.add(word, type), [B, T, H]), position); // [B, T, H]
  const x = layerNorm(pass, 'bert.embeddings.LayerNorm', tf.reshape(summed, [B * T, H])); // [B·T, H]
  return dropout(pass, x, pass.config.hiddenDropout, 'embeddings');
}

/**
 * Multi-head self-attention, before the output projection:
 * softmax(QKᵀ/√D + (1 − mask)·(−10000)) · V per head, heads concatenated. [B·T, H]
 * One fused op (src/kernels/attention.ts): on wasm its kernels take the heads by
 * strides and keep only the softmax for the backward; elsewhere it composes tfjs ops.
 * Its dropout mask is a pure function of the site's seed (src/kernels/dropout-mask.ts).
 */
function selfAttention(pass: Pass, layer: string, x: tf.Tensor2D, keyBias: tf.Tensor2D): tf.Tensor2D {
  const q = linear(pass, `${layer}.attention.self.query`, x); // [B·T, H]
  const k = linear(pass, `${layer}.attention.self.key`, x); // [B·T, H]
  const v = linear(pass, `${layer}.attention.self.value`, x); // [B·T, H]
  const rate = pass.opts.training ? pass.config.attentionDropout : 0;
  const dropoutSeed = seedFor(pass.opts.dropoutSeed ?? 0, `${layer}.attention.probs`);
  return attention(q, k, v, keyBias, { numHeads: pass.config.numHeads, dropoutRate: rate, dropoutSeed }); // [B·T, H]
}

/** W2·act(W1·a). [B·T, H] */
function feedForward(pass: Pass, layer: string, a: tf.Tensor2D): tf.Tensor2D {
  const inner = linearActivation(pass, `${layer}.intermediate.dense`, a); // [B·T, I]
  return linear(pass, `${layer}.output.dense`, inner); // [B·T, H]
}

/** One post-LN encoder layer: two residual lines. */
function encoderLayer(pass: Pass, i: number, x: tf.Tensor2D, keyBias: tf.Tensor2D): tf.Tensor2D {
  const layer = `bert.encoder.layer.${i}`;
  const rate = pass.config.hiddenDropout;
  const attended = linear(pass, `${layer}.attention.output.dense`, selfAttention(pass, layer, x, keyBias));
  const a = layerNorm(pass, `${layer}.attention.output.LayerNorm`, tf.add(x, dropout(pass, attended, rate, `${layer}.attention.output`)));
  const fed = feedForward(pass, layer, a);
  return layerNorm(pass, `${layer}.output.LayerNorm`, tf.add(a, dropout(pass, fed, rate, `${layer}.output`)));
}

/** The encoder's last hidden states as a [B·T, H] matrix. */
function encode(pass: Pass, inputs: ReaderInputs): tf.Tensor2D {
  checkInputs(inputs, pass.config);
  // [B, T]: 0 for real keys, −10000 for padding keys; attention broadcasts it over heads and queries
  const keyBias = tf.mul(tf.sub(1, tf.cast(inputs.attentionMask, 'float32')), MASKED_SCORE) as tf.Tensor2D;
  let x = embeddings(pass, inputs); // [B·T, H]
  for (let i = 0; i < pass.config.numLayers; i++) x = encoderLayer(pass, i, x, keyBias); // [B·T, H]
  return x;
}

// ---- heads -------------------------------------------------------------------------

/** The encoder's last hidden states. [B, T, H] */
export function hiddenStates(params: ReaderParams, config: ReaderConfig, inputs: ReaderInputs, opts: ForwardOptions): tf.Tensor3D {
  const [B, T] = inputs.inputIds.shape;
  return tf.reshape(encode({ params, config, opts }, inputs), [B, T, config.hiddenSize]) as tf.Tensor3D;
}

/** Start and end logits over every position; start is channel 0 of qa_outputs. [B, T] each */
export function spanLogits(
  params: ReaderParams,
  config: ReaderConfig,
  inputs: ReaderInputs,
  opts: ForwardOptions,
): { start: tf.Tensor2D; end: tf.Tensor2D } {
  const pass: Pass = { params, config, opts };
  const [B, T] = inputs.inputIds.shape;
  const logits = linear(pass, 'qa_outputs', encode(pass, inputs)); // [B·T, 2]
  const [start, end] = tf.split(logits, 2, 1); // [B·T, 1] each
  return { start: tf.reshape(start, [B, T]), end: tf.reshape(end, [B, T]) };
}

/**
 * Masked-language-model logits: transform (dense, activation, LayerNorm), then the
 * decoder tied to the word embeddings, plus `cls.predictions.bias`. [B, T, V]
 */
export function mlmLogits(params: ReaderParams, config: ReaderConfig, inputs: ReaderInputs, opts: ForwardOptions): tf.Tensor3D {
  const pass: Pass = { params, config, opts };
  const [B, T] = inputs.inputIds.shape;
  const h = linearActivation(pass, 'cls.predictions.transform.dense', encode(pass, inputs)); // [B·T, H]
  const transformed = layerNorm(pass, 'cls.predictions.transform.LayerNorm', h); // [B·T, H]
  // an explicit transpose then a plain product: chosen when stock wasm ran transposeB in a
  // scalar loop; the fast GEMM could take x·Eᵀ directly (not re-measured for this product)
  const decoder = tf.transpose(params.get('bert.embeddings.word_embeddings.weight')); // [H, V]
  const logits = tf.add(tf.matMul(transformed, decoder), params.get('cls.predictions.bias')); // [B·T, V]
  return tf.reshape(logits, [B, T, config.vocabSize]) as tf.Tensor3D;
}

/**
 * The same head at chosen positions only: `positions` are flat b·T + t indices (M of
 * them). Scoring only the masked positions is how BERT's pretraining code does it
 * (`gather_indexes` in its reference implementation, from memory): with V ≈ 12 000 and
 * H = 128 the decoder costs 2·H·V ≈ 3 MFLOP per scored token, about three times the whole
 * two-layer encoder, so decoding only the ~15% masked positions was measured 4.8× faster
 * for L2-H128 pretraining (tiny-models/base/MODEL_CARD.md, "Why this size"). [M, V]
 */
export function mlmLogitsAt(
  params: ReaderParams,
  config: ReaderConfig,
  inputs: ReaderInputs,
  positions: tf.Tensor1D,
  opts: ForwardOptions,
): tf.Tensor2D {
  const pass: Pass = { params, config, opts };
  const picked = tf.gather(encode(pass, inputs), positions); // [M, H]
  const h = linearActivation(pass, 'cls.predictions.transform.dense', picked); // [M, H]
  const transformed = layerNorm(pass, 'cls.predictions.transform.LayerNorm', h); // [M, H]
  const decoder = tf.transpose(params.get('bert.embeddings.word_embeddings.weight')); // [H, V]
  return tf.add(tf.matMul(transformed, decoder), params.get('cls.predictions.bias')) as tf.Tensor2D; // [M, V]
}

/** Shapes and dtypes of one batch, with a message naming the field. */
function checkInputs(inputs: ReaderInputs, config: ReaderConfig): void {
  const [B, T] = inputs.inputIds.shape;
  for (const field of ['inputIds', 'tokenTypeIds', 'attentionMask'] as const) {
    const t = inputs[field];
    if (t.rank !== 2 || t.shape[0] !== B || t.shape[1] !== T)
      throw new Error(`reader inputs: ${field} has shape [${t.shape.join(', ')}], expected [${B}, ${T}]`);
    if (t.dtype !== 'int32') throw new Error(`reader inputs: ${field} must be int32, got ${t.dtype}`);
  }
  if (B === 0 || T === 0) throw new Error(`reader inputs: empty batch [${B}, ${T}]`);
  if (config.hiddenSize % config.numHeads !== 0)
    throw new Error(`reader config: hiddenSize ${config.hiddenSize} is not a multiple of numHeads ${config.numHeads}`);
}
