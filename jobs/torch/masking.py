# defines: seed_for, seed_at, Mulberry32, mulberry32_draws, mask_rows — the engine's
# seeded draws in Python, so a masked-LM job masks every micro-batch exactly as the engine
# would (src/model/random.ts seedFor, src/train/random.ts seedAt, src/data/random.ts
# mulberry32, src/train/batches.ts collateMlm):
#
#   seed_for(s, label)   FNV-1a over the label's characters, folded with s, then the
#                        MurmurHash3 finaliser
#   Mulberry32           state advanced by a Weyl step (+0x6d2b79f5), mixed by
#                        multiply–xorshift rounds; draw n depends on n alone, so the first
#                        draws of a batch are computed together (mulberry32_draws)
#   mask_rows            BERT's masking: each real, non-special token chosen when its draw
#                        is below p; none chosen → one eligible token picked; each chosen
#                        token then becomes [MASK] (roll < 0.8), a random id (roll < 0.9,
#                        one more draw) or stays
#
# All arithmetic is on unsigned 32-bit values held in Python ints or int64 tensors.

import torch

M32 = 0xFFFFFFFF
WEYL = 0x6D2B79F5


def seed_for(seed, label):
    h = (0x811C9DC5 ^ (seed & M32)) & M32
    for ch in label:
        h = ((h ^ ord(ch)) * 0x01000193) & M32
    h ^= h >> 16
    h = (h * 0x85EBCA6B) & M32
    h ^= h >> 13
    h = (h * 0xC2B2AE35) & M32
    h ^= h >> 16
    return h


def seed_at(run_seed, what, *place):
    """The seed of one use at one place (update, micro-batch), as the engine's seedAt."""
    return seed_for(run_seed, f"{what}/{'/'.join(str(p) for p in place)}")


def _mix(t, imul):
    t = imul(t ^ (t >> 15), t | 1)
    t = t ^ ((t + imul(t ^ (t >> 7), t | 61)) & M32)
    return (t ^ (t >> 14)) & M32


class Mulberry32:
    """Draws in [0, 1), one at a time; `skip` draws already taken elsewhere."""

    def __init__(self, seed, skip=0):
        self.state = (seed + skip * WEYL) & M32

    def __call__(self):
        self.state = (self.state + WEYL) & M32
        return _mix(self.state, lambda a, b: (a * b) & M32) / 4294967296.0


def _imul_tensor(a, b):
    """(a · b) mod 2³² for int64 tensors of 32-bit values, in 16-bit halves so nothing overflows."""
    return ((a * (b & 0xFFFF)) + (((a * (b >> 16)) & 0xFFFF) << 16)) & M32


def mulberry32_draws(seed, count):
    """The first `count` draws of Mulberry32(seed), as float64 [count]."""
    n = torch.arange(1, count + 1, dtype=torch.int64)
    state = ((seed & M32) + n * WEYL) & M32
    return _mix(state, _imul_tensor).to(torch.float64) / 4294967296.0


def mask_rows(ids, attention, masking, seed):
    """ids, attention: int64 [B, T]. Returns (masked ids [B, T], predicted flat positions [M], labels [M])."""
    flat = ids.reshape(-1).clone()
    special = torch.tensor(masking["specialIds"], dtype=flat.dtype)
    eligible = ((attention.reshape(-1) == 1) & ~torch.isin(flat, special)).nonzero().flatten()
    n = len(eligible)
    if n == 0:
        raise ValueError("a micro-batch has no token that could be masked")
    chosen = eligible[mulberry32_draws(seed, n) < masking["probability"]]
    g = Mulberry32(seed, skip=n)
    if len(chosen) == 0:
        chosen = eligible[int(g() * n)].reshape(1)
    labels = flat[chosen].clone()
    mask_id, vocab = masking["maskId"], masking["vocabSize"]
    for i in chosen.tolist():
        roll = g()
        if roll < 0.8:
            flat[i] = mask_id
        elif roll < 0.9:
            flat[i] = int(g() * vocab)
    return flat.reshape(ids.shape), chosen, labels
