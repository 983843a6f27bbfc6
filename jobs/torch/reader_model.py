# defines: SpanReader (the reader as a torch.nn.Module), MaskedLmReader (the same encoder
# with the masked-LM head), span_loss, mlm_loss, config_from_hf — the model math of
# Spanwright's engine (src/model/encoder.ts, src/train/losses.ts) for a job folder.
#
# Adapted from tests/reference/bert_reference.py, the PyTorch mirror the engine is tested
# against, into modules so DistributedDataParallel can wrap them and dropout can run.
# Post-LayerNorm BERT (Devlin et al. 2019):
#   x = dropout(LN(word[ids] + pos[0..T) + type[tt]))
#   per layer:  a = LN(x + dropout(Wo·MHA(x)))          (dropout on the attention probabilities too)
#               x = LN(a + dropout(W2·act(W1·a)))
#   span head:  [start, end] = x·Wqa + bqa
# Module attributes follow the common BERT checkpoint naming, so `state_dict()` keys are
# the names the engine's checkpoints use ("bert.encoder.layer.0.attention.self.query.weight").
# Token types are the word-match types when the base's config asks for them
# (spanwright_question_match; type_vocab_size 5): the windows carry them already.
#
# Shapes: B batch, T tokens, H hidden, N heads, D head size, V vocabulary.

import math

import torch
import torch.nn as nn
import torch.nn.functional as F

MASKED_SCORE = -10000.0  # added to attention scores of padding keys: BERT's (1 - mask) * -10000
SPAN_MASKED_LOGIT = -10000.0  # added to span logits of padding: padding is never an answer


def config_from_hf(hf, path="config.json"):
    """The fields of an HF-style config.json the model needs, checked; errors name the file and key."""
    def need(key):
        if key not in hf or not isinstance(hf[key], (int, float)):
            raise ValueError(f"{path}: missing or non-numeric \"{key}\"")
        return hf[key]

    act = hf.get("hidden_act", "gelu")
    if act not in ("gelu", "quick_gelu", "gelu_sigmoid"):
        raise ValueError(f"{path}: \"hidden_act\" {act!r} is not one this program runs (gelu, quick_gelu)")
    cfg = dict(
        vocab_size=int(need("vocab_size")),
        hidden_size=int(need("hidden_size")),
        num_hidden_layers=int(need("num_hidden_layers")),
        num_attention_heads=int(need("num_attention_heads")),
        intermediate_size=int(need("intermediate_size")),
        max_position_embeddings=int(hf.get("max_position_embeddings", 512)),
        type_vocab_size=int(hf.get("type_vocab_size", 2)),
        hidden_dropout=float(hf.get("hidden_dropout_prob", 0.1)),
        attention_dropout=float(hf.get("attention_probs_dropout_prob", 0.1)),
        layer_norm_eps=float(hf.get("layer_norm_eps", 1e-12)),
        activation="gelu" if act == "gelu" else "gelu_sigmoid",
    )
    if cfg["hidden_size"] % cfg["num_attention_heads"] != 0:
        raise ValueError(f"{path}: hidden_size {cfg['hidden_size']} is not a multiple of num_attention_heads {cfg['num_attention_heads']}")
    return cfg


def activation(x, kind):
    if kind == "gelu":
        return 0.5 * x * (1.0 + torch.erf(x / math.sqrt(2.0)))  # exact GELU, as BERT
    return x * torch.sigmoid(1.702 * x)  # its sigmoid form (Hendrycks & Gimpel 2016)


# ---- small parts ----------------------------------------------------------------------


class Embeddings(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        H = cfg["hidden_size"]
        self.word_embeddings = nn.Embedding(cfg["vocab_size"], H)
        self.position_embeddings = nn.Embedding(cfg["max_position_embeddings"], H)
        self.token_type_embeddings = nn.Embedding(cfg["type_vocab_size"], H)
        self.LayerNorm = nn.LayerNorm(H, eps=cfg["layer_norm_eps"])
        self.dropout = nn.Dropout(cfg["hidden_dropout"])

    def forward(self, input_ids, token_type_ids):
        T = input_ids.shape[1]
        positions = torch.arange(T, device=input_ids.device)
        x = self.word_embeddings(input_ids) + self.position_embeddings(positions)[None] + self.token_type_embeddings(token_type_ids)
        return self.dropout(self.LayerNorm(x))  # [B, T, H]


class SelfAttention(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        H = cfg["hidden_size"]
        self.heads = cfg["num_attention_heads"]
        self.query = nn.Linear(H, H)
        self.key = nn.Linear(H, H)
        self.value = nn.Linear(H, H)
        self.dropout = nn.Dropout(cfg["attention_dropout"])

    def forward(self, x, key_bias):
        B, T, H = x.shape
        N = self.heads
        D = H // N

        def split(t):
            return t.view(B, T, N, D).permute(0, 2, 1, 3)  # [B, N, T, D]

        q, k, v = split(self.query(x)), split(self.key(x)), split(self.value(x))
        scores = q @ k.transpose(-1, -2) / math.sqrt(D) + key_bias  # [B, N, T, T]
        probs = self.dropout(torch.softmax(scores, dim=-1))
        return (probs @ v).permute(0, 2, 1, 3).reshape(B, T, H)  # [B, T, H]


class AttentionOutput(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        H = cfg["hidden_size"]
        self.dense = nn.Linear(H, H)
        self.LayerNorm = nn.LayerNorm(H, eps=cfg["layer_norm_eps"])
        self.dropout = nn.Dropout(cfg["hidden_dropout"])

    def forward(self, context, x):
        return self.LayerNorm(x + self.dropout(self.dense(context)))


class Attention(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        # `self` is BERT's own name for this part; the attribute keeps the checkpoint naming
        self.self = SelfAttention(cfg)
        self.output = AttentionOutput(cfg)

    def forward(self, x, key_bias):
        return self.output(self.self(x, key_bias), x)


class Intermediate(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        self.dense = nn.Linear(cfg["hidden_size"], cfg["intermediate_size"])
        self.kind = cfg["activation"]

    def forward(self, a):
        return activation(self.dense(a), self.kind)  # [B, T, I]


class Output(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        H = cfg["hidden_size"]
        self.dense = nn.Linear(cfg["intermediate_size"], H)
        self.LayerNorm = nn.LayerNorm(H, eps=cfg["layer_norm_eps"])
        self.dropout = nn.Dropout(cfg["hidden_dropout"])

    def forward(self, inner, a):
        return self.LayerNorm(a + self.dropout(self.dense(inner)))


# ---- the encoder layer, the encoder, the heads ------------------------------------------


class Layer(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        self.attention = Attention(cfg)
        self.intermediate = Intermediate(cfg)
        self.output = Output(cfg)

    def forward(self, x, key_bias):
        a = self.attention(x, key_bias)
        return self.output(self.intermediate(a), a)


class Encoder(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        self.layer = nn.ModuleList([Layer(cfg) for _ in range(cfg["num_hidden_layers"])])


class Bert(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        self.embeddings = Embeddings(cfg)
        self.encoder = Encoder(cfg)

    def forward(self, input_ids, token_type_ids, attention_mask):
        key_bias = (1.0 - attention_mask.to(torch.float32))[:, None, None, :] * MASKED_SCORE  # [B, 1, 1, T]
        x = self.embeddings(input_ids, token_type_ids)
        for layer in self.encoder.layer:
            x = layer(x, key_bias)
        return x  # [B, T, H]


class SpanReader(nn.Module):
    """The encoder and the span head: start and end logits [B, T]."""

    def __init__(self, cfg):
        super().__init__()
        self.bert = Bert(cfg)
        self.qa_outputs = nn.Linear(cfg["hidden_size"], 2)

    def forward(self, input_ids, token_type_ids, attention_mask):
        logits = self.qa_outputs(self.bert(input_ids, token_type_ids, attention_mask))  # [B, T, 2]
        return logits[..., 0], logits[..., 1]


class PredictionTransform(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        H = cfg["hidden_size"]
        self.dense = nn.Linear(H, H)
        self.LayerNorm = nn.LayerNorm(H, eps=cfg["layer_norm_eps"])
        self.kind = cfg["activation"]

    def forward(self, h):
        return self.LayerNorm(activation(self.dense(h), self.kind))


class Predictions(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        self.transform = PredictionTransform(cfg)
        self.bias = nn.Parameter(torch.zeros(cfg["vocab_size"]))


class MlmHead(nn.Module):
    def __init__(self, cfg):
        super().__init__()
        self.predictions = Predictions(cfg)


class MaskedLmReader(nn.Module):
    """The encoder and the masked-LM head, its decoder tied to the word embeddings (as BERT's)."""

    def __init__(self, cfg):
        super().__init__()
        self.bert = Bert(cfg)
        self.cls = MlmHead(cfg)

    def forward(self, input_ids, token_type_ids, attention_mask, positions):
        """Logits [M, V] at `positions` (flat indices into [B·T]) only, as the engine's mlmLogitsAt."""
        h = self.bert(input_ids, token_type_ids, attention_mask)  # [B, T, H]
        h = h.reshape(-1, h.shape[-1])[positions]  # [M, H]
        h = self.cls.predictions.transform(h)
        return h @ self.bert.embeddings.word_embeddings.weight.T + self.cls.predictions.bias  # [M, V]


# ---- losses -------------------------------------------------------------------------------


def span_loss(start, end, start_positions, end_positions, attention_mask):
    """(CE(start) + CE(end)) / 2, batch means, padding left out of the softmax (src/train/losses.ts)."""
    bias = (1.0 - attention_mask.to(start.dtype)) * SPAN_MASKED_LOGIT  # [B, T]
    return (F.cross_entropy(start + bias, start_positions) + F.cross_entropy(end + bias, end_positions)) / 2


def mlm_loss(logits, labels):
    """Mean cross-entropy over the predicted positions ([M, V] against [M])."""
    return F.cross_entropy(logits, labels)


def no_decay(name):
    """No weight decay on biases and LayerNorm parameters (src/train/adamw.ts decaysWeight)."""
    return name.endswith(".bias") or "LayerNorm" in name
