// defines: ReaderParams — the one owner of the reader's weights (tf.Variables), their
// seeded initialisation, and their conversion to and from checkpoint tensors
// (NamedTensors, common BERT naming, Linear weights [out, in]); LoadReport.
//
// Layout: every weight is kept as the checkpoint holds it, Linear weights [out, in] as
// PyTorch stores them, so loading and saving copy and never transpose. The products
// read a Linear weight transposed (x·Wᵀ, encoder.ts); the project's GEMM takes a
// transpose as swapped strides, and keeping [out, in] measured no slower than keeping
// [in, out] (a training step, an inference forward, both bench configs, 1 and 2 threads:
// DEVELOPERS.md "Weights", `npx tsx tests/bench/layout.ts`). The engine kept [in, out]
// while stock tfjs-wasm ran every transposed matMul in a scalar loop, 10–30× slower.

import * as tf from '@tensorflow/tfjs';
import type { NamedTensor, NamedTensors } from '../io/tensors.js';
import { parameterShapes, validateConfig, type ParamSpec, type ReaderConfig } from './config.js';
import { seedFor, truncatedNormal } from './random.js';

/**
 * Weights that do not fit the config or hold values no reader can use (a missing or
 * misshapen tensor, a NaN): a fault of the input, not of the program, so the CLI reports
 * it without "internal error" (src/cli/common.ts, runCommand).
 */
export class WeightsError extends Error {
  override name = 'WeightsError';
}

/** What `fromNamed` did with each checkpoint tensor. */
export interface LoadReport {
  /** engine names filled from the checkpoint */
  loaded: string[];
  /** engine names the checkpoint lacked; each was freshly initialised (heads only) */
  missing: string[];
  /** checkpoint names the engine does not use (pooler, next-sentence head, …) */
  unexpected: string[];
  /** one sentence per thing the user should know, e.g. a head initialised afresh */
  notices: string[];
}

export interface FromNamedOptions {
  /** seed for heads the checkpoint lacks (default 0) */
  seed?: number;
  /** where the tensors came from, for error messages (default "checkpoint") */
  source?: string;
}

/** Checkpoint names that are known and deliberately not loaded. */
const IGNORED = [
  'cls.predictions.decoder.weight', // tied to the word embeddings
  'bert.embeddings.position_ids', // an index buffer some exports include, not a weight
];

/** Alternative spellings in older checkpoints, to the engine's name. */
function canonicalName(name: string): string {
  let n = name;
  // TF-converted checkpoints name LayerNorm's scale/shift gamma/beta
  n = n.replace(/LayerNorm\.gamma$/, 'LayerNorm.weight').replace(/LayerNorm\.beta$/, 'LayerNorm.bias');
  if (n === 'cls.predictions.decoder.bias') return 'cls.predictions.bias';
  // names from a bare encoder (BertModel) come without the `bert.` prefix
  if (n.startsWith('embeddings.') || n.startsWith('encoder.') || n.startsWith('pooler.')) n = `bert.${n}`;
  return n;
}

let instanceCount = 0;

export class ReaderParams {
  /** engine name (BERT naming) → variable, in the checkpoint layout (Linear weights [out, in]) */
  readonly variables: Map<string, tf.Variable>;
  readonly config: ReaderConfig;
  private readonly specs: Map<string, ParamSpec>;

  private constructor(config: ReaderConfig, values: Map<string, tf.Tensor>) {
    this.config = config;
    this.specs = parameterShapes(config);
    this.variables = new Map();
    // tfjs variable names are global; a prefix keeps two models (base, fine-tuned) apart
    const prefix = `reader${instanceCount++}/`;
    for (const name of this.specs.keys()) {
      const value = values.get(name);
      if (value === undefined) throw new Error(`ReaderParams: no value for ${name}`);
      this.variables.set(name, tf.variable(value, true, prefix + name));
    }
  }

  /** Fresh weights: truncated normal σ = initStd (cut at ±2σ), biases 0, LayerNorm 1 and 0. */
  static init(config: ReaderConfig, seed: number): ReaderParams {
    validateConfig(config);
    const values = new Map<string, tf.Tensor>();
    for (const [name, spec] of parameterShapes(config)) values.set(name, freshValue(name, spec, config, seed));
    return ReaderParams.adopt(config, values);
  }

  /**
   * Weights from checkpoint tensors. Names may come with or without the `bert.` prefix.
   * A missing span head (`qa_outputs`) or MLM head (`cls.predictions.*`) is initialised
   * afresh with a notice; a missing encoder tensor, a shape mismatch or a NaN or infinite
   * value is an error naming the tensor.
   */
  static fromNamed(config: ReaderConfig, named: NamedTensors, opts: FromNamedOptions = {}): { params: ReaderParams; report: LoadReport } {
    const source = opts.source ?? 'checkpoint';
    validateConfig(config, source);
    const specs = parameterShapes(config);
    const report: LoadReport = { loaded: [], missing: [], unexpected: [], notices: [] };
    const found = new Map<string, { original: string; tensor: NamedTensor }>();
    for (const [original, tensor] of named) {
      const name = canonicalName(original);
      if (IGNORED.includes(name)) continue;
      if (!specs.has(name)) {
        report.unexpected.push(original);
        continue;
      }
      const earlier = found.get(name);
      if (earlier !== undefined) throw new WeightsError(`${source}: tensors "${earlier.original}" and "${original}" both name ${name}`);
      found.set(name, { original, tensor });
    }

    const missingEncoder = [...specs].filter(([name, spec]) => spec.part === 'encoder' && !found.has(name)).map(([name]) => name);
    if (missingEncoder.length > 0) {
      const shown = missingEncoder.slice(0, 5).join(', ') + (missingEncoder.length > 5 ? `, … (${missingEncoder.length} in all)` : '');
      throw new WeightsError(`${source}: missing encoder tensor(s): ${shown}`);
    }

    const values = new Map<string, tf.Tensor>();
    try {
      for (const [name, spec] of specs) {
        const entry = found.get(name);
        if (entry === undefined) {
          values.set(name, freshValue(name, spec, config, opts.seed ?? 0));
          report.missing.push(name);
          continue;
        }
        const { original, tensor } = entry;
        const expected = spec.shape;
        if (tensor.shape.length !== expected.length || tensor.shape.some((d, i) => d !== expected[i])) {
          throw new WeightsError(
            `${source}: tensor "${original}" has shape [${tensor.shape.join(', ')}], the config expects [${expected.join(', ')}]`,
          );
        }
        const size = expected.reduce((a, b) => a * b, 1);
        if (tensor.data.length !== size) {
          throw new WeightsError(
            `${source}: tensor "${original}" holds ${tensor.data.length} values, its shape [${expected.join(', ')}] needs ${size}`,
          );
        }
        // one NaN or infinity makes every output NaN: refuse it at load, whatever the
        // source (a model directory, a checkpoint to resume or restore), naming the tensor
        const bad = tensor.data.findIndex((v) => !Number.isFinite(v));
        if (bad >= 0) {
          const count = tensor.data.reduce((n, v) => (Number.isFinite(v) ? n : n + 1), 0);
          throw new WeightsError(
            `${source}: tensor "${original}" holds ${count} value(s) that are NaN or infinite (the first at index ${bad}); ` +
              'the weights are damaged or were saved from a run that diverged',
          );
        }
        values.set(name, tf.tensor(tensor.data, spec.shape, 'float32'));
        report.loaded.push(name);
      }
    } catch (err) {
      for (const t of values.values()) t.dispose();
      throw err;
    }
    const missingParts = new Set(report.missing.map((name) => specs.get(name)?.part));
    if (missingParts.has('span_head'))
      report.notices.push(`${source} has no span head (qa_outputs); it was initialised afresh and must be trained`);
    if (missingParts.has('mlm_head')) report.notices.push(`${source} has no MLM head (cls.predictions.*); it was initialised afresh`);
    return { params: ReaderParams.adopt(config, values), report };
  }

  /** Checkpoint tensors: every parameter, BERT names, Linear weights [out, in]. */
  toNamed(): NamedTensors {
    const named: NamedTensors = new Map();
    for (const [name, variable] of this.variables) {
      const spec = this.specs.get(name)!;
      named.set(name, { shape: [...spec.shape], data: Float32Array.from(variable.dataSync() as Float32Array) });
    }
    return named;
  }

  /** The variable for an engine name; throws naming it if absent. */
  get(name: string): tf.Variable {
    const v = this.variables.get(name);
    if (v === undefined) throw new Error(`ReaderParams: no parameter named ${name}`);
    return v;
  }

  /**
   * `tf.variableGrads` over these parameters, with the gradients keyed by engine name.
   * Parameters the loss does not reach (the MLM head under the span loss) get no entry,
   * as PyTorch leaves their `.grad` at None.
   */
  variableGrads(lossFn: () => tf.Scalar): { value: tf.Scalar; grads: Map<string, tf.Tensor> } {
    const { value, grads } = tf.variableGrads(lossFn, [...this.variables.values()]);
    const byName = new Map<string, tf.Tensor>();
    for (const [name, variable] of this.variables) {
      const g = grads[variable.name];
      if (g !== undefined) byName.set(name, g);
    }
    return { value, grads: byName };
  }

  dispose(): void {
    for (const v of this.variables.values()) v.dispose();
    this.variables.clear();
  }

  /** Wraps values in variables, then frees the values (tf.variable copies them). */
  private static adopt(config: ReaderConfig, values: Map<string, tf.Tensor>): ReaderParams {
    try {
      return new ReaderParams(config, values);
    } finally {
      for (const t of values.values()) t.dispose();
    }
  }
}

function freshValue(name: string, spec: ParamSpec, config: ReaderConfig, seed: number): tf.Tensor {
  const size = spec.shape.reduce((a, b) => a * b, 1);
  if (spec.init === 'zeros') return tf.zeros(spec.shape);
  if (spec.init === 'ones') return tf.ones(spec.shape);
  return tf.tensor(truncatedNormal(size, config.initStd, seedFor(seed, name)), spec.shape, 'float32');
}
