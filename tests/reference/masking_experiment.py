"""Should the span loss mask padding and question positions out of its softmax?

An experiment, not a check: the same reader (bert_reference.py) trained from the same
seeds twice, once with the span softmax over all T positions, once over context tokens
plus [CLS] only (the others get -10000). The task is synthetic (invented here, used
for nothing but this comparison): the question is three word tokens; when the context
contains them, the answer is the two tokens that follow; otherwise the answer is
[CLS]. Decoding is the same for both runs and, as the engine's decoder does, looks
only at context positions and [CLS].

Result (recorded in src/train/losses.ts): no gain from masking; the unmasked run
reached EM 0.98 by update 10 (masked 0.26) and ended with the lower held-out loss.

Reported per run: the held-out exact match over training, and the held-out loss as
the decoder sees it (softmax over context + [CLS] only) for both runs, so the numbers
are comparable; the unmasked run's own training loss is higher by construction.

    /usr/bin/python3 tests/reference/masking_experiment.py
"""

import random
import sys

import torch

sys.path.insert(0, __file__.rsplit("/", 1)[0])
import bert_reference as ref  # noqa: E402

PAD, UNK, CLS, SEP = 0, 1, 2, 3
V, T = 60, 40
CFG = dict(hidden_size=64, num_hidden_layers=2, num_attention_heads=2, intermediate_size=256,
           layer_norm_eps=1e-12, activation="gelu")


def make_example(rng):
    marker = 5
    question = [marker, rng.randrange(6, V)]
    rng.shuffle(question)
    length = rng.randrange(10, 31)
    context = [rng.randrange(6, V) for _ in range(length)]
    answerable = rng.random() < 0.8
    if answerable:
        at = rng.randrange(0, length)
        context[at] = marker
    ids = [CLS] + question + [SEP] + context + [SEP]
    types = [0] * 4 + [1] * (length + 1)
    if answerable:
        start = end = 4 + at
    else:
        start = end = 0
    pad = T - len(ids)
    return ids + [PAD] * pad, types + [0] * pad, [1] * len(ids) + [0] * pad, start, end


def batch(rng, n):
    rows = [make_example(rng) for _ in range(n)]
    cols = list(zip(*rows))
    return [torch.tensor(c) for c in cols]


def init_params(seed):
    g = torch.Generator().manual_seed(seed)
    H, I = CFG["hidden_size"], CFG["intermediate_size"]
    shapes = {
        "bert.embeddings.word_embeddings.weight": (V, H),
        "bert.embeddings.position_embeddings.weight": (T, H),
        "bert.embeddings.token_type_embeddings.weight": (2, H),
    }
    for i in range(CFG["num_hidden_layers"]):
        layer = f"bert.encoder.layer.{i}"
        for n in ["attention.self.query", "attention.self.key", "attention.self.value", "attention.output.dense"]:
            shapes[f"{layer}.{n}.weight"] = (H, H)
        shapes[f"{layer}.intermediate.dense.weight"] = (I, H)
        shapes[f"{layer}.output.dense.weight"] = (H, I)
    shapes["qa_outputs.weight"] = (2, H)
    p = {}
    for name, shape in shapes.items():
        w = ref.trunc_normal(shape, 0.02, g)
        p[name] = w
        if name.endswith(".weight") and "embeddings" not in name:
            p[name[: -len("weight")] + "bias"] = torch.zeros(shape[0])
    for ln in ["bert.embeddings.LayerNorm"] + [f"bert.encoder.layer.{i}.{n}.LayerNorm" for i in range(CFG["num_hidden_layers"]) for n in ["attention.output", "output"]]:
        p[f"{ln}.weight"] = torch.ones(CFG["hidden_size"])
        p[f"{ln}.bias"] = torch.zeros(CFG["hidden_size"])
    for t in p.values():
        t.requires_grad_(True)
    return p


def decode(start, end, allowed):
    """Best span (start <= end, length <= 10) among allowed positions, or [CLS] if its score wins."""
    s = start.masked_fill(~allowed, -1e9)
    e = end.masked_fill(~allowed, -1e9)
    scores = s[:, :, None] + e[:, None, :]  # [B, T, T]
    Tn = start.shape[1]
    idx = torch.arange(Tn)
    valid = (idx[None, :] >= idx[:, None]) & (idx[None, :] - idx[:, None] < 10)
    valid[0, :] = False
    valid[:, 0] = False
    scores = scores.masked_fill(~valid[None], -1e9)
    best = scores.flatten(1).argmax(1)
    bs, be = best // Tn, best % Tn
    null = start[:, 0] + end[:, 0]
    span_score = scores.flatten(1).max(1).values
    bs = torch.where(null > span_score, torch.zeros_like(bs), bs)
    be = torch.where(null > span_score, torch.zeros_like(be), be)
    return bs, be


def run(seed, masked, steps=100, bsz=32, lr=2e-3):
    torch.manual_seed(seed)
    p = init_params(seed)
    groups = [
        {"params": [t for n, t in p.items() if not ref.no_decay(n)], "weight_decay": 0.01},
        {"params": [t for n, t in p.items() if ref.no_decay(n)], "weight_decay": 0.0},
    ]
    opt = torch.optim.AdamW(groups, lr=lr, eps=1e-6)
    sched = torch.optim.lr_scheduler.LambdaLR(opt, ref.lr_lambda(steps, steps // 10))
    train_rng = random.Random(seed)
    held = batch(random.Random(10_000 + seed), 256)
    curve = []
    for k in range(steps + 1):
        if k % 10 == 0:
            with torch.no_grad():
                ids, tt, am, sp, ep = held
                s, e = ref.span_logits(p, CFG, ids, tt, am)
                allowed = ref.span_allowed(am, tt)
                decoder_loss = ref.span_loss(s, e, sp, ep, allowed).item()
                ps, pe = decode(s, e, allowed)
                em = ((ps == sp) & (pe == ep)).float().mean().item()
                curve.append((k, decoder_loss, em))
        if k == steps:
            break
        ids, tt, am, sp, ep = batch(train_rng, bsz)
        s, e = ref.span_logits(p, CFG, ids, tt, am)
        loss = ref.span_loss(s, e, sp, ep, ref.span_allowed(am, tt) if masked else None)
        opt.zero_grad()
        loss.backward()
        torch.nn.utils.clip_grad_norm_([t for t in p.values()], 1.0)
        opt.step()
        sched.step()
    return curve


def main():
    torch.set_num_threads(1)
    seeds = [1, 2, 3]
    results = {}
    for masked in (False, True):
        results[masked] = [run(s, masked) for s in seeds]
    print("step | unmasked-softmax run: held-out loss (context + [CLS]) / EM | masked run: held-out loss (context + [CLS]) / EM   (mean of seeds", seeds, ")")
    for i, (k, _, _) in enumerate(results[False][0]):
        row = []
        for masked in (False, True):
            losses = [r[i][1] for r in results[masked]]
            ems = [r[i][2] for r in results[masked]]
            row.append(f"{sum(losses) / len(losses):7.3f} / {sum(ems) / len(ems):.3f}")
        print(f"{k:4d} | {row[0]} | {row[1]}")
    print("per-seed final EM: unmasked", [round(r[-1][2], 3) for r in results[False]], "masked", [round(r[-1][2], 3) for r in results[True]])


if __name__ == "__main__":
    main()
