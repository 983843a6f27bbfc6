# defines: read_safetensors, write_safetensors, write_atomically, save_checkpoint,
# latest_checkpoint, load_checkpoint, prune_checkpoints, read_job — the files of a job
# folder, in the layouts Spanwright itself reads and writes, so the engine, `spanwright
# eval`/`export` and the workbench take the results back unchanged:
#
#   safetensors     8-byte little-endian header length, the JSON header ({name: {dtype,
#                   shape, data_offsets}}, "__metadata__" of strings), padded with spaces
#                   to 8 bytes, then the data section (src/io/safetensors.ts)
#   checkpoints     one pair per id in <out>/checkpoints (src/node/fs-store.ts):
#                   <id>.safetensors  weights under their own names, AdamW moments under
#                                     "adam.m.<name>" / "adam.v.<name>", the meta JSON under
#                                     "spanwright.checkpoint" and the per-parameter step
#                                     counts under "spanwright.optimizer-step"
#                   <id>.json         {id, meta, bytes, sha256, tensorCount}
#                   (src/io/checkpoint-store.ts); blob first, summary last, each written to a
#                   hidden temporary file, flushed and renamed, so a listed checkpoint is whole
#
# Reads float32, int32 and half-precision tensors (F16 and BF16 widened to float32, as the
# engine's loader does); writes float32 and int32.

import datetime
import hashlib
import json
import os
import secrets
import struct
import sys
import time

import torch

# safetensors is little-endian, and tensors are read and written as the host lays them out
if sys.byteorder != "little":
    raise SystemExit("job_files.py: this program reads and writes safetensors on little-endian machines only")

DTYPES = {"F32": (torch.float32, 4), "I32": (torch.int32, 4), "F16": (torch.float16, 2), "BF16": (torch.bfloat16, 2)}
TORCH_NAMES = {torch.float32: "F32", torch.int32: "I32"}
META_KEY = "spanwright.checkpoint"
STEP_KEY = "spanwright.optimizer-step"
M_PREFIX = "adam.m."
V_PREFIX = "adam.v."
JOB_FORMAT = "spanwright-torch-job"
JOB_VERSION = 1


class JobError(Exception):
    """Bad input: the message names the file, and the record, tensor or field."""


def read_safetensors(path):
    """(tensors: {name: torch tensor}, metadata: {key: str}); errors name the file and tensor."""
    try:
        with open(path, "rb") as f:
            raw = f.read()
    except OSError as err:
        raise JobError(f"{path}: cannot read ({err.strerror})") from None
    if len(raw) < 8:
        raise JobError(f"{path}: {len(raw)} bytes, too short for a safetensors file")
    (n,) = struct.unpack("<Q", raw[:8])
    if 8 + n > len(raw):
        raise JobError(f"{path}: the header claims {n} bytes but the file has {len(raw) - 8} after the length")
    try:
        header = json.loads(raw[8 : 8 + n].decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as err:
        raise JobError(f"{path}: the header is not JSON ({err})") from None
    metadata = header.pop("__metadata__", {}) or {}
    data = memoryview(raw)[8 + n :]
    tensors = {}
    for name, entry in header.items():
        dtype = entry.get("dtype")
        if dtype not in DTYPES:
            raise JobError(f"{path}: tensor \"{name}\" is {dtype}; this program reads {', '.join(DTYPES)}")
        torch_dtype, size = DTYPES[dtype]
        shape = entry.get("shape")
        begin, end = entry.get("data_offsets", [0, -1])
        count = 1
        for d in shape:
            count *= d
        if end - begin != count * size or end > len(data):
            raise JobError(f"{path}: tensor \"{name}\": offsets [{begin}, {end}) do not hold shape {shape} of {dtype}")
        if count == 0:
            tensors[name] = torch.zeros(shape, dtype=torch_dtype)
            continue
        # copied out of the file's bytes (frombuffer shares memory, and bytes are read-only)
        t = torch.frombuffer(bytearray(data[begin:end]), dtype=torch_dtype).reshape(shape)
        tensors[name] = t.float() if dtype in ("F16", "BF16") else t
    return tensors, metadata


def safetensors_bytes(tensors, metadata=None):
    """tensors: list of (name, tensor) in file order; float32 or int32, written little-endian."""
    header = {}
    if metadata:
        header["__metadata__"] = dict(metadata)
    parts = []
    offset = 0
    for name, t in tensors:
        t = t.detach().to("cpu").contiguous()
        if t.dtype not in TORCH_NAMES:
            raise ValueError(f"tensor \"{name}\": dtype {t.dtype} is not written (float32 or int32)")
        body = t.numpy().tobytes()
        header[name] = {"dtype": TORCH_NAMES[t.dtype], "shape": list(t.shape), "data_offsets": [offset, offset + len(body)]}
        parts.append(body)
        offset += len(body)
    text = json.dumps(header, separators=(",", ":"), ensure_ascii=False).encode("utf-8")
    text += b" " * ((8 - len(text) % 8) % 8)
    return struct.pack("<Q", len(text)) + text + b"".join(parts)


def write_atomically(path, data):
    """To a hidden temporary file beside `path`, flushed, then renamed over it (atomic on POSIX)."""
    folder = os.path.dirname(path) or "."
    os.makedirs(folder, exist_ok=True)
    tmp = os.path.join(folder, f".{os.path.basename(path)}.tmp-{secrets.token_hex(6)}")
    try:
        with open(tmp, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except OSError as err:
        try:
            os.remove(tmp)
        except OSError:
            pass
        raise JobError(f"cannot write {path} ({len(data)} bytes): {err.strerror}") from None


def read_job(folder):
    """job.json, checked for the format this program knows."""
    path = os.path.join(folder, "job.json")
    try:
        with open(path, encoding="utf-8") as f:
            job = json.load(f)
    except OSError as err:
        raise JobError(f"{path}: cannot read ({err.strerror}); is {folder} a folder `spanwright job` wrote?") from None
    except json.JSONDecodeError as err:
        raise JobError(f"{path}: not valid JSON ({err})") from None
    if job.get("format") != JOB_FORMAT:
        raise JobError(f"{path}: field format is {job.get('format')!r}, not {JOB_FORMAT!r}")
    if not isinstance(job.get("version"), int) or job["version"] > JOB_VERSION:
        raise JobError(f"{path}: field version is {job.get('version')!r}; this program reads version {JOB_VERSION} and earlier")
    task = job.setdefault("task", "span")
    if task not in ("span", "masked-lm"):
        raise JobError(f"{path}: field task is {task!r}; this program runs \"span\" and \"masked-lm\" jobs")
    for field in ("train", "plan", "reader", "datasetHash", "base") + (("windows",) if task == "span" else ("rows", "masking")):
        if field not in job:
            raise JobError(f"{path}: field {field} is missing")
    return job


# ---- checkpoints ------------------------------------------------------------------------


def new_checkpoint_id(update):
    """`step-00000120-<ms in base 36>`: sorts by update, as the engine's newCheckpointId."""
    ms = int(time.time() * 1000)
    digits = "0123456789abcdefghijklmnopqrstuvwxyz"
    b36 = ""
    while ms:
        ms, r = divmod(ms, 36)
        b36 = digits[r] + b36
    return f"step-{update:08d}-{b36 or '0'}"


def now_iso():
    return datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def save_checkpoint(folder, meta, weights, moments, steps):
    """weights: [(name, tensor)]; moments: {name: (m, v)}; steps: {name: int}. Returns the id."""
    meta = dict(meta, savedAt=meta.get("savedAt") or now_iso())
    meta_json = json.dumps(meta, separators=(",", ":"))
    tensors = list(weights)
    for name, (m, _) in moments.items():
        tensors.append((M_PREFIX + name, m))
    for name, (_, v) in moments.items():
        tensors.append((V_PREFIX + name, v))
    blob = safetensors_bytes(tensors, {META_KEY: meta_json, STEP_KEY: json.dumps(steps, separators=(",", ":"))})
    cid = new_checkpoint_id(meta["step"])
    summary = {"id": cid, "meta": meta, "bytes": len(blob), "sha256": hashlib.sha256(blob).hexdigest(), "tensorCount": len(tensors)}
    write_atomically(os.path.join(folder, f"{cid}.safetensors"), blob)
    write_atomically(os.path.join(folder, f"{cid}.json"), (json.dumps(summary, indent=2) + "\n").encode("utf-8"))
    return cid


def list_checkpoints(folder):
    """Summaries whose blob is there, oldest first (by update, then save time, then id)."""
    try:
        names = os.listdir(folder)
    except FileNotFoundError:
        return []
    out = []
    for name in names:
        if not name.endswith(".json") or name.startswith("."):
            continue
        cid = name[: -len(".json")]
        if not os.path.exists(os.path.join(folder, f"{cid}.safetensors")):
            continue
        path = os.path.join(folder, name)
        try:
            with open(path, encoding="utf-8") as f:
                out.append(json.load(f))
        except (OSError, json.JSONDecodeError) as err:
            raise JobError(f"{path}: not a readable checkpoint summary ({err})") from None
    out.sort(key=lambda s: (s["meta"]["step"], s["meta"].get("savedAt", ""), s["id"]))
    return out


def latest_checkpoint(folder, dataset_hash, stage):
    """The newest checkpoint of this data and stage ("fine-tune" when a meta names none), or None."""
    mine = [s for s in list_checkpoints(folder) if s["meta"].get("datasetHash") == dataset_hash and s["meta"].get("stage", "fine-tune") == stage]
    return mine[-1] if mine else None


def load_checkpoint(folder, summary):
    """(meta, weights {name: tensor}, moments {name: (m, v)}, steps {name: int}), the SHA-256 checked."""
    path = os.path.join(folder, f"{summary['id']}.safetensors")
    with open(path, "rb") as f:
        digest = hashlib.sha256(f.read()).hexdigest()
    if digest != summary["sha256"]:
        raise JobError(f"{path}: SHA-256 {digest} differs from the {summary['sha256']} saved with it; the checkpoint is damaged")
    tensors, metadata = read_safetensors(path)
    if META_KEY not in metadata:
        raise JobError(f"{path}: no \"{META_KEY}\" metadata; not a checkpoint")
    meta = json.loads(metadata[META_KEY])
    steps = json.loads(metadata.get(STEP_KEY, "null"))
    weights, m, v = {}, {}, {}
    for name, t in tensors.items():
        if name.startswith(M_PREFIX):
            m[name[len(M_PREFIX) :]] = t
        elif name.startswith(V_PREFIX):
            v[name[len(V_PREFIX) :]] = t
        else:
            weights[name] = t
    if not m or steps is None:
        raise JobError(f"{path}: holds no optimizer state (moments and their step counts) to continue from")
    return meta, weights, {name: (m[name], v[name]) for name in m}, steps


def prune_checkpoints(folder, dataset_hash, keep_last=2):
    """Deletes all but the newest `keep_last` checkpoints of this data (summary first, then blob)."""
    mine = [s for s in list_checkpoints(folder) if s["meta"].get("datasetHash") == dataset_hash]
    for s in mine[: max(0, len(mine) - keep_last)]:
        for ext in (".json", ".safetensors"):
            try:
                os.remove(os.path.join(folder, s["id"] + ext))
            except FileNotFoundError:
                pass
