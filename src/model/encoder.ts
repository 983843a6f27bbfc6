// defines: the reader's forward pass — embeddings, self-attention, feed-forward, the
// encoder layer, the encoder, the span head (spanLogits) and the MLM head (mlmLogits).
//
// Post-LayerNorm BERT (Devlin et al. 2019; DEVELOPERS.md "Architecture"):
//   x = LN(word[ids] + pos[0..T) + type[tt]), dropout
//   per layer:  a = LN(x + dropout(Wo·MHA(x)))
//               x = LN(a + dropout(W2·act(W1·a)))
//   span head:  [start, end] = x·Wqa + bqa
//
// Shapes: B batch, T tokens, H hidden, N heads, D head size (H / N), I feed-forward
// width, V vocabulary. Token-wise work runs on [B·T, H] matrices so every Linear layer
// is one untransposed 2-D product (weights are kept [in, out], see params.ts); only the
// attention products are batched, [B·N, T, D] × [B·N, D, T].
//
// Tensor discipline: these functions create intermediates freely and return new
// tensors; the caller wraps them in tf.tidy (or tf.variableGrads) and owns the result.

import * as tf from '@tensorflow/tfjs';
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

/** x·W + b with W kept [in, out]: an untransposed 2-D product. */
function linear(pass: Pass, name: string, x: tf.Tensor2D): tf.Tensor2D {
  return tf.add(tf.matMul(x, pass.params.get(`${name}.weight`)), pass.params.get(`${name}.bias`));
}

/** LayerNorm over the last axis (Ba et al. 2016), biased variance as PyTorch. */
function layerNorm(pass: Pass, name: string, x: tf.Tensor2D): tf.Tensor2D {
  const mean = tf.mean(x, -1, true); // [B·T, 1]
  const centred = tf.sub(x, mean); // [B·T, H]
  const variance = tf.mean(tf.square(centred), -1, true); // [B·T, 1]
  const normed = tf.mul(centred, tf.rsqrt(tf.add(variance, pass.config.layerNormEps))); // [B·T, H]
  return tf.add(tf.mul(normed, pass.params.get(`${name}.weight`)), pass.params.get(`${name}.bias`));
}

/** Exact GELU 0.5·x·(1 + erf(x/√2)), or its sigmoid form x·σ(1.702x) (Hendrycks & Gimpel 2016). */
function activation<R extends tf.Rank>(pass: Pass, x: tf.Tensor<R>): tf.Tensor<R> {
  if (pass.config.activation === 'gelu_sigmoid') return tf.mul(x, tf.sigmoid(tf.mul(x, 1.702)));
  return tf.mul(tf.mul(x, 0.5), tf.add(1, tf.erf(tf.mul(x, Math.SQRT1_2))));
}

/**
 * Inverted dropout (scaled by 1/(1 − rate) while training), off at inference. `site`
 * names the place in the network so each site gets its own mask from one step seed.
 */
function dropout<R extends tf.Rank>(pass: Pass, x: tf.Tensor<R>, rate: number, site: string): tf.Tensor<R> {
  if (!pass.opts.training || rate === 0) return x;
  const seed = seedFor(pass.opts.dropoutSeed ?? 0, site);
  return tf.dropout(x, rate, undefined, seed) as tf.Tensor<R>;
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
 */
function selfAttention(pass: Pass, layer: string, x: tf.Tensor2D, maskBias: tf.Tensor4D, B: number, T: number): tf.Tensor2D {
  const { hiddenSize: H, numHeads: N } = pass.config;
  const D = H / N;
  const heads = (t: tf.Tensor2D, perm: number[], shape: [number, number, number]): tf.Tensor3D =>
    tf.reshape(tf.transpose(tf.reshape(t, [B, T, N, D]), perm), shape);
  const q = heads(linear(pass, `${layer}.attention.self.query`, x), [0, 2, 1, 3], [B * N, T, D]); // [B·N, T, D]
  const kT = heads(linear(pass, `${layer}.attention.self.key`, x), [0, 2, 3, 1], [B * N, D, T]); // [B·N, D, T]
  const v = heads(linear(pass, `${layer}.attention.self.value`, x), [0, 2, 1, 3], [B * N, T, D]); // [B·N, T, D]
  const scores = tf.mul(tf.matMul(q, kT), 1 / Math.sqrt(D)); // [B·N, T, T]
  const masked = tf.add(tf.reshape(scores, [B, N, T, T]), maskBias); // [B, N, T, T]
  const probs = dropout(pass, tf.softmax(masked, -1), pass.config.attentionDropout, `${layer}.attention.probs`); // [B, N, T, T]
  const context = tf.matMul(tf.reshape(probs, [B * N, T, T]) as tf.Tensor3D, v); // [B·N, T, D]
  return tf.reshape(tf.transpose(tf.reshape(context, [B, N, T, D]), [0, 2, 1, 3]), [B * T, H]) as tf.Tensor2D; // [B·T, H]
}

/** W2·act(W1·a). [B·T, H] */
function feedForward(pass: Pass, layer: string, a: tf.Tensor2D): tf.Tensor2D {
  const inner = activation(pass, linear(pass, `${layer}.intermediate.dense`, a)); // [B·T, I]
  return linear(pass, `${layer}.output.dense`, inner); // [B·T, H]
}

/** One post-LN encoder layer: two residual lines. */
function encoderLayer(pass: Pass, i: number, x: tf.Tensor2D, maskBias: tf.Tensor4D, B: number, T: number): tf.Tensor2D {
  const layer = `bert.encoder.layer.${i}`;
  const rate = pass.config.hiddenDropout;
  const attended = linear(pass, `${layer}.attention.output.dense`, selfAttention(pass, layer, x, maskBias, B, T));
  const a = layerNorm(pass, `${layer}.attention.output.LayerNorm`, tf.add(x, dropout(pass, attended, rate, `${layer}.attention.output`)));
  const fed = feedForward(pass, layer, a);
  return layerNorm(pass, `${layer}.output.LayerNorm`, tf.add(a, dropout(pass, fed, rate, `${layer}.output`)));
}

/** The encoder's last hidden states as a [B·T, H] matrix. */
function encode(pass: Pass, inputs: ReaderInputs): tf.Tensor2D {
  const [B, T] = inputs.inputIds.shape;
  checkInputs(inputs, pass.config);
  // [B, 1, 1, T]: 0 for real keys, −10000 for padding keys, broadcast over heads and queries
  const maskBias = tf.reshape(tf.mul(tf.sub(1, tf.cast(inputs.attentionMask, 'float32')), MASKED_SCORE), [B, 1, 1, T]) as tf.Tensor4D;
  let x = embeddings(pass, inputs); // [B·T, H]
  for (let i = 0; i < pass.config.numLayers; i++) x = encoderLayer(pass, i, x, maskBias, B, T); // [B·T, H]
  return x;
}

// ---- heads -------------------------------------------------------------------------

/** The encoder's last hidden states. [B, T, H] */
export function hiddenStates(params: ReaderParams, config: ReaderConfig, inputs: ReaderInputs, opts: ForwardOptions): tf.Tensor3D {
  const [B, T] = inputs.inputIds.shape;
  return tf.reshape(encode({ params, config, opts }, inputs), [B, T, config.hiddenSize]) as tf.Tensor3D;
}

/** Start and end logits over every position; start is channel 0 of qa_outputs. [B, T] each */
export function spanLogits(params: ReaderParams, config: ReaderConfig, inputs: ReaderInputs, opts: ForwardOptions): { start: tf.Tensor2D; end: tf.Tensor2D } {
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
  const h = activation(pass, linear(pass, 'cls.predictions.transform.dense', encode(pass, inputs))); // [B·T, H]
  const transformed = layerNorm(pass, 'cls.predictions.transform.LayerNorm', h); // [B·T, H]
  // an explicit transpose then a plain product: stock wasm's transposeB matMul is the slow path
  const decoder = tf.transpose(params.get('bert.embeddings.word_embeddings.weight')); // [H, V]
  const logits = tf.add(tf.matMul(transformed, decoder), params.get('cls.predictions.bias')); // [B·T, V]
  return tf.reshape(logits, [B, T, config.vocabSize]) as tf.Tensor3D;
}

/** Shapes and dtypes of one batch, with a message naming the field. */
function checkInputs(inputs: ReaderInputs, config: ReaderConfig): void {
  const [B, T] = inputs.inputIds.shape;
  for (const field of ['inputIds', 'tokenTypeIds', 'attentionMask'] as const) {
    const t = inputs[field];
    if (t.rank !== 2 || t.shape[0] !== B || t.shape[1] !== T) throw new Error(`reader inputs: ${field} has shape [${t.shape.join(', ')}], expected [${B}, ${T}]`);
    if (t.dtype !== 'int32') throw new Error(`reader inputs: ${field} must be int32, got ${t.dtype}`);
  }
  if (B === 0 || T === 0) throw new Error(`reader inputs: empty batch [${B}, ${T}]`);
  if (config.hiddenSize % config.numHeads !== 0) throw new Error(`reader config: hiddenSize ${config.hiddenSize} is not a multiple of numHeads ${config.numHeads}`);
}
