"""PyTorch reference for the engine benchmark: one span fine-tuning step of the same
post-LayerNorm BERT encoder (DEVELOPERS.md "Architecture"), on --threads CPU threads
(torch.set_num_threads; default 1). Debian's torch does its matrix products in
OpenBLAS, whose own threads OPENBLAS_NUM_THREADS sets before the start (the bench
tries the combinations, tests/bench/engine.ts).

Run: /usr/bin/python3 tests/bench/torch_step.py --layers 2 --hidden 128 --heads 2 \
         --intermediate 512 --seq 256 --batch 16 --vocab 30522 [--steps 3] [--threads 1]
Prints one JSON line: {"tokens_per_s": ..., "step_s": ..., "times_s": [...], "threads": ..., "torch": "<version>"}.

The step mirrors src/train/trainer.ts: forward with dropout 0.1 (hidden and attention),
start/end cross-entropy over [CLS] + context positions, backward, global-norm clipping
at 1.0, AdamW (lr 1e-4, weight decay 0.01 except biases and LayerNorm). Weights are
random (the speed does not depend on them); the batch is synthetic ids, every token real.
"""
import argparse
import json
import math
import time

import torch
import torch.nn.functional as F


class Layer(torch.nn.Module):
    def __init__(self, h, n, i, p):
        super().__init__()
        self.n, self.d, self.p = n, h // n, p
        self.q, self.k, self.v, self.o = (torch.nn.Linear(h, h) for _ in range(4))
        self.ln1, self.ln2 = torch.nn.LayerNorm(h, eps=1e-12), torch.nn.LayerNorm(h, eps=1e-12)
        self.w1, self.w2 = torch.nn.Linear(h, i), torch.nn.Linear(i, h)

    def forward(self, x, bias):  # x [B, T, H], bias [B, 1, 1, T]
        b, t, h = x.shape
        heads = lambda y: y.view(b, t, self.n, self.d).transpose(1, 2)  # [B, N, T, D]
        q, k, v = heads(self.q(x)), heads(self.k(x)), heads(self.v(x))
        scores = q @ k.transpose(-1, -2) / math.sqrt(self.d) + bias  # [B, N, T, T]
        probs = F.dropout(scores.softmax(-1), self.p, self.training)
        ctx = (probs @ v).transpose(1, 2).reshape(b, t, h)
        a = self.ln1(x + F.dropout(self.o(ctx), self.p, self.training))
        f = self.w2(F.gelu(self.w1(a)))  # exact (erf) GELU, torch's default
        return self.ln2(a + F.dropout(f, self.p, self.training))


class Reader(torch.nn.Module):
    def __init__(self, v, h, layers, n, i, positions=512, p=0.1):
        super().__init__()
        self.word = torch.nn.Embedding(v, h)
        self.pos = torch.nn.Embedding(positions, h)
        self.token_type = torch.nn.Embedding(2, h)
        self.ln = torch.nn.LayerNorm(h, eps=1e-12)
        self.layers = torch.nn.ModuleList(Layer(h, n, i, p) for _ in range(layers))
        self.qa = torch.nn.Linear(h, 2)
        self.p = p

    def forward(self, ids, types, mask):
        t = ids.shape[1]
        x = self.word(ids) + self.pos.weight[:t] + self.token_type(types)
        x = F.dropout(self.ln(x), self.p, self.training)
        bias = ((1.0 - mask.float()) * -10000.0)[:, None, None, :]
        for layer in self.layers:
            x = layer(x, bias)
        start, end = self.qa(x).unbind(-1)
        return start, end


def main():
    ap = argparse.ArgumentParser()
    for name, default in [("layers", 2), ("hidden", 128), ("heads", 2), ("intermediate", 512),
                          ("seq", 256), ("batch", 16), ("vocab", 30522), ("steps", 3), ("threads", 1)]:
        ap.add_argument(f"--{name}", type=int, default=default)
    a = ap.parse_args()
    torch.set_num_threads(a.threads)
    torch.manual_seed(0)
    model = Reader(a.vocab, a.hidden, a.layers, a.heads, a.intermediate)
    model.train()
    decay = [p for n, p in model.named_parameters() if not (n.endswith("bias") or "ln" in n)]
    no_decay = [p for n, p in model.named_parameters() if n.endswith("bias") or "ln" in n]
    opt = torch.optim.AdamW([{"params": decay, "weight_decay": 0.01},
                             {"params": no_decay, "weight_decay": 0.0}], lr=1e-4, eps=1e-6)
    b, t = a.batch, a.seq
    ids = torch.randint(5, a.vocab, (b, t))
    types = (torch.arange(t) > t // 4).long().expand(b, t)
    mask = torch.ones(b, t, dtype=torch.long)
    allowed = (types == 1) | (torch.arange(t) == 0)
    span_bias = (~allowed).float() * -10000.0
    sp = torch.full((b,), t // 2)
    ep = torch.full((b,), t // 2 + 2)

    def step():
        opt.zero_grad(set_to_none=True)
        start, end = model(ids, types, mask)
        loss = (F.cross_entropy(start + span_bias, sp) + F.cross_entropy(end + span_bias, ep)) / 2
        loss.backward()
        torch.nn.utils.clip_grad_norm_(model.parameters(), 1.0)
        opt.step()
        return loss.item()

    step()  # warmup: allocations, optimizer state
    times = []
    for _ in range(a.steps):
        t0 = time.perf_counter()
        step()
        times.append(time.perf_counter() - t0)
    times.sort()
    median = times[len(times) // 2]
    print(json.dumps({"tokens_per_s": b * t / median, "step_s": median, "times_s": times,
                      "threads": torch.get_num_threads(), "torch": torch.__version__}))


if __name__ == "__main__":
    main()
