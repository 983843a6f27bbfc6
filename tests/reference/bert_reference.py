"""The reader's architecture in plain PyTorch: the reference the engine is tested against.

Written for Spanwright from the architecture in DEVELOPERS.md ("Architecture") and the
BERT paper (Devlin et al. 2019); no `transformers` package is involved. Parameters are
a dict keyed by the common BERT checkpoint names, Linear weights [out, in] as
torch.nn.Linear stores them, so `x @ W.T + b` is torch.nn.functional.linear.

Run with Debian's python3-torch (/usr/bin/python3).
"""

import math

import torch
import torch.nn.functional as F

MASKED_SCORE = -10000.0  # BERT's (1 - mask) * -10000 on attention scores
SPAN_MASKED_LOGIT = -10000.0  # added to span logits outside context + [CLS]


def gelu(x, activation):
    if activation == "gelu":
        return 0.5 * x * (1.0 + torch.erf(x / math.sqrt(2.0)))  # exact GELU
    if activation == "gelu_sigmoid":
        return x * torch.sigmoid(1.702 * x)
    raise ValueError(f"unknown activation {activation}")


def layer_norm(p, name, x, eps):
    return F.layer_norm(x, x.shape[-1:], p[f"{name}.weight"], p[f"{name}.bias"], eps)


def linear(p, name, x):
    return F.linear(x, p[f"{name}.weight"], p[f"{name}.bias"])


def encode(p, cfg, input_ids, token_type_ids, attention_mask):
    """Post-LN BERT encoder; returns [B, T, H]. Dropout is off (the fixtures use none)."""
    B, T = input_ids.shape
    H, N = cfg["hidden_size"], cfg["num_attention_heads"]
    D = H // N
    eps = cfg["layer_norm_eps"]
    act = cfg["activation"]
    x = (
        p["bert.embeddings.word_embeddings.weight"][input_ids]
        + p["bert.embeddings.position_embeddings.weight"][:T][None]
        + p["bert.embeddings.token_type_embeddings.weight"][token_type_ids]
    )
    x = layer_norm(p, "bert.embeddings.LayerNorm", x, eps)
    mask_bias = (1.0 - attention_mask.to(x.dtype))[:, None, None, :] * MASKED_SCORE  # [B, 1, 1, T]
    for i in range(cfg["num_hidden_layers"]):
        layer = f"bert.encoder.layer.{i}"

        def heads(t):
            return t.view(B, T, N, D).permute(0, 2, 1, 3)  # [B, N, T, D]

        q = heads(linear(p, f"{layer}.attention.self.query", x))
        k = heads(linear(p, f"{layer}.attention.self.key", x))
        v = heads(linear(p, f"{layer}.attention.self.value", x))
        scores = q @ k.transpose(-1, -2) / math.sqrt(D) + mask_bias  # [B, N, T, T]
        probs = torch.softmax(scores, dim=-1)
        context = (probs @ v).permute(0, 2, 1, 3).reshape(B, T, H)
        a = layer_norm(p, f"{layer}.attention.output.LayerNorm", x + linear(p, f"{layer}.attention.output.dense", context), eps)
        inner = gelu(linear(p, f"{layer}.intermediate.dense", a), act)
        x = layer_norm(p, f"{layer}.output.LayerNorm", a + linear(p, f"{layer}.output.dense", inner), eps)
    return x


def span_logits(p, cfg, input_ids, token_type_ids, attention_mask):
    logits = linear(p, "qa_outputs", encode(p, cfg, input_ids, token_type_ids, attention_mask))  # [B, T, 2]
    return logits[..., 0], logits[..., 1]


def mlm_logits(p, cfg, input_ids, token_type_ids, attention_mask):
    h = encode(p, cfg, input_ids, token_type_ids, attention_mask)
    h = gelu(linear(p, "cls.predictions.transform.dense", h), cfg["activation"])
    h = layer_norm(p, "cls.predictions.transform.LayerNorm", h, cfg["layer_norm_eps"])
    return h @ p["bert.embeddings.word_embeddings.weight"].T + p["cls.predictions.bias"]  # [B, T, V]


def span_allowed(attention_mask, token_type_ids):
    """Positions a span may start or end at: context tokens (type 1, not padding) and [CLS] (0)."""
    allowed = (attention_mask == 1) & (token_type_ids == 1)
    allowed[:, 0] = True
    return allowed


def span_loss(start, end, start_positions, end_positions, allowed=None):
    """Mean of start and end cross-entropy; `allowed` (bool [B, T]) masks the softmax."""
    if allowed is not None:
        bias = (~allowed).to(start.dtype) * SPAN_MASKED_LOGIT
        start = start + bias
        end = end + bias
    return (F.cross_entropy(start, start_positions) + F.cross_entropy(end, end_positions)) / 2


def mlm_loss(logits, labels):
    """Mean cross-entropy over positions whose label is not -100."""
    return F.cross_entropy(logits.reshape(-1, logits.shape[-1]), labels.reshape(-1), ignore_index=-100)


def no_decay(name):
    """DEVELOPERS.md: no weight decay on biases and LayerNorm parameters."""
    return name.endswith(".bias") or "LayerNorm" in name


def lr_lambda(total, warmup):
    """DEVELOPERS.md: lr(k) = k/W for k < W, else max(0, (S - k) / (S - W))."""

    def f(k):
        if k < warmup:
            return k / warmup
        return max(0.0, (total - k) / (total - warmup))

    return f


def trunc_normal(shape, std, generator, dtype=torch.float32):
    """N(0, std^2) cut at +-2 std by resampling, as the engine's init."""
    w = torch.randn(shape, generator=generator, dtype=dtype)
    while True:
        out = w.abs() > 2
        if not out.any():
            return w * std
        w[out] = torch.randn(int(out.sum()), generator=generator, dtype=dtype)
