# defines: the training program of a Spanwright job folder — the run the engine would take
# (src/train/loop.ts, trainer.ts), on PyTorch with DistributedDataParallel: fine-tuning on
# the job's windows (task "span", `spanwright job`), or masked-LM on packed rows (task
# "masked-lm", the base recipe's `--job`; SpanTask and MaskedLmTask below differ only in
# their data and their loss).
#
#   on this machine (CPU processes, gloo):
#     torchrun --standalone --nproc_per_node 2 train_reader.py
#   on a node with GPUs (one process per GPU, nccl):
#     torchrun --standalone --nproc_per_node 8 train_reader.py --device cuda
#   one process, no torchrun:
#     python3 train_reader.py
#
# Writes, under --out (default: the job folder): checkpoints/ in the engine's checkpoint
# layout (job_files.py), log.jsonl (one line per update), and model/, a model directory
# (config.json, model.safetensors, the vocabulary) that `spanwright eval`, `export` and the
# workbench read. Options: --resume (from the newest checkpoint of this data in
# <out>/checkpoints, the engine's own included), --max-updates K (stop after K updates of
# this session, with a checkpoint), --threads N, --device auto|cpu|cuda.
#
# One update k = 0 … S − 1, in the order of the engine's loop:
#   1. learning rate   LambdaLR: base · k/W while k < W, then base · max(0, (S − k)/(S − W))
#   2. checkpoint      when due at k (never at the update a session starts from), rank 0
#   3. data            the job's data order: epoch e = ⌊k/U⌋ reads windows
#                      epoch_order[e][(k mod U)·A·b …] — up to A micro-batches of b windows,
#                      the last update of an epoch short, as the engine's UpdateSampler;
#                      micro-batch i goes to process i mod P, so the update's windows and
#                      micro-batches are the same for any number of processes P
#   4. step            each process: Σ over its micro-batches of loss_i / A_k, backward
#                      (no_sync for all but its last); a process left without one (A_k < P)
#                      runs the first micro-batch weighted 0. DDP averages the gradients
#                      over P, so each local loss is scaled by P first: the gradient is
#                      the mean of the A_k micro-batch gradients, exactly the engine's
#   5. refuse          a NaN or infinite loss or gradient norm stops the run, the step not taken
#   6. clip, AdamW     clip_grad_norm_(1.0 by default); torch.optim.AdamW, ε and β from the
#                      job, decay λ except on biases and LayerNorm
#   7. report          rank 0 writes the update's loss (summed over processes), lr, ‖g‖
#
# A masked-LM micro-batch is masked by the engine's own draws (masking.py), so with dropout
# off that run is the engine's too. Dropout (when the job's rates are above 0) is torch's
# own, its generator seeded from (seed, update, micro-batch) before every micro-batch, so a
# resumed run repeats an uninterrupted one and the masks do not depend on the process
# count; they are not the engine's masks.

import argparse
import json
import math
import os
import shutil
import signal
import sys
import time

import torch
import torch.distributed as dist
from torch.nn.parallel import DistributedDataParallel

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import job_files as files  # noqa: E402
from job_files import JobError  # noqa: E402
import masking  # noqa: E402
import reader_model as rm  # noqa: E402

# the MLM head's tensors: not trained here (the span loss does not reach them), carried along
MLM_HEAD = (
    "cls.predictions.transform.dense.weight",
    "cls.predictions.transform.dense.bias",
    "cls.predictions.transform.LayerNorm.weight",
    "cls.predictions.transform.LayerNorm.bias",
    "cls.predictions.bias",
)


def parse_args(argv):
    p = argparse.ArgumentParser(description="Fine-tune the reader of a Spanwright job folder with torch.distributed.")
    p.add_argument("--job", default=HERE, help="the job folder (default: the folder this program is in)")
    p.add_argument("--out", default=None, help="where checkpoints/, log.jsonl and model/ go (default: the job folder)")
    p.add_argument("--resume", action="store_true", help="continue from the newest checkpoint of this data in <out>/checkpoints")
    p.add_argument("--max-updates", type=int, default=None, help="stop after this many updates of this session (a checkpoint is saved)")
    p.add_argument("--device", choices=("auto", "cpu", "cuda"), default="auto", help="auto: cuda when there is a GPU")
    p.add_argument("--threads", type=int, default=None, help="torch threads per process (default: torch's, or OMP_NUM_THREADS)")
    return p.parse_args(argv)


# ---- the schedule and the data order (src/train/schedule.ts, batches.ts) -----------------


def plan_training(train, features):
    F = train["batchSize"] * train["gradAccumulation"]
    U = -(-features // F)
    S = train["epochs"] * U
    return dict(features=features, featuresPerUpdate=F, updatesPerEpoch=U, totalUpdates=S, warmupUpdates=round_half_up(train["warmupRatio"] * S))


def round_half_up(x):
    """JavaScript's Math.round (Python's round() rounds half to even)."""
    return math.floor(x + 0.5)


def lr_factor(S, W):
    def f(k):
        if k < W:
            return k / W
        if S == W:
            return 0.0
        return max(0.0, (S - k) / (S - W))

    return f


def order_at(plan, k):
    """The data position at the start of update k: (epoch, index)."""
    return k // plan["updatesPerEpoch"], (k % plan["updatesPerEpoch"]) * plan["featuresPerUpdate"]


def micro_batches(order, plan, batch, k):
    """The window indices of update k's micro-batches."""
    epoch, index = order_at(plan, k)
    chosen = order[epoch, index : min(plan["features"], index + plan["featuresPerUpdate"])]
    return [chosen[i : i + batch] for i in range(0, len(chosen), batch)]


def dropout_seed(seed, k, micro):
    """One seed per (run seed, update, micro-batch), below 2⁶³."""
    return ((seed * 1_000_003 + k) * 1_009 + micro) % (1 << 63)


# ---- loading ----------------------------------------------------------------------------


def _load_windows(path, job, cfg):
    tensors, _ = files.read_safetensors(path)
    need = ("input_ids", "token_type_ids", "attention_mask", "start_positions", "end_positions", "epoch_order")
    for name in need:
        if name not in tensors:
            raise JobError(f"{path}: tensor \"{name}\" is missing")
        if tensors[name].dtype != torch.int32:
            raise JobError(f"{path}: tensor \"{name}\" must be I32")
    N = job["windows"]["count"]
    T = job["train"]["maxLength"]
    for name in need[:3]:
        if list(tensors[name].shape) != [N, T]:
            raise JobError(f"{path}: tensor \"{name}\" has shape {list(tensors[name].shape)}, job.json says [{N}, {T}]")
    ids, types, mask = tensors["input_ids"], tensors["token_type_ids"], tensors["attention_mask"]
    checks = (
        ("input_ids", ids, cfg["vocab_size"], "vocab_size"),
        ("token_type_ids", types, cfg["type_vocab_size"], "type_vocab_size"),
        ("attention_mask", mask, 2, None),
    )
    for name, t, limit, key in checks:
        bad = ((t < 0) | (t >= limit)).nonzero()
        if len(bad) > 0:
            w, i = bad[0].tolist()
            what = f"the base's {key} is {limit}" if key else "a mask is 0 or 1"
            raise JobError(f"{path}: window {w}, field {name}[{i}] is {t[w, i].item()}; {what}")
    for name in ("start_positions", "end_positions"):
        t = tensors[name]
        bad = ((t < 0) | (t >= T)).nonzero()
        if len(bad) > 0:
            w = bad[0].item()
            raise JobError(f"{path}: window {w}, field {name} is {t[w].item()}, outside the window [0, {T})")
    order = tensors["epoch_order"].long()
    if list(order.shape) != [job["train"]["epochs"], N]:
        raise JobError(f"{path}: tensor \"epoch_order\" has shape {list(order.shape)}, expected [{job['train']['epochs']}, {N}]")
    return dict(ids=ids.long(), types=types.long(), mask=mask.long(), start=tensors["start_positions"].long(), end=tensors["end_positions"].long()), order




class SpanTask:
    """Fine-tuning on the job's windows: the span head's start/end loss (src/train/trainer.ts step)."""

    stage = "fine-tune"
    # the MLM head: not reached by the span loss, so carried along untrained
    carried = MLM_HEAD
    # the model directory holds every engine tensor
    left_out = ()

    def __init__(self, job_dir, job, cfg):
        self.windows, self.order = _load_windows(os.path.join(job_dir, job["windows"]["file"]), job, cfg)
        self.count = job["windows"]["count"]
        self.trim = job["train"]["trimPadding"]

    def model(self, cfg):
        return rm.SpanReader(cfg)

    def tokens(self, rows):
        return int(self.windows["mask"][rows].sum())

    def loss(self, net, rows, k, i, device):
        w = self.windows
        mask = w["mask"][rows]
        T_b = int((mask * torch.arange(1, mask.shape[1] + 1)).max().clamp(min=1)) if self.trim else mask.shape[1]
        ids, types, mask = (w[f][rows][:, :T_b].to(device) for f in ("ids", "types", "mask"))
        start_logits, end_logits = net(ids, types, mask)
        return rm.span_loss(start_logits, end_logits, w["start"][rows].to(device), w["end"][rows].to(device), mask)


class MaskedLmTask:
    """Masked-LM on packed rows, each micro-batch masked as the engine's collateMlm (src/train/trainer.ts mlmStep)."""

    stage = "masked-lm"
    # the span head: not reached by the masked-LM loss
    carried = ("qa_outputs.weight", "qa_outputs.bias")
    # and, as the base recipe's finish step does, left out of the model directory, so a
    # loader says the span head is new
    left_out = carried

    def __init__(self, job_dir, job, cfg):
        rows = job["rows"]
        T = rows["maxLength"]
        ids, lengths = [], []
        for shard in rows["shards"]:
            path = os.path.join(job_dir, shard["file"])
            tensors, _ = files.read_safetensors(path)
            for name in ("input_ids", "lengths"):
                if name not in tensors or tensors[name].dtype != torch.int32:
                    raise JobError(f"{path}: tensor \"{name}\" is missing or not I32")
            if list(tensors["input_ids"].shape) != [shard["rows"], T] or list(tensors["lengths"].shape) != [shard["rows"]]:
                raise JobError(f"{path}: tensors input_ids {list(tensors['input_ids'].shape)} and lengths {list(tensors['lengths'].shape)}, job.json says {shard['rows']} rows of {T}")
            x, n = tensors["input_ids"], tensors["lengths"]
            bad = ((x < 0) | (x >= cfg["vocab_size"])).nonzero()
            if len(bad) > 0:
                r, t = bad[0].tolist()
                raise JobError(f"{path}: row {r}, field input_ids[{t}] is {x[r, t].item()}; the base's vocab_size is {cfg['vocab_size']}")
            bad = ((n < 3) | (n > T)).nonzero()
            if len(bad) > 0:
                r = bad[0].item()
                raise JobError(f"{path}: row {r}, field lengths is {n[r].item()}, outside [3, {T}]")
            ids.append(x.long())
            lengths.append(n.long())
        self.ids = torch.cat(ids)
        self.lengths = torch.cat(lengths)
        self.count = rows["count"]
        if len(self.ids) != self.count:
            raise JobError(f"{os.path.join(job_dir, 'job.json')}: field rows.count is {self.count}, the shards hold {len(self.ids)} rows")
        path = os.path.join(job_dir, rows["order"])
        tensors, _ = files.read_safetensors(path)
        if "epoch_order" not in tensors or list(tensors["epoch_order"].shape) != [job["train"]["epochs"], self.count]:
            raise JobError(f"{path}: tensor \"epoch_order\" must be [{job['train']['epochs']}, {self.count}]")
        self.order = tensors["epoch_order"].long()
        self.masking = job["masking"]
        self.seed = job["train"]["seed"]
        self.trim = job["train"]["trimPadding"]

    def model(self, cfg):
        return rm.MaskedLmReader(cfg)

    def tokens(self, rows):
        return int(self.lengths[rows].sum())

    def loss(self, net, rows, k, i, device):
        lengths = self.lengths[rows]
        T = self.ids.shape[1]
        T_b = int(lengths.max()) if self.trim else T
        attention = (torch.arange(T_b)[None, :] < lengths[:, None]).long()  # [B, T]
        masked, positions, labels = masking.mask_rows(self.ids[rows][:, :T_b], attention, self.masking, masking.seed_at(self.seed, "mlm", k, i))
        logits = net(masked.to(device), torch.zeros_like(masked).to(device), attention.to(device), positions.to(device))  # [M, V]
        return rm.mlm_loss(logits, labels.to(device))


def load_base(job_dir, job):
    base = os.path.join(job_dir, job["base"]["folder"])
    config_path = os.path.join(base, "config.json")
    try:
        with open(config_path, encoding="utf-8") as f:
            hf = json.load(f)
    except (OSError, json.JSONDecodeError) as err:
        raise JobError(f"{config_path}: cannot read ({err})") from None
    try:
        cfg = rm.config_from_hf(hf, config_path)
    except ValueError as err:
        raise JobError(str(err)) from None
    weights_path = os.path.join(base, "model.safetensors")
    weights, _ = files.read_safetensors(weights_path)
    vocab = next((n for n in ("vocab.txt", "tokenizer.json") if os.path.exists(os.path.join(base, n))), None)
    if vocab is None:
        raise JobError(f"{base}: no vocab.txt or tokenizer.json")
    return base, cfg, weights, weights_path, vocab


# ---- the run ----------------------------------------------------------------------------


def main(argv):
    args = parse_args(argv)
    if args.threads:
        torch.set_num_threads(args.threads)
    world = int(os.environ.get("WORLD_SIZE", "1"))
    rank = int(os.environ.get("RANK", "0"))
    local_rank = int(os.environ.get("LOCAL_RANK", "0"))
    use_cuda = args.device == "cuda" or (args.device == "auto" and torch.cuda.is_available())
    if use_cuda and not torch.cuda.is_available():
        raise JobError("--device cuda: torch sees no GPU here")
    device = torch.device(f"cuda:{local_rank}" if use_cuda else "cpu")
    if use_cuda:
        torch.cuda.set_device(device)
    distributed = world > 1
    if distributed:
        dist.init_process_group("nccl" if use_cuda else "gloo")

    job_dir = os.path.abspath(args.job)
    out = os.path.abspath(args.out or job_dir)
    job = files.read_job(job_dir)
    train = job["train"]
    base_dir, cfg, base_weights, weights_path, vocab_file = load_base(job_dir, job)
    if train.get("dropout") is not None:
        cfg["hidden_dropout"] = cfg["attention_dropout"] = float(train["dropout"])
    task = (SpanTask if job["task"] == "span" else MaskedLmTask)(job_dir, job, cfg)
    order = task.order
    plan = plan_training(train, task.count)
    for key, value in plan.items():
        if job["plan"].get(key) != value:
            raise JobError(f"{os.path.join(job_dir, 'job.json')}: field plan.{key} is {job['plan'].get(key)}, the settings give {value}")
    S, W, U = plan["totalUpdates"], plan["warmupUpdates"], plan["updatesPerEpoch"]

    # the model, from the base (every tensor the task's model has must be there)
    model = task.model(cfg)
    own = model.state_dict()
    for name, t in own.items():
        if name not in base_weights:
            raise JobError(f"{weights_path}: tensor \"{name}\" is missing")
        if list(base_weights[name].shape) != list(t.shape):
            raise JobError(f"{weights_path}: tensor \"{name}\" has shape {list(base_weights[name].shape)}, config.json gives {list(t.shape)}")
    model.load_state_dict({name: base_weights[name] for name in own})
    carried = [(n, base_weights[n]) for n in task.carried if n in base_weights]

    # 3. resume: weights, moments and update count from a checkpoint (the engine's or ours)
    checkpoints = os.path.join(out, "checkpoints")
    start, moments, steps = 0, None, None
    if args.resume:
        summary = files.latest_checkpoint(checkpoints, job["datasetHash"], task.stage)
        if summary is None:
            raise JobError(f"{checkpoints}: no checkpoint of this job's data (dataset hash {job['datasetHash']}) to resume from")
        meta, weights, moments, steps = files.load_checkpoint(checkpoints, summary)
        run = meta["run"]
        if run["totalUpdates"] != S or run["features"] != plan["features"] or run["trainer"]["seed"] != train["seed"]:
            raise JobError(
                f"{checkpoints}/{summary['id']}: the checkpoint's run planned {run['totalUpdates']} updates over {run['features']} windows "
                f"with seed {run['trainer']['seed']}; this job plans {S} over {plan['features']} with seed {train['seed']}"
            )
        start = run["trainer"]["update"]
        if [run["order"]["epoch"], run["order"]["index"]] != list(order_at(plan, start)):
            raise JobError(f"{checkpoints}/{summary['id']}: its data position does not match update {start}")
        model.load_state_dict({name: weights[name] for name in own})
        carried = [(n, weights[n]) for n, _ in carried]
    model.to(device)
    net = DistributedDataParallel(model, device_ids=[local_rank] if use_cuda else None) if distributed else model

    # 6. AdamW with the engine's decay rule, one group each way
    named = list(model.named_parameters())
    groups = [
        {"params": [p for n, p in named if not rm.no_decay(n)], "weight_decay": train["weightDecay"]},
        {"params": [p for n, p in named if rm.no_decay(n)], "weight_decay": 0.0},
    ]
    optimizer = torch.optim.AdamW(groups, lr=train["learningRate"], betas=(train["beta1"], train["beta2"]), eps=train["epsilon"])
    if moments is not None:
        for n, p in named:
            m, v = moments[n]
            optimizer.state[p] = {"step": torch.tensor(float(steps[n])), "exp_avg": m.to(device).clone(), "exp_avg_sq": v.to(device).clone()}
    for g in optimizer.param_groups:
        g["initial_lr"] = train["learningRate"]
    # 1. LambdaLR, placed at update `start` (its constructor steps once, to last_epoch = start)
    schedule = torch.optim.lr_scheduler.LambdaLR(optimizer, lr_factor(S, W), last_epoch=start - 1)

    stop_asked = {"now": False}

    def ask_stop(signum, _frame):
        stop_asked["now"] = True

    signal.signal(signal.SIGINT, ask_stop)
    signal.signal(signal.SIGTERM, ask_stop)

    log_path = os.path.join(out, "log.jsonl")
    if rank == 0:
        os.makedirs(out, exist_ok=True)
        if start == 0 and os.path.exists(log_path):
            os.remove(log_path)
        print(
            f"{S} updates ({plan['features']} windows, {train['epochs']} epochs of {U} updates of up to "
            f"{plan['featuresPerUpdate']}), from update {start}, {world} process(es) on {device.type}",
            flush=True,
        )

    def save(reason, k, last_loss):
        """A checkpoint of the state before update k (k updates done), by rank 0."""
        if rank != 0:
            return
        epoch, index = order_at(plan, k)
        meta = {
            "step": k,
            "runConfig": {"train": train, "model": job["reader"], "base": job["base"]["name"]},
            "datasetHash": job["datasetHash"],
            "metrics": {} if last_loss is None else {"loss": last_loss},
            "label": reason,
            "run": {"trainer": {"update": k, "seed": train["seed"]}, "order": {"epoch": epoch, "index": index}, "totalUpdates": S, "features": plan["features"]},
            "stage": task.stage,
            "trainedBy": f"torch {torch.__version__}, {world} process(es), {device.type}",
        }
        weights = [(n, t) for n, t in model.state_dict().items()] + carried
        state = {p: optimizer.state.get(p, {}) for _, p in named}
        moments_out = {}
        steps_out = {}
        for n, p in named:
            s = state[p]
            moments_out[n] = (s["exp_avg"], s["exp_avg_sq"]) if s else (torch.zeros_like(p), torch.zeros_like(p))
            steps_out[n] = int(s["step"]) if s else 0
        for n, t in carried:
            moments_out[n] = (torch.zeros_like(t), torch.zeros_like(t))
            steps_out[n] = 0
        cid = files.save_checkpoint(checkpoints, meta, weights, moments_out, steps_out)
        files.prune_checkpoints(checkpoints, job["datasetHash"], keep_last=2)
        print(f"checkpoint {cid} ({reason}, update {k})", flush=True)

    batch = train["batchSize"]
    last_loss = None
    started = time.time()
    k = start
    while k < S:
        # 2. checkpoint when due (the engine's rule: every checkpointEvery, else every evaluation, else every epoch)
        if k > start:
            every = train["checkpointEvery"] or train["evalEvery"] or U
            if k % every == 0:
                save("interval", k, last_loss)

        # 3. this update's micro-batches, and this process's share of them
        t0 = time.time()
        groups_k = micro_batches(order, plan, batch, k)
        A_k = len(groups_k)
        mine = [(i, g) for i, g in enumerate(groups_k) if i % world == rank] or [(0, None)]
        local = torch.zeros((), dtype=torch.float32, device=device)
        tokens = sum(task.tokens(g) for g in groups_k)
        # 4. forward and backward
        net.train()
        for j, (i, g) in enumerate(mine):
            weight = world if g is not None else 0.0
            torch.manual_seed(dropout_seed(train["seed"], k, i))
            synced = j == len(mine) - 1
            with net.no_sync() if distributed and not synced else _nothing():
                loss = task.loss(net, g if g is not None else groups_k[0], k, i, device) / A_k
                (loss * weight).backward()
            if g is not None:
                local += loss.detach()
        if distributed:
            dist.all_reduce(local)
        loss_k = float(local)

        # 5–6. refuse a non-finite update, clip, AdamW
        norm = float(torch.nn.utils.clip_grad_norm_(model.parameters(), train["maxGradNorm"] if train["maxGradNorm"] > 0 else float("inf")))
        if not math.isfinite(loss_k) or not math.isfinite(norm):
            what = f"the loss is {loss_k}" if not math.isfinite(loss_k) else f"the gradient norm is {norm}"
            raise JobError(f"update {k}: {what}; the step was not taken (the last checkpoint holds the run before it)")
        lr = optimizer.param_groups[0]["lr"]
        optimizer.step()
        schedule.step()
        optimizer.zero_grad(set_to_none=True)
        last_loss = loss_k
        clip = min(1.0, train["maxGradNorm"] / (norm + 1e-6)) if train["maxGradNorm"] > 0 else 1.0

        # 7. report
        if rank == 0:
            line = {"update": k + 1, "totalUpdates": S, "epoch": k // U, "loss": loss_k, "lr": lr, "gradNorm": norm, "clipScale": clip, "microBatches": A_k, "tokens": tokens, "stepMs": (time.time() - t0) * 1000}
            with open(log_path, "a", encoding="utf-8") as f:
                f.write(json.dumps(line) + "\n")
            if (k + 1) % 10 == 0 or k + 1 == S or k == start:
                print(f"update {k + 1}/{S}  loss {loss_k:.4f}  lr {lr:.3g}  |g| {norm:.3f}", flush=True)
        k += 1

        # stop? (asked by a signal on any process, or --max-updates) — every process agrees
        stop = torch.tensor([1.0 if stop_asked["now"] or (args.max_updates is not None and k - start >= args.max_updates) else 0.0], device=device)
        if distributed:
            dist.all_reduce(stop, op=dist.ReduceOp.MAX)
        if stop.item() > 0 and k < S:
            save("stop", k, last_loss)
            if rank == 0:
                print(f"stopped after update {k}; continue with --resume", flush=True)
            finish(distributed)
            return 130 if stop_asked["now"] else 0

    save("end", S, last_loss)
    if rank == 0:
        kept = [(n, t) for n, t in list(model.state_dict().items()) + carried if n not in task.left_out]
        write_model(out, base_dir, vocab_file, kept)
        with open(os.path.join(out, "run.json"), "w", encoding="utf-8") as f:
            json.dump({"updates": S, "from": start, "lastLoss": last_loss, "seconds": round(time.time() - started, 3), "processes": world, "device": device.type, "torch": torch.__version__}, f, indent=2)
            f.write("\n")
        print(f"model directory: {os.path.join(out, 'model')}", flush=True)
    finish(distributed)
    return 0


class _nothing:
    def __enter__(self):
        return None

    def __exit__(self, *exc):
        return False


def write_model(out, base_dir, vocab_file, weights):
    """<out>/model: the base's config.json and vocabulary as they were, the trained weights (F32, {"format": "pt"})."""
    folder = os.path.join(out, "model")
    os.makedirs(folder, exist_ok=True)
    files.write_atomically(os.path.join(folder, "model.safetensors"), files.safetensors_bytes(weights, {"format": "pt"}))
    for name in ("config.json", vocab_file):
        tmp = os.path.join(folder, f".{name}.tmp")
        shutil.copyfile(os.path.join(base_dir, name), tmp)
        os.replace(tmp, os.path.join(folder, name))


def finish(distributed):
    if distributed:
        dist.barrier()
        dist.destroy_process_group()


if __name__ == "__main__":
    try:
        sys.exit(main(sys.argv[1:]))
    except JobError as err:
        print(f"train_reader.py: {err}", file=sys.stderr, flush=True)
        sys.exit(1)
