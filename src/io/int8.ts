// defines: quantizeInt8, dequantizeInt8, isQuantized, quantizeModel, dequantizeModel,
// int8ToSafetensors, readInt8Safetensors — weight-only int8 for export.
//
// Per-output-channel symmetric quantization (the scheme of Jacob et al. 2018 with the
// zero point fixed at 0, one scale per row):
//   1. Every 2-D `.weight` tensor — each Linear weight in the [out, in] checkpoint layout
//      and each embedding table [rows, H] — is quantized row by row.
//   2. Row r: scale_r = max_j |w_rj| / 127 (a row of zeros gets scale 1),
//      q_rj = round(w_rj / scale_r), rounding half away from zero, in [−127, 127].
//   3. Dequantized: w'_rj = q_rj · scale_r, so |w − w'| ≤ scale_r / 2 for every element.
// Everything else (biases, LayerNorm, cls.predictions.bias) stays float32.
//
// File naming (model.int8.safetensors): a quantized tensor `<name>` is stored as I8 with
// its original name and shape, and its scales beside it as `<name>.scale`, F32 of shape
// [rows]. The metadata key "spanwright.quantization" says "int8-per-row-symmetric".

import { readSafetensorsRaw, writeSafetensors, type WritableTensor } from './safetensors.js';
import type { NamedTensor, NamedTensors } from './tensors.js';

export interface Int8Tensor {
  /** the original shape, [rows, cols] */
  shape: number[];
  /** row-major, |q| ≤ 127 */
  data: Int8Array;
  /** one per row */
  scale: Float32Array;
}

export interface Int8TensorReport {
  name: string;
  shape: number[];
  /** measured max |w − dequantize(quantize(w))| over the tensor */
  maxAbsError: number;
  /** the guaranteed bound: max over rows of scale / 2 */
  bound: number;
  /** max |w| over the tensor */
  maxAbs: number;
}

export interface QuantizedModel {
  /** quantized tensors, by checkpoint name */
  int8: Map<string, Int8Tensor>;
  /** everything kept as float32 */
  float: NamedTensors;
  /** the original tensor order, so files keep it */
  order: string[];
  report: Int8TensorReport[];
}

export const SCALE_SUFFIX = '.scale';
export const QUANTIZATION_KEY = 'spanwright.quantization';
export const QUANTIZATION_SCHEME = 'int8-per-row-symmetric';

/** Which tensors are quantized: 2-D weight matrices (Linear [out, in], embedding tables). */
export function isQuantized(name: string, shape: readonly number[]): boolean {
  return name.endsWith('.weight') && shape.length === 2 && !name.includes('LayerNorm');
}

/** Steps 2 of the header, for one [rows, cols] tensor. */
export function quantizeInt8(t: NamedTensor): Int8Tensor {
  if (t.shape.length !== 2) throw new Error(`quantizeInt8: expected a 2-D tensor, got shape [${t.shape.join(', ')}]`);
  const [rows, cols] = t.shape as [number, number];
  const data = new Int8Array(rows * cols);
  const scale = new Float32Array(rows);
  for (let r = 0; r < rows; r++) {
    let maxAbs = 0;
    for (let c = 0; c < cols; c++) maxAbs = Math.max(maxAbs, Math.abs(t.data[r * cols + c]!));
    if (!Number.isFinite(maxAbs)) throw new Error(`quantizeInt8: row ${r} holds a non-finite value`);
    const s = maxAbs === 0 ? 1 : Math.fround(maxAbs / 127);
    scale[r] = s;
    for (let c = 0; c < cols; c++) {
      const x = t.data[r * cols + c]! / s;
      const q = Math.sign(x) * Math.round(Math.abs(x)); // half away from zero
      data[r * cols + c] = Math.max(-127, Math.min(127, q));
    }
  }
  return { shape: [rows, cols], data, scale };
}

/** Step 3: q · scale per row, as float32. */
export function dequantizeInt8(q: Int8Tensor): NamedTensor {
  const [rows, cols] = q.shape as [number, number];
  const out = new Float32Array(rows * cols);
  for (let r = 0; r < rows; r++) {
    const s = q.scale[r]!;
    for (let c = 0; c < cols; c++) out[r * cols + c] = q.data[r * cols + c]! * s;
  }
  return { shape: [...q.shape], data: out };
}

/** Quantizes every weight matrix of a model and measures each tensor's error. */
export function quantizeModel(named: NamedTensors): QuantizedModel {
  const result: QuantizedModel = { int8: new Map(), float: new Map(), order: [...named.keys()], report: [] };
  for (const [name, t] of named) {
    if (!isQuantized(name, t.shape)) {
      result.float.set(name, t);
      continue;
    }
    if (named.has(name + SCALE_SUFFIX))
      throw new Error(`quantizeModel: "${name}${SCALE_SUFFIX}" would collide with the scales of "${name}"`);
    const q = quantizeInt8(t);
    const back = dequantizeInt8(q);
    let maxAbsError = 0;
    let maxAbs = 0;
    for (let i = 0; i < t.data.length; i++) {
      maxAbsError = Math.max(maxAbsError, Math.abs(t.data[i]! - back.data[i]!));
      maxAbs = Math.max(maxAbs, Math.abs(t.data[i]!));
    }
    const bound = q.scale.reduce((m, s) => Math.max(m, s / 2), 0);
    result.int8.set(name, q);
    result.report.push({ name, shape: [...t.shape], maxAbsError, bound, maxAbs });
  }
  return result;
}

/** The float32 model the int8 one stands for (quantized weights dequantized). */
export function dequantizeModel(model: Pick<QuantizedModel, 'int8' | 'float' | 'order'>): NamedTensors {
  const out: NamedTensors = new Map();
  for (const name of model.order) {
    const q = model.int8.get(name);
    out.set(name, q ? dequantizeInt8(q) : model.float.get(name)!);
  }
  return out;
}

/** model.int8.safetensors: I8 weights with `<name>.scale` beside them, the rest F32. */
export function int8ToSafetensors(model: QuantizedModel, metadata: Record<string, string> = {}): Uint8Array {
  const entries: Array<[string, WritableTensor]> = [];
  for (const name of model.order) {
    const q = model.int8.get(name);
    if (q) {
      entries.push([name, { dtype: 'I8', shape: q.shape, data: q.data }]);
      entries.push([name + SCALE_SUFFIX, { dtype: 'F32', shape: [q.scale.length], data: q.scale }]);
    } else {
      const t = model.float.get(name)!;
      entries.push([name, { dtype: 'F32', shape: t.shape, data: t.data }]);
    }
  }
  return writeSafetensors(entries, { ...metadata, [QUANTIZATION_KEY]: QUANTIZATION_SCHEME });
}

/** Reads model.int8.safetensors back into a QuantizedModel (report empty: the originals are gone). */
export function readInt8Safetensors(bytes: Uint8Array, file = 'model.int8.safetensors'): QuantizedModel {
  const { tensors } = readSafetensorsRaw(bytes, file);
  const model: QuantizedModel = { int8: new Map(), float: new Map(), order: [], report: [] };
  for (const [name, t] of tensors) {
    if (t.dtype === 'I8') {
      const scale = tensors.get(name + SCALE_SUFFIX);
      if (!scale || scale.dtype !== 'F32') throw new Error(`${file}: tensor "${name}" is I8 but "${name}${SCALE_SUFFIX}" (F32) is missing`);
      if (t.shape.length !== 2 || scale.shape.length !== 1 || scale.shape[0] !== t.shape[0]) {
        throw new Error(
          `${file}: tensor "${name}${SCALE_SUFFIX}" has shape [${scale.shape.join(', ')}], expected [${t.shape[0]}] (one scale per row)`,
        );
      }
      model.int8.set(name, { shape: t.shape, data: t.data as Int8Array, scale: scale.data as Float32Array });
      model.order.push(name);
    } else if (name.endsWith(SCALE_SUFFIX) && tensors.get(name.slice(0, -SCALE_SUFFIX.length))?.dtype === 'I8') {
      continue;
    } else if (t.dtype === 'F32') {
      model.float.set(name, { shape: t.shape, data: t.data as Float32Array });
      model.order.push(name);
    } else {
      throw new Error(`${file}: tensor "${name}" has dtype ${t.dtype}; an int8 model file holds only I8 and F32`);
    }
  }
  return model;
}
