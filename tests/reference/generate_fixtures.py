"""Golden fixtures for the reader, computed by PyTorch (Debian python3-torch).

    /usr/bin/python3 tests/reference/generate_fixtures.py

Deterministic: fixed seeds, fixed inputs, dropout 0, one thread. The reference
computes in float64 from weights that are exactly float32 values (drawn, then rounded
to float32), so the engine's float32 run starts from the very same weights and every
difference is the engine's float32 rounding or a bug. Outputs are written rounded to
float32 precision (9 significant digits for weights, 8 for results).

Writes tests/reference/fixtures/:
  model.json             config (engine + HF spelling), vocabulary, inputs, weights
  forward.json           start/end logits, span loss, MLM logits, MLM loss
  grads.json             d(span loss)/d(every parameter it reaches); d(MLM loss)/d(...)
  adamw.json             3 updates of torch.optim.AdamW + LambdaLR + clip_grad_norm_:
                         per-update lr, loss, grad norm, clipped?; parameters after
  checkpoint/            config.json, model.safetensors (hand-written), vocab.txt:
                         a QA checkpoint as a user would bring one (no MLM head)
  checkpoint_expected.json  inputs for that checkpoint and its start/end logits

Tensors in JSON are {"shape": [...], "data": [row-major numbers]}, Linear weights
[out, in] as torch.nn.Linear keeps them, names in the common BERT checkpoint naming.
"""

import json
import os
import struct
import sys

import numpy as np
import torch

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import bert_reference as ref  # noqa: E402

OUT = os.path.join(HERE, "fixtures")

# The training objective's span softmax runs over every real token ([CLS], question and
# context) and leaves padding out, as the engine's Trainer calls spanLoss with the
# attention mask only: padding is never an answer, and leaving it out makes trimming a
# batch to its longest sequence exact. Question tokens stay in, as BERT does
# (src/train/losses.ts and masking_experiment.py give the measurement). The variant
# masked to context + [CLS] is written too, for the option.
SPAN_SOFTMAX = "padding"

VOCAB = ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"] + [
    "the", "a", "of", "to", "and", "in", "is", "was", "what", "when", "where", "who", "which", "how",
    "river", "bridge", "city", "north", "south", "built", "year", "stone", "long", "old", "new",
    "water", "road", "tower", "hill", "market", "king", "queen", "church", "school", "mill",
    "##s", "##ed", "##ing", "##er", "##ly", "1", "2", "3", "4", "5", "6", "7", "8", "9", "0",
    ".", ",", "?", "'", "-", "by", "at", "on", "from",
]
assert len(VOCAB) == 64, len(VOCAB)

CONFIG = dict(
    vocab_size=len(VOCAB), hidden_size=32, num_hidden_layers=2, num_attention_heads=2,
    intermediate_size=64, max_position_embeddings=32, type_vocab_size=2, layer_norm_eps=1e-12,
    activation="gelu",
)

CLS, SEP, PAD, MASK = 2, 3, 0, 4


def engine_config(c):
    """The engine's ReaderConfig for an HF-style dict (src/model/config.ts)."""
    return dict(
        vocabSize=c["vocab_size"], hiddenSize=c["hidden_size"], numLayers=c["num_hidden_layers"],
        numHeads=c["num_attention_heads"], intermediateSize=c["intermediate_size"],
        maxPositions=c["max_position_embeddings"], typeVocabSize=c["type_vocab_size"],
        hiddenDropout=0.0, attentionDropout=0.0, layerNormEps=c["layer_norm_eps"],
        activation=c["activation"], initStd=0.02,
    )


def hf_config(c):
    return dict(
        architectures=["BertForQuestionAnswering"], model_type="bert",
        vocab_size=c["vocab_size"], hidden_size=c["hidden_size"], num_hidden_layers=c["num_hidden_layers"],
        num_attention_heads=c["num_attention_heads"], intermediate_size=c["intermediate_size"],
        max_position_embeddings=c["max_position_embeddings"], type_vocab_size=c["type_vocab_size"],
        hidden_dropout_prob=0.0, attention_probs_dropout_prob=0.0, layer_norm_eps=c["layer_norm_eps"],
        hidden_act="gelu", initializer_range=0.02, position_embedding_type="absolute",
    )


def param_shapes(c, heads=("span", "mlm")):
    V, H, I, P, Y = c["vocab_size"], c["hidden_size"], c["intermediate_size"], c["max_position_embeddings"], c["type_vocab_size"]
    s = {
        "bert.embeddings.word_embeddings.weight": (V, H),
        "bert.embeddings.position_embeddings.weight": (P, H),
        "bert.embeddings.token_type_embeddings.weight": (Y, H),
        "bert.embeddings.LayerNorm.weight": (H,), "bert.embeddings.LayerNorm.bias": (H,),
    }
    for i in range(c["num_hidden_layers"]):
        layer = f"bert.encoder.layer.{i}"
        for n in ["attention.self.query", "attention.self.key", "attention.self.value", "attention.output.dense"]:
            s[f"{layer}.{n}.weight"], s[f"{layer}.{n}.bias"] = (H, H), (H,)
        s[f"{layer}.attention.output.LayerNorm.weight"], s[f"{layer}.attention.output.LayerNorm.bias"] = (H,), (H,)
        s[f"{layer}.intermediate.dense.weight"], s[f"{layer}.intermediate.dense.bias"] = (I, H), (I,)
        s[f"{layer}.output.dense.weight"], s[f"{layer}.output.dense.bias"] = (H, I), (H,)
        s[f"{layer}.output.LayerNorm.weight"], s[f"{layer}.output.LayerNorm.bias"] = (H,), (H,)
    if "span" in heads:
        s["qa_outputs.weight"], s["qa_outputs.bias"] = (2, H), (2,)
    if "mlm" in heads:
        s["cls.predictions.transform.dense.weight"], s["cls.predictions.transform.dense.bias"] = (H, H), (H,)
        s["cls.predictions.transform.LayerNorm.weight"] = (H,)
        s["cls.predictions.transform.LayerNorm.bias"] = (H,)
        s["cls.predictions.bias"] = (V,)
    return s


def make_weights(c, seed, heads=("span", "mlm")):
    """Weights larger than BERT's init (σ 0.2 matrices, nonzero biases, LayerNorm scales
    around 1) so logits are O(1), attention is far from uniform and every bias and
    LayerNorm parameter shows in the outputs. Rounded to float32, held as float64."""
    g = torch.Generator().manual_seed(seed)
    p = {}
    for name, shape in param_shapes(c, heads).items():
        if "LayerNorm.weight" in name:
            w = 1.0 + 0.1 * torch.randn(shape, generator=g, dtype=torch.float64)
        elif name.endswith("bias"):
            w = 0.1 * torch.randn(shape, generator=g, dtype=torch.float64)
        else:
            w = ref.trunc_normal(shape, 0.2, g, dtype=torch.float64)
        p[name] = w.float().double().requires_grad_(True)
    return p


def make_inputs(T=24):
    """Three windows of `[CLS] question [SEP] context [SEP]` with padding: one full-length
    answerable, one padded answerable, one padded with no answer (positions 0)."""
    w = {t: i for i, t in enumerate(VOCAB)}
    examples = [
        (["when", "was", "the", "bridge", "built", "?"],
         ["the", "stone", "bridge", "was", "built", "in", "1", "8", "4", "##s", "by", "the", "north", "king", "."], (14, 17)),
        (["who", "built", "the", "mill", "?"],
         ["the", "queen", "built", "the", "old", "mill", "."], (8, 8)),
        (["where", "is", "the", "tower", "?"],
         ["the", "river", "is", "long", "."], (0, 0)),
    ]
    ids, types, mask, starts, ends = [], [], [], [], []
    for q, ctx, (s, e) in examples:
        row = [CLS] + [w.get(t, 1) for t in q] + [SEP]
        tt = [0] * len(row)
        row += [w.get(t, 1) for t in ctx] + [SEP]
        tt += [1] * (len(ctx) + 1)
        assert len(row) <= T, len(row)
        m = [1] * len(row) + [0] * (T - len(row))
        tt += [0] * (T - len(row))
        row += [PAD] * (T - len(row))
        ids.append(row), types.append(tt), mask.append(m), starts.append(s), ends.append(e)
    for b, (s, e) in enumerate(zip(starts, ends)):  # answers lie in the context, or [CLS]
        assert (s == 0 and e == 0) or (types[b][s] == 1 and types[b][e] == 1 and mask[b][e] == 1 and s <= e)
    return dict(input_ids=ids, token_type_ids=types, attention_mask=mask, start_positions=starts, end_positions=ends)


def mlm_inputs(inputs):
    """The same windows with some tokens replaced by [MASK]; labels are the originals, -100 elsewhere."""
    ids = [list(r) for r in inputs["input_ids"]]
    labels = [[-100] * len(r) for r in ids]
    for b, positions in enumerate([[2, 9, 12, 15], [3, 10], [1, 8, 9]]):
        for t in positions:
            labels[b][t] = ids[b][t]
            ids[b][t] = MASK
    labels[0][5] = ids[0][5]  # one labelled token left unmasked, as BERT's 10 % rule allows
    return ids, labels


def r9(x):
    return float("%.9g" % x)


def r8(x):
    return float("%.8g" % x)


def tensor_json(t, rnd=r8):
    a = t.detach().double().numpy()
    return {"shape": list(a.shape), "data": [rnd(v) for v in a.reshape(-1).tolist()]}


def write_json(name, obj):
    with open(os.path.join(OUT, name), "w") as f:
        json.dump(obj, f, separators=(",", ":"))
        f.write("\n")


def span_loss_of(p, inputs_t):
    ids, tt, am, sp, ep = inputs_t
    s, e = ref.span_logits(p, CONFIG, ids, tt, am)
    return ref.span_loss(s, e, sp, ep, am.bool() if SPAN_SOFTMAX == "padding" else None), s, e


def write_safetensors(path, tensors, metadata):
    """safetensors layout: u64 little-endian header length N, N bytes of JSON header
    ({name: {dtype, shape, data_offsets: [begin, end)}} offsets relative to the data
    area, plus "__metadata__"), padded with spaces to 8 bytes, then the raw data."""
    header = {"__metadata__": metadata}
    blobs = []
    offset = 0
    for name in sorted(tensors):
        a = np.ascontiguousarray(tensors[name].detach().numpy().astype("<f4"))
        raw = a.tobytes()
        header[name] = {"dtype": "F32", "shape": list(a.shape), "data_offsets": [offset, offset + len(raw)]}
        blobs.append(raw)
        offset += len(raw)
    text = json.dumps(header, separators=(",", ":")).encode("utf-8")
    text += b" " * ((8 - len(text) % 8) % 8)
    with open(path, "wb") as f:
        f.write(struct.pack("<Q", len(text)))
        f.write(text)
        for raw in blobs:
            f.write(raw)


def main():
    torch.set_num_threads(1)
    torch.manual_seed(0)
    os.makedirs(os.path.join(OUT, "checkpoint"), exist_ok=True)
    source = "PyTorch %s (Debian python3-torch), tests/reference/generate_fixtures.py, float64" % torch.__version__

    # ---- model, inputs ---------------------------------------------------------------
    p = make_weights(CONFIG, seed=1234)
    inputs = make_inputs()
    mlm_ids, mlm_labels = mlm_inputs(inputs)
    write_json("model.json", {
        "source": source,
        "note": "weights are float32 values; Linear weights [out, in]; dropout 0",
        "config": engine_config(CONFIG),
        "hf_config": hf_config(CONFIG),
        "vocab": VOCAB,
        "span_softmax": SPAN_SOFTMAX,
        "inputs": dict(inputs, mlm_input_ids=mlm_ids, mlm_labels=mlm_labels),
        "weights": {n: tensor_json(t, r9) for n, t in p.items()},
    })

    long = lambda k: torch.tensor(inputs[k], dtype=torch.long)  # noqa: E731
    inputs_t = (long("input_ids"), long("token_type_ids"), long("attention_mask"), long("start_positions"), long("end_positions"))

    # ---- forward + span gradients ----------------------------------------------------
    loss, start, end = span_loss_of(p, inputs_t)
    masked = ref.span_loss(start, end, inputs_t[3], inputs_t[4], ref.span_allowed(inputs_t[2], inputs_t[1]))
    names = list(p)
    grads = torch.autograd.grad(loss, [p[n] for n in names], allow_unused=True)
    span_grads = {n: tensor_json(g) for n, g in zip(names, grads) if g is not None}

    mlm_ids_t = torch.tensor(mlm_ids, dtype=torch.long)
    mlm_labels_t = torch.tensor(mlm_labels, dtype=torch.long)
    mlm = ref.mlm_logits(p, CONFIG, mlm_ids_t, inputs_t[1], inputs_t[2])
    mlm_loss = ref.mlm_loss(mlm, mlm_labels_t)
    mgrads = torch.autograd.grad(mlm_loss, [p[n] for n in names], allow_unused=True)
    mlm_grads = {n: tensor_json(g) for n, g in zip(names, mgrads) if g is not None}

    write_json("forward.json", {
        "source": source,
        "start_logits": tensor_json(start),
        "end_logits": tensor_json(end),
        "span_loss": r8(loss.item()),
        "span_loss_masked": r8(masked.item()),
        "mlm_logits": tensor_json(mlm),
        "mlm_loss": r8(mlm_loss.item()),
    })
    write_json("grads.json", {"source": source, "span_loss": span_grads, "mlm_loss": mlm_grads})

    # ---- three AdamW updates -----------------------------------------------------------
    total, warmup, base_lr, max_norm = 3, 1, 1e-3, 1.0
    q = {n: t.detach().clone().requires_grad_(True) for n, t in p.items()}
    groups = [
        {"params": [t for n, t in q.items() if not ref.no_decay(n)], "weight_decay": 0.01},
        {"params": [t for n, t in q.items() if ref.no_decay(n)], "weight_decay": 0.0},
    ]
    opt = torch.optim.AdamW(groups, lr=base_lr, betas=(0.9, 0.999), eps=1e-6)
    sched = torch.optim.lr_scheduler.LambdaLR(opt, ref.lr_lambda(total, warmup))
    steps = []
    for k in range(total):
        opt.zero_grad()
        step_loss, _, _ = span_loss_of(q, inputs_t)
        step_loss.backward()
        norm = torch.nn.utils.clip_grad_norm_(list(q.values()), max_norm).item()
        lr = opt.param_groups[0]["lr"]
        steps.append({"update": k, "lr": lr, "loss": r8(step_loss.item()), "grad_norm": r8(norm), "clipped": max_norm / (norm + 1e-6) < 1})
        opt.step()
        sched.step()
    assert sum(s["lr"] > 0 for s in steps) >= 2 and any(s["clipped"] for s in steps), steps
    write_json("adamw.json", {
        "source": source,
        "settings": {
            "base_lr": base_lr, "betas": [0.9, 0.999], "eps": 1e-6, "weight_decay": 0.01,
            "no_decay": "names ending .bias or containing LayerNorm", "total_updates": total,
            "warmup_updates": warmup, "max_grad_norm": max_norm,
            "loss": "span loss of model.json's inputs, the same batch every update, dropout 0",
            "unreached": "cls.* get no gradient from the span loss; torch.optim.AdamW skips them (no decay either)",
        },
        "steps": steps,
        "params_after": {n: tensor_json(t, r9) for n, t in q.items()},
    })

    # ---- a checkpoint directory as a user would bring one ------------------------------
    ck_config = dict(CONFIG)
    ck = make_weights(ck_config, seed=4321, heads=("span",))
    with open(os.path.join(OUT, "checkpoint", "config.json"), "w") as f:
        json.dump(hf_config(ck_config), f, indent=2)
        f.write("\n")
    with open(os.path.join(OUT, "checkpoint", "vocab.txt"), "w") as f:
        f.write("\n".join(VOCAB) + "\n")
    write_safetensors(os.path.join(OUT, "checkpoint", "model.safetensors"), {n: t.float() for n, t in ck.items()}, {"format": "pt"})
    ck_inputs = {k: [row[:16] for row in v[1:]] for k, v in make_inputs().items() if k in ("input_ids", "token_type_ids", "attention_mask")}
    cs, ce = ref.span_logits(ck, ck_config, *(torch.tensor(ck_inputs[k], dtype=torch.long) for k in ("input_ids", "token_type_ids", "attention_mask")))
    write_json("checkpoint_expected.json", {
        "source": source,
        "note": "start/end logits of checkpoint/ for these inputs; the checkpoint has no MLM head (cls.*)",
        "inputs": {k: ck_inputs[k] for k in ("input_ids", "token_type_ids", "attention_mask")},
        "start_logits": tensor_json(cs),
        "end_logits": tensor_json(ce),
    })

    print("span loss %.6f (masked softmax %.6f), mlm loss %.6f" % (loss.item(), masked.item(), mlm_loss.item()))
    for s in steps:
        print("update %d: lr %.2e loss %.6f grad norm %.4f clipped %s" % (s["update"], s["lr"], s["loss"], s["grad_norm"], s["clipped"]))
    print("max |start logit| %.3f" % start.abs().max().item(), "params", sum(t.numel() for t in p.values()))
    sizes = {n: os.path.getsize(os.path.join(OUT, n)) for n in sorted(os.listdir(OUT)) if n.endswith(".json")}
    print("sizes", sizes, "total %.0f KB" % (sum(sizes.values()) / 1024))


if __name__ == "__main__":
    main()
