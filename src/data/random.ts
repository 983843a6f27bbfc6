// defines: mulberry32, shuffleInPlace — a small seeded generator, so a seed makes a split
// (or anything else drawn from it) repeat exactly on every machine.

/**
 * Mulberry32 (Tommy Ettinger, 2017): a 32-bit state advanced by a Weyl step
 * (+0x6d2b79f5), then mixed by multiply–xorshift rounds. Returns floats in [0, 1)
 * with 32 random bits each. Not for cryptography.
 */
export function mulberry32(seed: number): () => number {
  let state = seed >>> 0;
  return () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 0x100000000;
  };
}

/** Fisher–Yates (Durstenfeld's in-place form): every order equally likely. */
export function shuffleInPlace<T>(items: T[], random: () => number): T[] {
  for (let i = items.length - 1; i > 0; i--) {
    const j = Math.floor(random() * (i + 1));
    [items[i], items[j]] = [items[j]!, items[i]!];
  }
  return items;
}
