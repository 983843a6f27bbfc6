// defines: seedFor, truncatedNormal — the randomness of weight initialisation.
//
// Each tensor draws from its own generator, seeded from the init seed and the tensor's
// name, so initialising one head afresh (a checkpoint without `qa_outputs`) gives the
// same values whatever else was loaded, and adding a tensor shifts no other.

import { mulberry32 } from '../data/random.js';

/** FNV-1a over the UTF-16 units of `label`, folded with `seed`, then the MurmurHash3 finaliser. */
export function seedFor(seed: number, label: string): number {
  let h = (0x811c9dc5 ^ (seed >>> 0)) >>> 0;
  for (let i = 0; i < label.length; i++) h = Math.imul(h ^ label.charCodeAt(i), 0x01000193) >>> 0;
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

/**
 * `count` draws from N(0, std²) cut at ±2σ by resampling (as `torch.nn.init.trunc_normal_`
 * with a = −2σ, b = 2σ; BERT's TF initialiser does the same). Normals by Box–Muller.
 */
export function truncatedNormal(count: number, std: number, seed: number): Float32Array {
  const uniform = mulberry32(seed);
  const out = new Float32Array(count);
  let i = 0;
  while (i < count) {
    // 1 − u keeps the logarithm's argument in (0, 1]
    const radius = Math.sqrt(-2 * Math.log(1 - uniform()));
    const angle = 2 * Math.PI * uniform();
    for (const z of [radius * Math.cos(angle), radius * Math.sin(angle)]) {
      if (i < count && Math.abs(z) <= 2) out[i++] = z * std;
    }
  }
  return out;
}
