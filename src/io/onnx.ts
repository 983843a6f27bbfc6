// defines: exportOnnx — the reader's forward pass (DEVELOPERS.md "Architecture") as an
// ONNX graph, fp32 or with weight-only int8, for any runtime that reads ONNX opset 17.
//
// Graph interface:
//   inputs   input_ids, attention_mask, token_type_ids   int64 [batch, sequence]
//   outputs  start_logits, end_logits                    float [batch, sequence]
// Shapes: B batch, T tokens, H hidden, N heads, D head size, I feed-forward width.
//
// The graph, op by op (ONNX operator specification, opset 17):
//   x = LayerNormalization(Gather(word, ids) + Slice(pos, 0..T) + Gather(type, tt))
//   bias = Unsqueeze((1 − Cast(mask)) · −10000, [1, 2])                        [B, 1, 1, T]
//   per layer:
//     q, k, v = x·Wq + bq, …  → Reshape [B, T, N, D] → Transpose to [B, N, T, D] (k: [B, N, D, T])
//     a = LayerNormalization(x + (Softmax(q·kᵀ · 1/√D + bias) · v → [B, T, H])·Wo + bo)
//     x = LayerNormalization(a + act(a·W1 + b1)·W2 + b2)
//       act: exact GELU 0.5·x·(1 + Erf(x/√2)), or x·Sigmoid(1.702x) for "gelu_sigmoid"
//   logits = x·Wqa + bqa [B, T, 2]; start = Gather(logits, 0, axis 2), end = Gather(…, 1, …)
//
// Weights are initializers. Linear weights are stored transposed, [in, out], under
// "<name>.T", so every product is a plain MatMul. In the int8 variant each weight matrix
// (see int8.ts) is an INT8 initializer "<name>.int8" (Linear: "<name>.T.int8", [in, out])
// with "<name>.scale" (float, one per output channel) and "<name>.zero_point" (int8 zeros),
// turned back into floats by DequantizeLinear with `axis` on the output channel.

import { isQuantized, quantizeModel, type Int8Tensor, type QuantizedModel } from './int8.js';
import { AttributeType, DataType, encodeModelProto, type AttributeProto, type NodeProto, type TensorProto } from './onnx-proto.js';
import { littleEndianBytes } from './safetensors.js';
import type { NamedTensor, NamedTensors } from './tensors.js';

/** The engine's shape, as far as the graph needs it (a ReaderConfig fits). */
export interface OnnxReaderShape {
  hiddenSize: number;
  numLayers: number;
  numHeads: number;
  layerNormEps: number;
  activation: 'gelu' | 'gelu_sigmoid';
}

export interface OnnxExportOptions {
  /** weight-only int8: pass a QuantizedModel to reuse one, or true to quantize here */
  int8?: boolean | QuantizedModel;
  /** written into the model's metadata_props */
  metadata?: Record<string, string>;
}

/** LayerNormalization entered the default domain at opset 17. */
export const OPSET = 17;
/** The IR version that goes with opset 17 (ONNX versioning table, from memory). */
export const IR_VERSION = 8;

/** Added to attention scores of padding keys: BERT's (1 − mask)·(−10000). */
const MASKED_SCORE = -10000;

class GraphBuilder {
  readonly nodes: NodeProto[] = [];
  readonly initializers: TensorProto[] = [];
  private readonly names = new Set<string>();
  private counter = 0;

  /** Adds an initializer and returns its name. */
  tensor(name: string, dims: number[], dataType: number, data: Float32Array | Int8Array | BigInt64Array): string {
    if (this.names.has(name)) throw new Error(`exportOnnx: initializer "${name}" defined twice`);
    this.names.add(name);
    this.initializers.push({ name, dims, dataType, rawData: littleEndianBytes(data) });
    return name;
  }

  float(name: string, dims: number[], data: Float32Array): string {
    return this.tensor(name, dims, DataType.FLOAT, data);
  }

  scalar(name: string, value: number): string {
    return this.float(name, [], new Float32Array([value]));
  }

  int64(name: string, values: number[], dims = [values.length]): string {
    return this.tensor(name, dims, DataType.INT64, BigInt64Array.from(values.map((v) => BigInt(v))));
  }

  /** Adds a node; returns its output names (`outputs` of them, named after `scope`). */
  op(
    opType: string,
    inputs: string[],
    scope: string,
    attrs: Record<string, number | number[]> = {},
    outputs = 1,
    floatAttrs: string[] = [],
  ): string[] {
    const id = this.counter++;
    const out = outputs === 1 ? [`${scope}/${opType}_${id}`] : Array.from({ length: outputs }, (_, k) => `${scope}/${opType}_${id}:${k}`);
    const attribute: AttributeProto[] = Object.entries(attrs).map(([name, v]) => {
      if (Array.isArray(v)) return { name, type: AttributeType.INTS, ints: v };
      if (floatAttrs.includes(name)) return { name, type: AttributeType.FLOAT, f: v };
      return { name, type: AttributeType.INT, i: v };
    });
    this.nodes.push({ input: inputs, output: out, name: `${scope}/${opType}_${id}`, opType, attribute });
    return out;
  }

  one(opType: string, inputs: string[], scope: string, attrs: Record<string, number | number[]> = {}, floatAttrs: string[] = []): string {
    return this.op(opType, inputs, scope, attrs, 1, floatAttrs)[0]!;
  }

  /** Renames the last node's output (for the graph outputs). */
  nameLastOutput(name: string): void {
    this.nodes[this.nodes.length - 1]!.output = [name];
  }
}

/** `t` ([rows, cols]) transposed to [cols, rows]. */
function transpose2d(data: Float32Array | Int8Array, rows: number, cols: number): Float32Array | Int8Array {
  const out = data instanceof Int8Array ? new Int8Array(rows * cols) : new Float32Array(rows * cols);
  for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) out[c * rows + r] = data[r * cols + c]!;
  return out;
}

/** Builds the graph and returns the bytes of an `.onnx` file. */
export function exportOnnx(config: OnnxReaderShape, named: NamedTensors, options: OnnxExportOptions = {}): Uint8Array {
  const { hiddenSize: H, numHeads: N, numLayers } = config;
  if (H % N !== 0) throw new Error(`exportOnnx: hiddenSize ${H} is not a multiple of numHeads ${N}`);
  const D = H / N;
  const quantized: QuantizedModel | null = options.int8 === true ? quantizeModel(named) : options.int8 ? options.int8 : null;
  const g = new GraphBuilder();

  const get = (name: string): NamedTensor => {
    const t = named.get(name);
    if (t === undefined) throw new Error(`exportOnnx: the model has no tensor "${name}"`);
    return t;
  };
  const int8Of = (name: string): Int8Tensor | null => {
    if (!quantized) return null;
    const q = quantized.int8.get(name);
    if (q === undefined && isQuantized(name, get(name).shape)) throw new Error(`exportOnnx: the int8 model lacks "${name}"`);
    return q ?? null;
  };
  /** An int8 matrix and its per-channel dequantization; `axis` is the output channel. */
  const dequantized = (initName: string, name: string, dims: number[], data: Int8Array, scale: Float32Array, axis: number): string => {
    const q = g.tensor(initName, dims, DataType.INT8, data);
    const s = g.float(`${name}.scale`, [scale.length], scale);
    const z = g.tensor(`${name}.zero_point`, [scale.length], DataType.INT8, new Int8Array(scale.length));
    return g.one('DequantizeLinear', [q, s, z], name, { axis });
  };
  /** A table read by row (an embedding): [rows, H] as stored. */
  const table = (name: string): string => {
    const q = int8Of(name);
    if (q) return dequantized(`${name}.int8`, name, q.shape, q.data, q.scale, 0);
    const t = get(name);
    return g.float(name, t.shape, t.data);
  };
  /** A Linear weight as [in, out]. */
  const weightT = (name: string): string => {
    const t = get(name);
    const [out, inp] = t.shape as [number, number];
    const q = int8Of(name);
    if (q) return dequantized(`${name}.T.int8`, name, [inp, out], transpose2d(q.data, out, inp) as Int8Array, q.scale, 1);
    return g.float(`${name}.T`, [inp, out], transpose2d(t.data, out, inp) as Float32Array);
  };
  const linear = (name: string, x: string): string => {
    const product = g.one('MatMul', [x, weightT(`${name}.weight`)], name);
    const b = get(`${name}.bias`);
    return g.one('Add', [product, g.float(`${name}.bias`, b.shape, b.data)], name);
  };
  const layerNorm = (name: string, x: string): string => {
    const w = get(`${name}.weight`);
    const b = get(`${name}.bias`);
    return g.one(
      'LayerNormalization',
      [x, g.float(`${name}.weight`, w.shape, w.data), g.float(`${name}.bias`, b.shape, b.data)],
      name,
      { axis: -1, epsilon: config.layerNormEps },
      ['epsilon'],
    );
  };

  // shared constants
  const one = g.scalar('const.one', 1);
  const geluSigmoid = config.activation === 'gelu_sigmoid';
  const sigmoidGain = geluSigmoid ? g.scalar('const.sigmoid_gelu_gain', 1.702) : '';
  const half = geluSigmoid ? '' : g.scalar('const.half', 0.5);
  const invSqrt2 = geluSigmoid ? '' : g.scalar('const.inv_sqrt2', Math.SQRT1_2);
  const maskedScore = g.scalar('const.masked_score', MASKED_SCORE);
  const attentionScale = g.scalar('const.attention_scale', 1 / Math.sqrt(D));
  const headShape = g.int64('const.head_shape', [0, 0, N, D]); // 0: keep B and T from the input
  const mergedShape = g.int64('const.merged_shape', [0, 0, H]);
  const zero1 = g.int64('const.zero', [0]);
  const oneIdx = g.int64('const.one_index', [1]);
  const twoIdx = g.int64('const.two_index', [2]);
  const maskAxes = g.int64('const.mask_axes', [1, 2]);

  const activation = (x: string, scope: string): string => {
    if (geluSigmoid) {
      return g.one('Mul', [x, g.one('Sigmoid', [g.one('Mul', [x, sigmoidGain], scope)], scope)], scope);
    }
    const erf = g.one('Erf', [g.one('Mul', [x, invSqrt2], scope)], scope);
    return g.one('Mul', [g.one('Mul', [x, half], scope), g.one('Add', [erf, one], scope)], scope);
  };

  // embeddings
  const E = 'bert.embeddings';
  const word = g.one('Gather', [table(`${E}.word_embeddings.weight`), 'input_ids'], E, { axis: 0 }); // [B, T, H]
  const type = g.one('Gather', [table(`${E}.token_type_embeddings.weight`), 'token_type_ids'], E, { axis: 0 }); // [B, T, H]
  const seqLen = g.one('Slice', [g.one('Shape', ['input_ids'], E), oneIdx, twoIdx], E); // [1] = T
  const position = g.one('Slice', [table(`${E}.position_embeddings.weight`), zero1, seqLen, zero1], E); // [T, H]
  let x = layerNorm(`${E}.LayerNorm`, g.one('Add', [g.one('Add', [word, type], E), position], E)); // [B, T, H]

  // the mask bias, [B, 1, 1, T]
  const maskF = g.one('Cast', ['attention_mask'], 'mask', { to: DataType.FLOAT });
  const maskBias = g.one('Unsqueeze', [g.one('Mul', [g.one('Sub', [one, maskF], 'mask'), maskedScore], 'mask'), maskAxes], 'mask');

  for (let i = 0; i < numLayers; i++) {
    const L = `bert.encoder.layer.${i}`;
    const heads = (t: string, perm: number[]): string => g.one('Transpose', [g.one('Reshape', [t, headShape], L)], L, { perm });
    const q = heads(linear(`${L}.attention.self.query`, x), [0, 2, 1, 3]); // [B, N, T, D]
    const kT = heads(linear(`${L}.attention.self.key`, x), [0, 2, 3, 1]); // [B, N, D, T]
    const v = heads(linear(`${L}.attention.self.value`, x), [0, 2, 1, 3]); // [B, N, T, D]
    const scores = g.one('Add', [g.one('Mul', [g.one('MatMul', [q, kT], L), attentionScale], L), maskBias], L); // [B, N, T, T]
    const probs = g.one('Softmax', [scores], L, { axis: -1 });
    const context = g.one('Transpose', [g.one('MatMul', [probs, v], L)], L, { perm: [0, 2, 1, 3] }); // [B, T, N, D]
    const merged = g.one('Reshape', [context, mergedShape], L); // [B, T, H]
    const attended = linear(`${L}.attention.output.dense`, merged);
    const a = layerNorm(`${L}.attention.output.LayerNorm`, g.one('Add', [x, attended], L)); // [B, T, H]
    const inner = activation(linear(`${L}.intermediate.dense`, a), `${L}.intermediate`); // [B, T, I]
    x = layerNorm(`${L}.output.LayerNorm`, g.one('Add', [a, linear(`${L}.output.dense`, inner)], L)); // [B, T, H]
  }

  const logits = linear('qa_outputs', x); // [B, T, 2]
  g.one('Gather', [logits, g.int64('const.start_channel', [0], [])], 'qa_outputs', { axis: 2 });
  g.nameLastOutput('start_logits');
  g.one('Gather', [logits, g.int64('const.end_channel', [1], [])], 'qa_outputs', { axis: 2 });
  g.nameLastOutput('end_logits');

  const io = (name: string, elemType: number) => ({ name, elemType, shape: ['batch', 'sequence'] });
  return encodeModelProto({
    irVersion: IR_VERSION,
    opsetVersion: OPSET,
    producerName: 'spanwright',
    producerVersion: '0.1.0',
    docString: quantized
      ? 'Extractive question-answering reader (BERT encoder + span head), weight-only int8 (per-output-channel symmetric).'
      : 'Extractive question-answering reader (BERT encoder + span head), float32.',
    graphName: 'reader',
    nodes: g.nodes,
    initializers: g.initializers,
    inputs: [io('input_ids', DataType.INT64), io('attention_mask', DataType.INT64), io('token_type_ids', DataType.INT64)],
    outputs: [io('start_logits', DataType.FLOAT), io('end_logits', DataType.FLOAT)],
    metadata: { ...(options.metadata ?? {}), weights: quantized ? 'int8' : 'float32' },
  });
}
