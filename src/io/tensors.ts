// defines: NamedTensor, NamedTensors — plain-data weights as they travel between the
// engine, checkpoints, safetensors and exports. No tfjs here, so it passes through
// postMessage and IndexedDB unchanged.

export interface NamedTensor {
  shape: number[];
  /** row-major, float32 */
  data: Float32Array;
}

/** Parameter name (common BERT checkpoint naming) → tensor. Insertion order is kept. */
export type NamedTensors = Map<string, NamedTensor>;
