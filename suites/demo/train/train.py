#!/usr/bin/python3
"""train: the offline training step for the demo OPT-family decoder.

    LD_LIBRARY_PATH=/usr/lib/x86_64-linux-gnu/openblas-pthread \\
    /usr/bin/python3 train.py --train TRAIN.u16 --valid VALID.u16 --vocab V --out DIR [options]

Reads little-endian uint16 token-id files, trains a pre-LayerNorm OPT decoder
with a tied output head, and writes DIR/model.safetensors (F16, open OPT tensor
names), DIR/config.json and DIR/train_log.json. Bad user input (missing or
malformed token file, token id past the vocabulary, inconsistent sizes) is
reported on stderr and the script exits with status 2.
"""

import argparse
import ctypes
import io
import json
import math
import os
import struct
import sys
import tempfile
import time

import numpy as np
import torch
import torch.nn.functional as F
from torch import nn

LN_EPS = 1e-5
POS_OFFSET = 2  # OPT's learned positions: position p reads row p + 2


class TrainError(Exception):
    """TrainError is bad user input; its message names the file and the place."""


# ---------------------------------------------------------------- inputs

def read_tokens(path, vocab, flag):
    """read_tokens loads a little-endian uint16 token file and checks every id is below vocab."""
    try:
        size = os.path.getsize(path)
    except OSError as e:
        raise TrainError(f"{path} ({flag}): cannot read: {e}") from e
    if size == 0 or size % 2:
        raise TrainError(f"{path} ({flag}): file is {size} bytes; a uint16 token file has a positive even length; "
                         "rewrite it")
    ids = np.fromfile(path, dtype="<u2")
    bad = np.flatnonzero(ids >= vocab)
    if bad.size:
        i = int(bad[0])
        raise TrainError(f"{path} ({flag}): token id {int(ids[i])} at byte offset {2 * i} is not below "
                         f"--vocab {vocab}; pass the tokenizer's vocabulary size")
    return ids


def validation_windows(ids, seq, limit):
    """validation_windows returns start offsets of at most limit windows of seq+1 tokens.

    Candidates start every seq tokens, so each target token is scored at most
    once; when there are more than limit, evenly spaced ones are kept."""
    count = (len(ids) - 1) // seq
    starts = np.arange(count, dtype=np.int64) * seq
    if count > limit:
        starts = starts[np.linspace(0, count - 1, limit).round().astype(np.int64)]
    return starts


def windows(ids, starts, seq):
    """windows gathers [len(starts), seq+1] token ids as int64."""
    idx = starts[:, None] + np.arange(seq + 1, dtype=np.int64)[None, :]
    return torch.from_numpy(ids[idx].astype(np.int64))


# ---------------------------------------------------------------- model

def _params(**tensors):
    """_params returns a module that holds the given tensors as parameters."""
    m = nn.Module()
    for name, t in tensors.items():
        m.register_parameter(name, nn.Parameter(t))
    return m


class OPTDecoder(nn.Module):
    """OPTDecoder is a pre-LayerNorm OPT decoder with a tied head.

    Its parameter names (named_parameters / state_dict) are exactly the open
    OPT checkpoint names, model.decoder.*."""

    def __init__(self, vocab, hidden, layers, heads, ffn, max_positions, seed, embed_std=0.02):
        super().__init__()
        if hidden % heads:
            raise TrainError(f"--hidden {hidden} is not a multiple of --heads {heads}; change one of them")
        self.vocab, self.hidden, self.heads, self.max_positions = vocab, hidden, heads, max_positions
        gen = torch.Generator().manual_seed(seed)
        # GPT-style init, common practice, no source: N(0, 0.02); residual
        # output projections scaled by 1/sqrt(2 * layers); biases 0, norms 1.
        resid_std = 0.02 / math.sqrt(2 * layers)

        def normal(shape, std=0.02):
            return torch.empty(shape).normal_(0.0, std, generator=gen)

        def linear(out_dim, in_dim, std=0.02):
            return _params(weight=normal((out_dim, in_dim), std), bias=torch.zeros(out_dim))

        def norm():
            return _params(weight=torch.ones(hidden), bias=torch.zeros(hidden))

        dec = nn.Module()
        # A larger embedding scale (--embed-std) makes each layer's update small
        # against the residual stream it joins.
        dec.embed_tokens = _params(weight=normal((vocab, hidden), embed_std))
        dec.embed_positions = _params(weight=normal((max_positions + POS_OFFSET, hidden), embed_std))
        dec.layers = nn.ModuleList()
        for _ in range(layers):
            layer = nn.Module()
            layer.self_attn_layer_norm = norm()
            attn = nn.Module()
            attn.q_proj, attn.k_proj = linear(hidden, hidden), linear(hidden, hidden)
            attn.v_proj = linear(hidden, hidden)
            attn.out_proj = linear(hidden, hidden, resid_std)
            layer.self_attn = attn
            layer.final_layer_norm = norm()
            layer.fc1 = linear(ffn, hidden)
            layer.fc2 = linear(hidden, ffn, resid_std)
            dec.layers.append(layer)
        dec.final_layer_norm = norm()
        self.model = nn.Module()
        self.model.decoder = dec
        # additive causal mask, built once: -inf where key position > query position
        future = torch.triu(torch.ones(max_positions, max_positions, dtype=torch.bool), diagonal=1)
        mask = torch.zeros(max_positions, max_positions).masked_fill(future, float("-inf"))
        self.register_buffer("causal_mask", mask, persistent=False)

    def forward(self, ids, act_stats=False, cosines=None):
        """forward maps ids [B, T] to logits [B, T, vocab].

        With act_stats it also returns the mean post-ReLU activation over all
        layers, tokens and neurons (with grad) and the count of exact zeros.
        When cosines is a list, it appends, per layer after the first, the
        mean cosine similarity between the residual stream entering that
        layer and the one entering the layer before (no grad)."""
        dec, d, nh = self.model.decoder, self.hidden, self.heads
        b, t = ids.shape
        if t > self.max_positions:
            raise ValueError(f"train: sequence of {t} tokens exceeds max_positions {self.max_positions}")
        hd = d // nh
        scale = hd ** -0.5
        mask = self.causal_mask[:t, :t]
        x = dec.embed_tokens.weight[ids] + dec.embed_positions.weight[POS_OFFSET:POS_OFFSET + t]
        act_sum, zeros = 0.0, 0
        prev = None
        for L in dec.layers:
            if cosines is not None:
                if prev is not None:
                    cosines.append(float(F.cosine_similarity(x.detach(), prev, dim=-1).mean()))
                prev = x.detach()
            a = L.self_attn
            h = F.layer_norm(x, (d,), L.self_attn_layer_norm.weight, L.self_attn_layer_norm.bias, LN_EPS)
            qkv = F.linear(h, torch.cat([a.q_proj.weight, a.k_proj.weight, a.v_proj.weight]),
                           torch.cat([a.q_proj.bias, a.k_proj.bias, a.v_proj.bias]))
            q, k, v = (z.view(b, t, nh, hd).transpose(1, 2) for z in qkv.split(d, dim=-1))  # [B, H, T, hd]
            probs = F.softmax(torch.matmul(q * scale, k.transpose(-1, -2)) + mask, dim=-1)  # OPT scales q
            o = torch.matmul(probs, v).transpose(1, 2).reshape(b, t, d)
            x = x + F.linear(o, a.out_proj.weight, a.out_proj.bias)
            h = F.layer_norm(x, (d,), L.final_layer_norm.weight, L.final_layer_norm.bias, LN_EPS)
            act = F.relu(F.linear(h, L.fc1.weight, L.fc1.bias))
            if act_stats:
                act_sum = act_sum + act.mean()
                zeros += int((act == 0).sum())
            x = x + F.linear(act, L.fc2.weight, L.fc2.bias)
        x = F.layer_norm(x, (d,), dec.final_layer_norm.weight, dec.final_layer_norm.bias, LN_EPS)
        logits = F.linear(x, dec.embed_tokens.weight)  # tied head
        if act_stats:
            return logits, act_sum / len(dec.layers), zeros
        return logits


def prev_token_init(model, gain, amp, lags=(1,)):
    """prev_token_init builds fixed-lag heads into layer 0 and returns what
    must be held for them to stay: a list of (parameter, index, value), each
    to be zeroed in the gradient and written back after every step.

    The position table becomes amp·(cos, sin) pairs of the position in
    dimensions 0 … hd-1 (hd the head width; OPT's offset of 2 kept: row p+2
    is position p), zero elsewhere, and is frozen. The angular frequencies
    run geometrically from pi down to pi/16, so no two positions within the
    training window look alike (harmonic frequencies repeat every few dozen
    positions). Head i of layer 0 (one per entry of lags) gets key rows
    gain·I and query rows gain·R^lag on those dimensions, zero elsewhere,
    where R turns each pair one position back, so from the first step it
    attends to the token lag positions back. What the heads read is held
    too: the token embedding's first hd columns stay zero and layer 0's
    first LayerNorm keeps weight 1 and bias 0 there, so those dimensions
    carry positions only (trained token embeddings would otherwise outgrow
    the position rows and blur the heads). Training alone does not form
    such heads in layer 0 here: a one-layer shortcut takes the layer first
    (the model card's copying recipe search)."""
    dec = model.model.decoder
    hd = model.hidden // model.heads
    if hd % 2:
        raise TrainError(f"--prev-head needs an even head width; --hidden {model.hidden} / --heads {model.heads} "
                         f"is {hd}")
    if not lags or len(lags) > model.heads or any(lag < 1 for lag in lags):
        raise TrainError(f"--prev-head-lags {','.join(map(str, lags))}: give 1 to {model.heads} lags (one per "
                         "built head), each at least 1")
    nf = hd // 2
    omega = math.pi * (1.0 / 16.0) ** (torch.arange(nf, dtype=torch.float64) / max(nf - 1, 1))
    pos = torch.arange(dec.embed_positions.weight.shape[0], dtype=torch.float64)[:, None] - POS_OFFSET
    table = torch.zeros(dec.embed_positions.weight.shape, dtype=torch.float64)
    table[:, 0:hd:2] = amp * torch.cos(pos * omega)
    table[:, 1:hd:2] = amp * torch.sin(pos * omega)

    def rotation(lag):
        rot = torch.zeros(hd, hd, dtype=torch.float64)
        for k in range(nf):
            c, s = math.cos(lag * float(omega[k])), math.sin(lag * float(omega[k]))
            rot[2 * k, 2 * k], rot[2 * k, 2 * k + 1] = c, s
            rot[2 * k + 1, 2 * k], rot[2 * k + 1, 2 * k + 1] = -s, c
        return rot

    a = dec.layers[0].self_attn
    ln = dec.layers[0].self_attn_layer_norm
    held = []
    with torch.no_grad():
        dec.embed_positions.weight.copy_(table.float())
        dec.embed_tokens.weight[:, :hd] = 0
        ln.weight[:hd], ln.bias[:hd] = 1, 0
        held += [(dec.embed_tokens.weight, (slice(None), slice(0, hd))), (ln.weight, slice(0, hd)),
                 (ln.bias, slice(0, hd))]
        for h, lag in enumerate(lags):
            rows = slice(h * hd, (h + 1) * hd)
            for w in (a.q_proj.weight, a.k_proj.weight, a.q_proj.bias, a.k_proj.bias):
                w[rows] = 0
            a.q_proj.weight[rows, :hd] = (gain * rotation(lag)).float()
            a.k_proj.weight[rows, :hd] = (gain * torch.eye(hd, dtype=torch.float64)).float()
            held += [(w, rows) for w in (a.q_proj.weight, a.k_proj.weight, a.q_proj.bias, a.k_proj.bias)]
    dec.embed_positions.weight.requires_grad_(False)
    return [(p, idx, p.detach()[idx].clone()) for p, idx in held]


def parse_lags(text):
    """parse_lags reads --prev-head-lags, a comma-separated list of positive integers."""
    try:
        lags = tuple(int(v) for v in text.split(","))
    except ValueError:
        raise TrainError(f"--prev-head-lags {text!r}: expected comma-separated integers such as 1,2") from None
    return lags


def param_groups(model, weight_decay):
    """param_groups puts the q/k/v/out/fc1/fc2 weight matrices under weight decay.

    Biases, LayerNorm weights and biases, the token embedding (the tied head)
    and the position embedding get none."""
    decay, plain = [], []
    for name, p in model.named_parameters():
        is_matrix = name.endswith(".weight") and p.dim() == 2 and "embed_" not in name
        (decay if is_matrix else plain).append(p)
    return [{"params": decay, "weight_decay": weight_decay}, {"params": plain, "weight_decay": 0.0}]


def lr_at(step, steps, lr, warmup, schedule="cosine"):
    """lr_at is the rate for 0-based step: linear warmup to lr over warmup steps,
    then cosine decay to 0.1 * lr at the last step, or (schedule "constant")
    lr from there on."""
    if step < warmup:
        return lr * (step + 1) / warmup
    if schedule == "constant":
        return lr
    span = max(steps - 1 - warmup, 1)
    progress = min((step - warmup) / span, 1.0)
    return lr * (0.1 + 0.9 * 0.5 * (1.0 + math.cos(math.pi * progress)))


# ---------------------------------------------------------------- outputs

def write_atomic(path, data):
    """write_atomic writes bytes to a temp file beside path, fsyncs it and renames it over path."""
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix="." + os.path.basename(path) + ".", suffix=".tmp", dir=folder)
    try:
        os.fchmod(fd, 0o644)  # mkstemp makes 0600; outputs are meant to be shared
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    dfd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(dfd)
    finally:
        os.close(dfd)


def safetensors_bytes(tensors):
    """safetensors_bytes encodes {name: float tensor} as an F16 safetensors file, in order.

    Layout: 8-byte little-endian header length, JSON header padded with spaces
    to a multiple of 8, then the tensors' data contiguous in header order."""
    header, blobs, offset = {"__metadata__": {"format": "pt"}}, [], 0
    for name, t in tensors.items():
        a = t.detach().cpu().numpy().astype("<f2")  # numpy's round-to-nearest-even
        if not np.isfinite(a).all():
            raise TrainError(f"tensor {name!r} has values outside the F16 range after training; lower --lr and retrain")
        blob = a.tobytes()
        header[name] = {"dtype": "F16", "shape": list(a.shape), "data_offsets": [offset, offset + len(blob)]}
        blobs.append(blob)
        offset += len(blob)
    raw = json.dumps(header, separators=(",", ":")).encode("utf-8")
    raw += b" " * (-len(raw) % 8)
    return struct.pack("<Q", len(raw)) + raw + b"".join(blobs)


def opt_config(args):
    """opt_config returns config.json in the open OPT layout."""
    return {
        "model_type": "opt", "architectures": ["OPTForCausalLM"],
        "vocab_size": args.vocab, "hidden_size": args.hidden, "num_hidden_layers": args.layers,
        "num_attention_heads": args.heads, "ffn_dim": args.ffn,
        "max_position_embeddings": args.max_positions, "word_embed_proj_dim": args.hidden,
        "do_layer_norm_before": True, "activation_function": "relu", "enable_bias": True,
        "tie_word_embeddings": True,
        "bos_token_id": args.bos, "eos_token_id": args.eos, "pad_token_id": args.pad,
    }


def blas_in_use(threads):
    """blas_in_use names the loaded BLAS library and, for OpenBLAS, sets its thread count."""
    with open("/proc/self/maps", encoding="utf-8", errors="replace") as f:
        paths = [line.split()[-1] for line in f if "/" in line]
    lib_path = next((p for p in paths if "blas" in os.path.basename(p)), "unknown")
    try:
        lib = ctypes.CDLL("libblas.so.3")
    except OSError:
        return lib_path
    if hasattr(lib, "openblas_set_num_threads"):
        lib.openblas_set_num_threads(threads)
        lib.openblas_get_config.restype = ctypes.c_char_p
        return f"{lib_path} ({lib.openblas_get_config().decode()}, {threads} threads)"
    return lib_path


# ---------------------------------------------------------------- training

@torch.no_grad()
def evaluate(model, valid, starts, seq, batch):
    """evaluate returns (mean NLL per token, fraction of post-ReLU activations
    exactly zero, mean cosine between the residual streams entering
    consecutive layers)."""
    nll, tokens, zeros, acts = 0.0, 0, 0, 0
    cos = []
    n_layers = len(model.model.decoder.layers)
    ffn = model.model.decoder.layers[0].fc1.weight.shape[0]
    for i in range(0, len(starts), batch):
        w = windows(valid, starts[i:i + batch], seq)
        logits, _, z = model(w[:, :-1], act_stats=True, cosines=cos)
        nll += float(F.cross_entropy(logits.reshape(-1, model.vocab), w[:, 1:].reshape(-1), reduction="sum"))
        tokens += w[:, 1:].numel()
        zeros += z
        acts += w[:, 1:].numel() * n_layers * ffn
    return nll / tokens, zeros / acts, (sum(cos) / len(cos) if cos else float("nan"))


def read_dev(path):
    """read_dev loads the dev probes mkdata wrote: per family, 4-shot prompts
    (token ids), option token ids and the right option."""
    with open(path, encoding="utf-8") as f:
        dev = json.load(f)
    if not isinstance(dev, dict) or not dev:
        raise TrainError(f"{path} (--dev): expected an object of families, as mkdata writes dev.json")
    return dev


@torch.no_grad()
def dev_accuracy(model, dev, limit, pad):
    """dev_accuracy scores the first limit probes of each family in multiple
    choice (highest total log-likelihood of the option's tokens wins) and
    returns the accuracy per family."""
    acc = {}
    for fam in sorted(dev):
        probes, right = dev[fam][:limit], 0
        for p in probes:
            seqs = [p["prompt"] + o for o in p["options"]]
            n = max(len(s) for s in seqs)
            if n > model.max_positions:
                raise TrainError(f"dev probe of {n} tokens exceeds max_positions {model.max_positions}")
            ids = torch.tensor([s + [pad] * (n - len(s)) for s in seqs], dtype=torch.int64)
            logp = F.log_softmax(model(ids), dim=-1)  # right padding never reaches earlier positions
            scores = []
            for i, o in enumerate(p["options"]):
                start = len(p["prompt"])
                pos = torch.arange(start - 1, start - 1 + len(o))
                scores.append(float(logp[i, pos, torch.tensor(o)].sum()))
            right += int(max(range(len(scores)), key=lambda i: scores[i]) == p["answer"])
        acc[fam] = right / max(len(probes), 1)
    return acc


def check_args(args, train, valid):
    """check_args rejects argument combinations that cannot train."""
    for flag in ("vocab", "layers", "hidden", "heads", "ffn", "seq", "batch", "threads", "max_positions",
                 "eval_every", "eval_windows"):
        if getattr(args, flag) < 1:
            raise TrainError(f"--{flag.replace('_', '-')} is {getattr(args, flag)}; it must be at least 1")
    if args.steps < 0 or args.warmup < 0:
        raise TrainError("--steps and --warmup must not be negative")
    if args.vocab > 65536:
        raise TrainError(f"--vocab {args.vocab} does not fit uint16 token files; at most 65536")
    if args.seq > args.max_positions:
        raise TrainError(f"--seq {args.seq} exceeds --max-positions {args.max_positions}; "
                         "raise --max-positions or lower --seq")
    for flag in ("bos", "eos", "pad"):
        if not 0 <= getattr(args, flag) < args.vocab:
            raise TrainError(f"--{flag} {getattr(args, flag)} is outside the vocabulary of {args.vocab} tokens")
    for path, flag, ids in ((args.train, "--train", train), (args.valid, "--valid", valid)):
        if len(ids) < args.seq + 1:
            raise TrainError(f"{path} ({flag}): holds {len(ids)} tokens, fewer than --seq + 1 = {args.seq + 1}; "
                             "lower --seq")
        if int(ids[0]) != args.bos:
            raise TrainError(f"{path} ({flag}): token at byte offset 0 is {int(ids[0])}, but documents start with "
                             f"--bos {args.bos}; pass the tokenizer's BOS id")


def _finite(v):
    """_finite maps NaN and infinities to None, which JSON can hold."""
    return v if math.isfinite(v) else None


def eval_line(e):
    """eval_line formats one eval record for stderr and the log; "-" marks no value (no steps yet, or NaN)."""
    def opt(v, fmt):
        return "-" if v is None else format(v, fmt)

    return (f"step {e['step']} train_loss {opt(e['train_loss'], '.4f')} act_l1 {opt(e['act_l1'], '.5f')} "
            f"valid_loss {opt(e['valid_loss'], '.4f')} zero_frac {e['zero_frac']:.4f} "
            f"cos {opt(e.get('residual_cos'), '.3f')} lr {e['lr']:.3e} "
            f"tok/s {e['tokens_per_s']:.0f} elapsed {e['elapsed_s']:.1f}s"
            + "".join(f" {k} {v:.3f}" for k, v in sorted((e.get("dev_acc") or {}).items())))


STATE_FORMAT = 1
# Arguments a resumed run may change: where it logs and saves, how far it
# goes, and the drill share and learning rate from here on (a curriculum in
# phases).
RESUMABLE_CHANGES = {"steps", "log", "state", "out", "drill_mix_start", "drill_mix_end", "lr", "select"}


def resume(args, model, opt, rng):
    """resume loads --state into the model, the optimiser and the data generator
    and returns (next step, evals, best, elapsed seconds). The saved run's
    arguments must match this one's except RESUMABLE_CHANGES; with the
    constant schedule and the same constant drill share, going on to a
    larger --steps gives the same weights as one run of that length. A
    different drill share or --lr makes a new phase of the curriculum: the
    same phases in the same order give the same weights."""
    try:
        st = torch.load(args.state)
    except Exception as e:  # torch raises many kinds for a damaged file
        raise TrainError(f"{args.state} (--state): cannot read the saved state: {e}; delete it to start afresh") from e
    if not isinstance(st, dict) or st.get("format") != STATE_FORMAT:
        raise TrainError(f"{args.state} (--state): not a training state of format {STATE_FORMAT}; "
                         "delete it to start afresh")
    now = vars(args)
    diff = sorted(k for k in set(now) | set(st["args"]) if k not in RESUMABLE_CHANGES and now.get(k) != st["args"].get(k))
    if diff:
        raise TrainError(f"{args.state} (--state): saved with different arguments ({', '.join(diff)}: "
                         f"{[st['args'].get(k) for k in diff]} then, {[now.get(k) for k in diff]} now); "
                         "pass the same ones or delete the state")
    if st["step"] > args.steps:
        raise TrainError(f"{args.state} (--state): saved at step {st['step']}, past --steps {args.steps}")
    model.load_state_dict(st["model"])
    opt.load_state_dict(st["opt"])
    rng.bit_generator.state = st["rng"]
    return st["step"], st["evals"], st["best"], st["elapsed_s"]


def run(args):
    """run trains, writes DIR's three files, and returns (model with the written weights, log).

    The written weights are those of the eval with the lowest validation loss
    (--select valid-loss) or those at the last step (--select last)."""
    torch.set_num_threads(args.threads)
    torch.use_deterministic_algorithms(True)
    blas = blas_in_use(args.threads)
    train = read_tokens(args.train, args.vocab, "--train")
    valid = read_tokens(args.valid, args.vocab, "--valid")
    check_args(args, train, valid)
    drill = read_tokens(args.drill, args.vocab, "--drill") if args.drill else None
    if drill is not None and len(drill) < args.seq + 1:
        raise TrainError(f"{args.drill} (--drill): holds {len(drill)} tokens, fewer than --seq + 1 = {args.seq + 1}")
    for flag in ("drill_mix_start", "drill_mix_end"):
        if not 0 <= getattr(args, flag) <= 1:
            raise TrainError(f"--{flag.replace('_', '-')} is {getattr(args, flag)}; it must lie in [0, 1]")
    if drill is None and (args.drill_mix_start > 0 or args.drill_mix_end > 0):
        raise TrainError("--drill-mix-start/--drill-mix-end need --drill FILE")
    dev = read_dev(args.dev) if args.dev else None
    os.makedirs(args.out, exist_ok=True)
    torch.manual_seed(args.seed)
    rng = np.random.Generator(np.random.PCG64(args.seed))
    model = OPTDecoder(args.vocab, args.hidden, args.layers, args.heads, args.ffn, args.max_positions, args.seed,
                       embed_std=args.embed_std)
    if args.prev_head < 0 or args.prev_head_pos_amp <= 0:
        raise TrainError("--prev-head must not be negative and --prev-head-pos-amp must be positive")
    lags = parse_lags(args.prev_head_lags)
    held = prev_token_init(model, args.prev_head, args.prev_head_pos_amp, lags) if args.prev_head > 0 else []
    opt = torch.optim.AdamW(param_groups(model, args.weight_decay), lr=args.lr, betas=(0.9, 0.95), eps=1e-8)
    starts_valid = validation_windows(valid, args.seq, args.eval_windows)
    n_params = sum(p.numel() for p in model.parameters())

    t0 = time.monotonic()
    evals, best = [], None
    sums = {"ce": 0.0, "l1": 0.0, "n": 0, "train_s": 0.0}
    first = 0
    if args.state and os.path.exists(args.state):
        first, evals, best, elapsed = resume(args, model, opt, rng)
        t0 -= elapsed
        print(f"train: resuming {args.state} at step {first}", file=sys.stderr, flush=True)

    def save_state(step):
        """save_state writes everything a later run needs to continue exactly after step."""
        if not args.state:
            return
        buf = io.BytesIO()
        torch.save({"format": STATE_FORMAT, "args": vars(args), "step": step, "model": model.state_dict(),
                    "opt": opt.state_dict(), "rng": rng.bit_generator.state, "evals": evals, "best": best,
                    "elapsed_s": time.monotonic() - t0}, buf)
        write_atomic(args.state, buf.getvalue())

    def do_eval(step, lr_now):
        nonlocal best
        model.eval()
        vloss, zf, cos = evaluate(model, valid, starts_valid, args.seq, args.batch)
        accs = dev_accuracy(model, dev, args.dev_items, args.pad) if dev is not None else None
        model.train()
        n = max(sums["n"], 1)
        e = {"step": step, "train_loss": _finite(sums["ce"] / n) if sums["n"] else None,
             "act_l1": _finite(sums["l1"] / n) if sums["n"] else None, "valid_loss": _finite(vloss), "zero_frac": zf,
             "residual_cos": _finite(cos), "dev_acc": accs,
             "lr": lr_now, "tokens_per_s": sums["n"] * args.batch * args.seq / max(sums["train_s"], 1e-9),
             "elapsed_s": time.monotonic() - t0}
        line = eval_line(e)
        e["line"] = line
        print(line, file=sys.stderr, flush=True)
        if args.log:
            with open(args.log, "a", encoding="utf-8") as f:
                f.write(line + "\n")
        evals.append(e)
        if best is None or vloss < best[1]:  # a NaN loss never wins
            best = (step, vloss, {k: v.detach().clone() for k, v in model.state_dict().items()})
        sums.update(ce=0.0, l1=0.0, n=0, train_s=0.0)

    if first == 0:
        do_eval(0, lr_at(0, args.steps, args.lr, args.warmup, args.schedule))
    for step in range(first, args.steps):
        ts = time.monotonic()
        lr_now = lr_at(step, args.steps, args.lr, args.warmup, args.schedule)
        for g in opt.param_groups:
            g["lr"] = lr_now
        w = windows(train, rng.integers(0, len(train) - args.seq, size=args.batch), args.seq)
        if drill is not None:
            # Curriculum: each window comes from the drills with a probability
            # that moves linearly from --drill-mix-start to --drill-mix-end.
            mix = args.drill_mix_start + (args.drill_mix_end - args.drill_mix_start) * step / max(args.steps - 1, 1)
            from_drill = rng.random(args.batch) < mix
            if from_drill.any():
                d = windows(drill, rng.integers(0, len(drill) - args.seq, size=int(from_drill.sum())), args.seq)
                w[torch.from_numpy(from_drill)] = d
        if args.act_l1 > 0:
            logits, act_mean, _ = model(w[:, :-1], act_stats=True)
        else:
            logits, act_mean = model(w[:, :-1]), None
        ce = F.cross_entropy(logits.reshape(-1, args.vocab), w[:, 1:].reshape(-1))
        loss = ce if act_mean is None else ce + args.act_l1 * act_mean
        opt.zero_grad(set_to_none=True)
        loss.backward()
        for p, idx, _ in held:  # --prev-head: the built heads and what they read take no gradient step
            p.grad[idx] = 0
        torch.nn.utils.clip_grad_norm_(model.parameters(), 1.0)  # frozen parameters have no gradient
        opt.step()
        with torch.no_grad():
            for p, idx, value in held:  # undo decoupled weight decay on the held entries
                p[idx] = value
        sums["ce"] += float(ce)
        sums["l1"] += 0.0 if act_mean is None else args.act_l1 * float(act_mean)
        sums["n"] += 1
        sums["train_s"] += time.monotonic() - ts
        if (step + 1) % args.eval_every == 0 or step + 1 == args.steps:
            do_eval(step + 1, lr_now)
            save_state(step + 1)

    if args.select == "last":  # the model holds them already
        chosen = (args.steps, evals[-1]["valid_loss"] if evals else None, model.state_dict())
    else:
        chosen = best
        model.load_state_dict(best[2])
    names = [n for n, _ in model.named_parameters()]
    write_atomic(os.path.join(args.out, "model.safetensors"), safetensors_bytes({n: chosen[2][n] for n in names}))
    write_atomic(os.path.join(args.out, "config.json"), (json.dumps(opt_config(args), indent=2) + "\n").encode())
    log = {"args": vars(args), "torch_version": torch.__version__, "blas": blas, "threads": args.threads,
           "parameters": n_params, "tokens_seen": args.steps * args.batch * args.seq,
           "wall_time_s": time.monotonic() - t0,
           "weight_decay_on": "q/k/v/out_proj and fc1/fc2 weight matrices; none on biases, LayerNorms, "
                              "embed_tokens (tied head) and embed_positions",
           "evals": evals, "best_step": best[0], "best_valid_loss": best[1],
           "select": args.select, "written_step": chosen[0], "written_valid_loss": chosen[1]}
    write_atomic(os.path.join(args.out, "train_log.json"), (json.dumps(log, indent=2) + "\n").encode())
    return model, log


def parse_args(argv=None):
    """parse_args reads the command line."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--train", required=True, help="training split, little-endian uint16 token ids")
    ap.add_argument("--valid", required=True, help="validation split, little-endian uint16 token ids")
    ap.add_argument("--vocab", type=int, required=True, help="vocabulary size")
    ap.add_argument("--out", required=True, help="output checkpoint directory")
    ap.add_argument("--layers", type=int, default=4)
    ap.add_argument("--hidden", type=int, default=128)
    ap.add_argument("--heads", type=int, default=4)
    ap.add_argument("--ffn", type=int, default=512)
    ap.add_argument("--seq", type=int, default=256, help="training window length in tokens")
    ap.add_argument("--batch", type=int, default=32, help="windows per step")
    ap.add_argument("--steps", type=int, required=True, help="optimiser steps")
    ap.add_argument("--lr", type=float, default=3e-3, help="peak learning rate")
    ap.add_argument("--warmup", type=int, default=200, help="linear warmup steps")
    ap.add_argument("--schedule", choices=("cosine", "constant"), default="cosine",
                    help="after the warmup: cosine decay to a tenth of --lr at the last step, or constant")
    ap.add_argument("--select", choices=("valid-loss", "last"), default="valid-loss",
                    help="which weights to write: the eval with the lowest validation loss, or the last step's "
                         "(validation loss does not track few-shot accuracy once it flattens)")
    ap.add_argument("--state", help="save a resumable training state here at every eval, and resume from it "
                                    "when it exists")
    ap.add_argument("--weight-decay", type=float, default=0.1)
    ap.add_argument("--embed-std", type=float, default=0.02, help="standard deviation of the token and position embeddings at initialisation")
    ap.add_argument("--act-l1", type=float, default=0.0, help="weight of the mean post-ReLU activation in the loss")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--threads", type=int, default=2, help="torch and OpenBLAS threads")
    ap.add_argument("--bos", type=int, default=2, help="BOS id (open OPT checkpoints use 2)")
    ap.add_argument("--eos", type=int, default=2, help="EOS id (open OPT checkpoints use 2)")
    ap.add_argument("--pad", type=int, default=1, help="padding id (open OPT checkpoints use 1)")
    ap.add_argument("--max-positions", type=int, default=512)
    ap.add_argument("--eval-every", type=int, default=200, help="steps between validation evals")
    ap.add_argument("--eval-windows", type=int, default=64, help="validation windows of --seq tokens per eval")
    ap.add_argument("--log", help="text file to append the eval lines to")
    ap.add_argument("--drill", help="retrieval drills, little-endian uint16 token ids (mkdata's drill.u16)")
    ap.add_argument("--drill-mix-start", type=float, default=0.0,
                    help="share of each step's windows drawn from --drill at the first step")
    ap.add_argument("--drill-mix-end", type=float, default=0.0,
                    help="share of each step's windows drawn from --drill at the last step (linear in between)")
    ap.add_argument("--dev", help="dev probes (mkdata's dev.json): log 4-shot accuracy per family at each eval")
    ap.add_argument("--dev-items", type=int, default=40, help="dev probes scored per family at each eval")
    ap.add_argument("--prev-head", type=float, default=0.0,
                    help="build fixed-lag heads into layer 0 with this gain (0: off): sinusoidal, frozen position "
                         "rows, held query/key rows and held inputs; see prev_token_init")
    ap.add_argument("--prev-head-pos-amp", type=float, default=0.06,
                    help="amplitude of the position rows --prev-head writes")
    ap.add_argument("--prev-head-lags", default="1",
                    help="with --prev-head: comma-separated lags, one built head of layer 0 per lag (1: previous token)")
    return ap.parse_args(argv)


def main(argv=None):
    """main is the command line entry point; it returns the exit status."""
    args = parse_args(argv)
    try:
        run(args)
    except TrainError as e:
        print(f"train: {e}", file=sys.stderr)
        return 2
    except OSError as e:  # e.g. --out or --log not writable; the message names the path
        print(f"train: writing outputs: {e}; check the --out and --log paths", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
