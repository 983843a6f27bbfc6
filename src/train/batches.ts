// defines: SpanBatch, MlmBatch (plain-data batches, row-major [B, T] int32 arrays),
// collateSpan, collateMlm, DataOrder, epochOrder, orderAtUpdate, UpdateSampler.
//
// Batches stay plain typed arrays until the trainer turns them into tensors inside its
// per-step scope, so a batch can cross postMessage and nothing here owns GPU/wasm memory.
//
// Data order: epoch e visits the features in the permutation shuffledOrder(N,
// seedAt(seed, 'shuffle', e)). It depends on nothing but the seed and the epoch, so the
// position (epoch, index) alone says what comes next, and a run resumed at any update
// sees exactly the features an uninterrupted run would.
//
// Letters: B batch (features in a micro-batch), T tokens per row, N features per epoch.

import { mulberry32 } from '../data/random.js';
import { seedAt, shuffledOrder } from './random.js';
import type { TrainPlan } from './schedule.js';

/** What a span batch needs from a feature (src/text/features.ts `Feature` has it all). */
export interface SpanExample {
  inputIds: Int32Array;
  tokenTypeIds: Int32Array;
  attentionMask: Int32Array;
  /** token index of the answer start in this window; 0 = [CLS] = no answer here */
  startPosition: number;
  endPosition: number;
}

/** What an MLM batch needs from a sequence: ids and masks, no labels. */
export interface TokenExample {
  inputIds: Int32Array;
  tokenTypeIds: Int32Array;
  attentionMask: Int32Array;
}

export interface SpanBatch {
  /** B */
  size: number;
  /** T (the feature length, or less when trimmed) */
  seqLen: number;
  inputIds: Int32Array; // [B, T]
  tokenTypeIds: Int32Array; // [B, T]
  attentionMask: Int32Array; // [B, T]
  startPositions: Int32Array; // [B]
  endPositions: Int32Array; // [B]
}

export interface MlmBatch {
  size: number;
  seqLen: number;
  /** the input with the chosen tokens masked, replaced or kept (BERT's 80/10/10) */
  inputIds: Int32Array; // [B, T]
  tokenTypeIds: Int32Array; // [B, T]
  attentionMask: Int32Array; // [B, T]
  /** the original id where a token is predicted, −100 elsewhere */
  labels: Int32Array; // [B, T]
}

/** The label value mlmLoss ignores (the PyTorch convention, `ignore_index=-100`). */
export const IGNORE_LABEL = -100;

/**
 * Packs examples into one batch. With `trim`, T is cut to the longest real (mask = 1)
 * sequence in the batch: padding is masked in attention and in the span loss, so the
 * results are unchanged and the padding's work is saved.
 */
export function collateSpan(examples: readonly SpanExample[], trim: boolean): SpanBatch {
  const { B, T } = batchShape(examples, trim, 'collateSpan');
  const batch: SpanBatch = {
    size: B,
    seqLen: T,
    inputIds: new Int32Array(B * T),
    tokenTypeIds: new Int32Array(B * T),
    attentionMask: new Int32Array(B * T),
    startPositions: new Int32Array(B),
    endPositions: new Int32Array(B),
  };
  examples.forEach((ex, b) => {
    copyRow(ex, b, T, batch);
    for (const field of ['startPosition', 'endPosition'] as const) {
      const position = ex[field];
      if (!Number.isInteger(position) || position < 0 || position >= T) {
        throw new RangeError(`collateSpan: example ${b}: ${field} ${position} is outside the window [0, ${T})`);
      }
    }
    if (ex.endPosition < ex.startPosition) {
      throw new RangeError(`collateSpan: example ${b}: endPosition ${ex.endPosition} is before startPosition ${ex.startPosition}`);
    }
    batch.startPositions[b] = ex.startPosition;
    batch.endPositions[b] = ex.endPosition;
  });
  return batch;
}

export interface MlmMasking {
  /** share of eligible tokens predicted (BERT: 0.15) */
  probability: number;
  maskId: number;
  vocabSize: number;
  /** ids never chosen for prediction ([CLS], [SEP], [PAD], …) */
  specialIds: readonly number[];
}

/**
 * Packs sequences into an MLM batch with BERT's masking (Devlin et al. 2018, §3.1):
 * each real, non-special token is chosen with probability p; a chosen token becomes
 * [MASK] 80% of the time, a uniformly random id 10%, and stays 10%. At least one token
 * per batch is chosen, so the loss is never an empty mean. `seed` fixes every draw.
 */
export function collateMlm(examples: readonly TokenExample[], masking: MlmMasking, seed: number, trim: boolean): MlmBatch {
  const { B, T } = batchShape(examples, trim, 'collateMlm');
  const batch: MlmBatch = {
    size: B,
    seqLen: T,
    inputIds: new Int32Array(B * T),
    tokenTypeIds: new Int32Array(B * T),
    attentionMask: new Int32Array(B * T),
    labels: new Int32Array(B * T).fill(IGNORE_LABEL),
  };
  examples.forEach((ex, b) => copyRow(ex, b, T, batch));
  const special = new Set(masking.specialIds);
  const eligible: number[] = [];
  for (let i = 0; i < B * T; i++) {
    if (batch.attentionMask[i] === 1 && !special.has(batch.inputIds[i])) eligible.push(i);
  }
  if (eligible.length === 0) throw new RangeError('collateMlm: the batch has no token that could be masked');

  const random = mulberry32(seed);
  const below = (n: number) => Math.floor(random() * n);
  const chosen = eligible.filter(() => random() < masking.probability);
  if (chosen.length === 0) chosen.push(eligible[below(eligible.length)]);
  for (const i of chosen) {
    batch.labels[i] = batch.inputIds[i];
    const roll = random();
    if (roll < 0.8) batch.inputIds[i] = masking.maskId;
    else if (roll < 0.9) batch.inputIds[i] = below(masking.vocabSize);
  }
  return batch;
}

function batchShape(examples: readonly TokenExample[], trim: boolean, caller: string): { B: number; T: number } {
  if (examples.length === 0) throw new RangeError(`${caller}: a batch needs at least one example`);
  const full = examples[0].inputIds.length;
  let longest = 0;
  examples.forEach((ex, b) => {
    for (const field of ['inputIds', 'tokenTypeIds', 'attentionMask'] as const) {
      if (ex[field].length !== full) {
        throw new RangeError(`${caller}: example ${b}: ${field} has ${ex[field].length} tokens, example 0 has ${full}`);
      }
    }
    let last = full - 1;
    while (last >= 0 && ex.attentionMask[last] === 0) last--;
    longest = Math.max(longest, last + 1);
  });
  return { B: examples.length, T: trim ? Math.max(1, longest) : full };
}

function copyRow(
  ex: TokenExample,
  b: number,
  T: number,
  into: { inputIds: Int32Array; tokenTypeIds: Int32Array; attentionMask: Int32Array },
): void {
  into.inputIds.set(ex.inputIds.subarray(0, T), b * T);
  into.tokenTypeIds.set(ex.tokenTypeIds.subarray(0, T), b * T);
  into.attentionMask.set(ex.attentionMask.subarray(0, T), b * T);
}

// ---- data order ----------------------------------------------------------------

/** Where the next update starts reading: plain data, saved with checkpoints. */
export interface DataOrder {
  /** 0-based epoch */
  epoch: number;
  /** position in that epoch's permutation of the next feature to read */
  index: number;
}

/** The permutation epoch `epoch` reads the N features in. */
export function epochOrder(count: number, seed: number, epoch: number): Uint32Array {
  return shuffledOrder(count, seedAt(seed, 'shuffle', epoch));
}

/** The data position at the start of update `update` (each epoch holds U updates). */
export function orderAtUpdate(plan: Pick<TrainPlan, 'updatesPerEpoch' | 'featuresPerUpdate'>, update: number): DataOrder {
  return {
    epoch: Math.floor(update / plan.updatesPerEpoch),
    index: (update % plan.updatesPerEpoch) * plan.featuresPerUpdate,
  };
}

/** Hands out the micro-batch groups of one update at a time, in the seeded order. */
export class UpdateSampler<T> {
  private readonly items: readonly T[];
  private readonly plan: TrainPlan;
  private readonly seed: number;
  private cachedEpoch = -1;
  private cachedOrder: Uint32Array = new Uint32Array(0);

  constructor(items: readonly T[], plan: TrainPlan, seed: number) {
    if (items.length !== plan.features) {
      throw new RangeError(`UpdateSampler: the plan counts ${plan.features} features but ${items.length} were given`);
    }
    this.items = items;
    this.plan = plan;
    this.seed = seed;
  }

  /**
   * The micro-batches of the update starting at `order`: up to A groups of up to b
   * items (the last update of an epoch may be short), and where the next update starts.
   */
  take(order: DataOrder): { groups: T[][]; next: DataOrder } {
    const { features: N, batchSize: b, featuresPerUpdate } = this.plan;
    if (!Number.isInteger(order.index) || order.index < 0 || order.index >= N) {
      throw new RangeError(`UpdateSampler.take: data position ${order.index} is outside the epoch [0, ${N})`);
    }
    const permutation = this.orderOf(order.epoch);
    const end = Math.min(N, order.index + featuresPerUpdate);
    const groups: T[][] = [];
    for (let start = order.index; start < end; start += b) {
      const group: T[] = [];
      for (let i = start; i < Math.min(end, start + b); i++) group.push(this.items[permutation[i]]);
      groups.push(group);
    }
    const next = end >= N ? { epoch: order.epoch + 1, index: 0 } : { epoch: order.epoch, index: end };
    return { groups, next };
  }

  private orderOf(epoch: number): Uint32Array {
    if (epoch !== this.cachedEpoch) {
      this.cachedOrder = epochOrder(this.items.length, this.seed, epoch);
      this.cachedEpoch = epoch;
    }
    return this.cachedOrder;
  }
}
