// defines: seedAt, shuffledOrder — the randomness of training outside tfjs.
//
// Every random choice in a run is derived from the run seed plus *where* it is made
// (epoch, update, micro-batch), never from a stream that has been running since the
// start. That is what lets a run resumed at update k draw exactly what an
// uninterrupted run draws at update k, with no generator state to save.
//
// Built from the project's two shared pieces: seeds derived by the model's `seedFor`
// (src/model/random.ts, also behind initialisation and dropout sites) and the
// generator and shuffle of src/data/random.ts (also behind the train/validation split).

import { mulberry32, shuffleInPlace } from '../data/random.js';
import { seedFor } from '../model/random.js';

/** The seed for one use (`what`: 'shuffle', 'dropout', 'mlm') at one place (epoch, update, micro-batch). */
export function seedAt(runSeed: number, what: string, ...place: number[]): number {
  return seedFor(runSeed, `${what}/${place.join('/')}`);
}

/** A permutation of 0..count-1, fixed by `seed` (Fisher–Yates over Mulberry32). */
export function shuffledOrder(count: number, seed: number): Uint32Array {
  const order = Array.from({ length: count }, (_, i) => i);
  return Uint32Array.from(shuffleInPlace(order, mulberry32(seed)));
}
