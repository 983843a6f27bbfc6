// defines: loadFixture, namedFromJson, inputsFromJson, expectClose — reading the PyTorch
// golden fixtures (tests/reference/generate_fixtures.py) and comparing against them.

import { readFileSync } from 'node:fs';
import * as tf from '@tensorflow/tfjs';
import type { NamedTensors } from '../../src/io/tensors.js';
import type { ReaderInputs } from '../../src/model/encoder.js';

export const FIXTURES = new URL('../reference/fixtures/', import.meta.url);

export interface JsonTensor {
  shape: number[];
  data: number[];
}

export function loadFixture<T = Record<string, unknown>>(file: string): T {
  return JSON.parse(readFileSync(new URL(file, FIXTURES), 'utf8')) as T;
}

export function namedFromJson(tensors: Record<string, JsonTensor>): NamedTensors {
  const named: NamedTensors = new Map();
  for (const [name, t] of Object.entries(tensors)) named.set(name, { shape: t.shape, data: Float32Array.from(t.data) });
  return named;
}

export function inputsFromJson(inputs: { input_ids: number[][]; token_type_ids: number[][]; attention_mask: number[][] }): ReaderInputs {
  return {
    inputIds: tf.tensor2d(inputs.input_ids, undefined, 'int32'),
    tokenTypeIds: tf.tensor2d(inputs.token_type_ids, undefined, 'int32'),
    attentionMask: tf.tensor2d(inputs.attention_mask, undefined, 'int32'),
  };
}

export interface Tolerance {
  /** absolute part of the bound */
  atol: number;
  /** relative part, times |theirs| */
  rtol: number;
}

/**
 * Passes when |ours − theirs| ≤ atol + rtol·|theirs| everywhere; on failure the message
 * names the tensor and lists the first differing values (index, ours, theirs).
 */
export function compareValues(name: string, ours: ArrayLike<number>, theirs: ArrayLike<number>, tol: Tolerance): string | null {
  if (ours.length !== theirs.length) return `${name}: ${ours.length} values, the reference has ${theirs.length}`;
  const bad: string[] = [];
  let count = 0;
  let worst = 0;
  for (let i = 0; i < ours.length; i++) {
    const diff = Math.abs(ours[i] - theirs[i]);
    if (!(diff <= tol.atol + tol.rtol * Math.abs(theirs[i]))) {
      count++;
      worst = Math.max(worst, Number.isNaN(diff) ? Infinity : diff);
      if (bad.length < 5) bad.push(`[${i}] ours ${ours[i]} theirs ${theirs[i]}`);
    }
  }
  if (count === 0) return null;
  return `${name}: ${count} of ${ours.length} values differ beyond atol ${tol.atol} + rtol ${tol.rtol}·|theirs| (worst |diff| ${worst}); first: ${bad.join('; ')}`;
}

/** Largest |ours − theirs| relative to the reference's largest magnitude, for reporting. */
export function maxError(ours: ArrayLike<number>, theirs: ArrayLike<number>): number {
  let worst = 0;
  for (let i = 0; i < ours.length; i++) worst = Math.max(worst, Math.abs(ours[i] - theirs[i]));
  return worst;
}
