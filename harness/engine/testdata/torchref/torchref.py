#!/usr/bin/python3
"""torchref: an independent float32 reference forward pass in PyTorch.

Written from the layer definitions of three decoder-only families (opt, gpt2,
llama) with torch.nn.functional ops only; the Go engine's logits and greedy
generations are compared against it.

    /usr/bin/python3 torchref.py --model DIR --input IN.json --output OUT.json [--threads 1]

Bad user input (missing tensor, wrong shape, unsupported config, malformed
JSON) is reported on stderr and the script exits with status 2.
"""

import argparse
import json
import math
import os
import struct
import sys

import numpy as np
import torch
import torch.nn.functional as F


class RefError(Exception):
    """RefError is bad user input; its message names the file and the place."""


# ---------------------------------------------------------------- safetensors

# dtype name -> (numpy dtype of the stored element, bytes per element)
_DTYPES = {"F32": (np.dtype("<f4"), 4), "F16": (np.dtype("<f2"), 2), "BF16": (np.dtype("<u2"), 2)}


def read_safetensors(path):
    """read_safetensors parses one safetensors file into float32 tensors.

    Layout: 8-byte little-endian header length N, N bytes of JSON
    {name: {dtype, shape, data_offsets: [begin, end]}, "__metadata__"?},
    then the data buffer that the offsets index.
    """
    out = {}
    with open(path, "rb") as f:
        size = os.fstat(f.fileno()).st_size
        head = f.read(8)
        if len(head) < 8:
            raise RefError(f"{path}: file is {size} bytes, shorter than the 8-byte header length; re-export the checkpoint")
        (n,) = struct.unpack("<Q", head)
        if n > size - 8:
            raise RefError(f"{path}: header length {n} at byte 0 runs past the end of the {size}-byte file")
        try:
            header = json.loads(f.read(n).decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as e:
            raise RefError(f"{path}: header JSON in bytes 8..{8 + n} is invalid: {e}") from e
        if not isinstance(header, dict):
            raise RefError(f"{path}: header JSON in bytes 8..{8 + n} is not an object")
        base = 8 + n
        for name, info in header.items():
            if name == "__metadata__":
                continue
            out[name] = _read_tensor(f, path, base, size, name, info)
    return out


def _read_tensor(f, path, base, size, name, info):
    where = f"{path}: tensor {name!r}"
    if not isinstance(info, dict):
        raise RefError(f"{where}: header entry is not an object")
    dtype, shape, offs = info.get("dtype"), info.get("shape"), info.get("data_offsets")
    if dtype not in _DTYPES:
        raise RefError(f"{where}: dtype {dtype!r} is not supported (use F32, F16 or BF16)")
    if not isinstance(shape, list) or not all(isinstance(s, int) and s >= 0 for s in shape):
        raise RefError(f"{where}: shape {shape!r} is not a list of non-negative integers")
    if not (isinstance(offs, list) and len(offs) == 2 and all(isinstance(o, int) for o in offs)):
        raise RefError(f"{where}: data_offsets {offs!r} is not [begin, end]")
    npdt, width = _DTYPES[dtype]
    begin, end = offs
    want = math.prod(shape) * width
    if begin < 0 or end - begin != want:
        raise RefError(f"{where}: data_offsets [{begin}, {end}] hold {end - begin} bytes, shape {shape} {dtype} needs {want}")
    if base + end > size:
        raise RefError(f"{where}: data ends at byte {base + end}, past the end of the {size}-byte file")
    f.seek(base + begin)
    arr = np.frombuffer(f.read(want), dtype=npdt)
    if dtype == "BF16":
        arr = (arr.astype(np.uint32) << 16).view(np.float32)  # bf16 is the top half of an f32
    else:
        arr = arr.astype(np.float32)  # exact upcast; always a fresh writable copy
    return torch.from_numpy(arr.reshape(shape))


def load_tensors(model_dir):
    """load_tensors reads model.safetensors or the shards named by model.safetensors.index.json."""
    single = os.path.join(model_dir, "model.safetensors")
    index = os.path.join(model_dir, "model.safetensors.index.json")
    if os.path.exists(single):
        return read_safetensors(single)
    if not os.path.exists(index):
        raise RefError(f"{model_dir}: neither model.safetensors nor model.safetensors.index.json exists")
    wmap = _read_json(index).get("weight_map")
    if not isinstance(wmap, dict):
        raise RefError(f"{index}: \"weight_map\" is missing or not an object")
    out = {}
    for shard in sorted(set(wmap.values())):
        if not isinstance(shard, str) or os.sep in shard:
            raise RefError(f"{index}: weight_map names shard {shard!r}, which is not a plain file name")
        tensors = read_safetensors(os.path.join(model_dir, shard))
        for name, file in wmap.items():
            if file == shard:
                if name not in tensors:
                    raise RefError(f"{index}: weight_map puts {name!r} in {shard}, which does not hold it")
                out[name] = tensors[name]
    return out


def _read_json(path):
    try:
        with open(path, encoding="utf-8") as f:
            obj = json.load(f)
    except OSError as e:
        raise RefError(f"{path}: cannot read: {e}") from e
    except json.JSONDecodeError as e:
        raise RefError(f"{path}: invalid JSON at line {e.lineno} column {e.colno}: {e.msg}") from e
    if not isinstance(obj, dict):
        raise RefError(f"{path}: top level is not a JSON object")
    return obj


# ---------------------------------------------------------------- config and weights

class _Config:
    """Typed access to config.json fields with errors that name the field."""

    def __init__(self, path, raw):
        self.path, self.raw = path, raw

    def get(self, key, kind, default=None, required=True):
        if key not in self.raw or self.raw[key] is None:
            if required and default is None:
                raise RefError(f"{self.path}: field {key!r} is missing; add it")
            return default
        v = self.raw[key]
        ok = isinstance(v, (int, float)) and not isinstance(v, bool) if kind is float else isinstance(v, kind)
        if kind is int and isinstance(v, bool):
            ok = False
        if not ok:
            raise RefError(f"{self.path}: field {key!r} is {v!r}, want {kind.__name__}")
        return float(v) if kind is float else v

    def reject(self, what):
        raise RefError(f"{self.path}: {what} is not supported by this reference")


class _Weights:
    """Looks tensors up by name, checks shapes, and tracks which were used."""

    # buffers some checkpoints carry that are not parameters
    _IGNORED_SUFFIXES = (".attn.bias", ".attn.masked_bias", ".rotary_emb.inv_freq")

    def __init__(self, model_dir, tensors):
        self.dir, self.t, self.used = model_dir, tensors, set()

    def has(self, name):
        return name in self.t

    def get(self, name, shape):
        if name not in self.t:
            raise RefError(f"{self.dir}: tensor {name!r} is missing from the checkpoint")
        w = self.t[name]
        if list(w.shape) != list(shape):
            raise RefError(f"{self.dir}: tensor {name!r} has shape {list(w.shape)}, config implies {list(shape)}")
        self.used.add(name)
        return w

    def check_all_used(self):
        extra = sorted(n for n in self.t if n not in self.used and not n.endswith(self._IGNORED_SUFFIXES))
        if extra:
            more = f" (and {len(extra) - 5} more)" if len(extra) > 5 else ""
            raise RefError(f"{self.dir}: tensors not used by the config: {extra[:5]}{more}; the config and weights disagree")


# ---------------------------------------------------------------- shared pieces

def _heads(x, n_heads):
    """[n, H*hd] -> [H, n, hd]"""
    n = x.shape[0]
    return x.view(n, n_heads, -1).transpose(0, 1)


def _attend(q, k, v, start, scale):
    """Causal attention of n new queries (absolute positions start..start+n-1)
    over all T = start+n keys. q [H,n,hd], k/v [H,T,hd]; returns [n, H*hd]."""
    n, t = q.shape[1], k.shape[1]
    scores = torch.matmul(q, k.transpose(1, 2))
    if scale is not None:
        scores = scores * scale
    future = torch.arange(t)[None, :] > torch.arange(start, start + n)[:, None]
    probs = F.softmax(scores.masked_fill(future, float("-inf")), dim=-1)
    return torch.matmul(probs, v).transpose(0, 1).reshape(n, -1)


def _append(cache, i, k, v):
    """Appends this step's keys/values (dim 1 is time) to layer i's cache."""
    if cache[i] is not None:
        k = torch.cat([cache[i][0], k], dim=1)
        v = torch.cat([cache[i][1], v], dim=1)
    cache[i] = (k, v)
    return k, v


# ---------------------------------------------------------------- families

class _OPT:
    def __init__(self, cfg, w):
        if cfg.get("do_layer_norm_before", bool, True) is not True:
            cfg.reject("do_layer_norm_before=false (post-LayerNorm OPT)")
        if cfg.get("_remove_final_layer_norm", bool, False):
            cfg.reject("_remove_final_layer_norm=true")
        if cfg.get("activation_function", str, "relu") != "relu":
            cfg.reject(f"activation_function={cfg.raw['activation_function']!r} (only relu)")
        d, heads = cfg.get("hidden_size", int), cfg.get("num_attention_heads", int)
        if cfg.get("word_embed_proj_dim", int, d) != d:
            cfg.reject("word_embed_proj_dim != hidden_size (project_in/project_out)")
        if d % heads:
            raise RefError(f"{cfg.path}: hidden_size {d} is not a multiple of num_attention_heads {heads}")
        self.vocab, self.d, self.heads = cfg.get("vocab_size", int), d, heads
        self.ffn, nl = cfg.get("ffn_dim", int), cfg.get("num_hidden_layers", int)
        self.max_pos = cfg.get("max_position_embeddings", int)
        bias = cfg.get("enable_bias", bool, True)
        p = "model.decoder."

        def lin(name, out_dim, in_dim):
            return (w.get(name + ".weight", [out_dim, in_dim]), w.get(name + ".bias", [out_dim]) if bias else None)

        def ln(name):
            return (w.get(name + ".weight", [d]), w.get(name + ".bias", [d]))

        self.embed = w.get(p + "embed_tokens.weight", [self.vocab, d])
        self.pos = w.get(p + "embed_positions.weight", [self.max_pos + 2, d])
        self.layers = []
        for i in range(nl):
            q = f"{p}layers.{i}."
            self.layers.append({
                "ln1": ln(q + "self_attn_layer_norm"),
                "q": lin(q + "self_attn.q_proj", d, d), "k": lin(q + "self_attn.k_proj", d, d),
                "v": lin(q + "self_attn.v_proj", d, d), "o": lin(q + "self_attn.out_proj", d, d),
                "ln2": ln(q + "final_layer_norm"),
                "fc1": lin(q + "fc1", self.ffn, d), "fc2": lin(q + "fc2", d, self.ffn),
            })
        self.ln_f = ln(p + "final_layer_norm")
        self.head = w.get("lm_head.weight", [self.vocab, d]) if w.has("lm_head.weight") else self.embed

    def forward(self, ids, start, cache):
        d, eps = self.d, 1e-5
        x = self.embed[ids] + self.pos[torch.arange(start, start + len(ids)) + 2]  # OPT offsets positions by 2
        scale = (d // self.heads) ** -0.5
        for i, L in enumerate(self.layers):
            h = F.layer_norm(x, (d,), *L["ln1"], eps=eps)
            q = F.linear(h, *L["q"]) * scale  # OPT scales q, not the scores
            k, v = _append(cache, i, _heads(F.linear(h, *L["k"]), self.heads), _heads(F.linear(h, *L["v"]), self.heads))
            x = x + F.linear(_attend(_heads(q, self.heads), k, v, start, None), *L["o"])
            h = F.layer_norm(x, (d,), *L["ln2"], eps=eps)
            x = x + F.linear(F.relu(F.linear(h, *L["fc1"])), *L["fc2"])
        return F.linear(F.layer_norm(x, (d,), *self.ln_f, eps=eps), self.head)


class _GPT2:
    def __init__(self, cfg, w):
        act = cfg.get("activation_function", str, "gelu_new")
        if act not in ("gelu_new", "gelu_pytorch_tanh"):
            cfg.reject(f"activation_function={act!r} (only the tanh gelu)")
        for flag in ("scale_attn_by_inverse_layer_idx", "add_cross_attention"):
            if cfg.get(flag, bool, False):
                cfg.reject(f"{flag}=true")
        if cfg.get("scale_attn_weights", bool, True) is not True:
            cfg.reject("scale_attn_weights=false")
        d, heads = cfg.get("n_embd", int), cfg.get("n_head", int)
        if d % heads:
            raise RefError(f"{cfg.path}: n_embd {d} is not a multiple of n_head {heads}")
        self.vocab, self.d, self.heads = cfg.get("vocab_size", int), d, heads
        self.ffn = cfg.get("n_inner", int, 4 * d)
        self.max_pos, self.eps = cfg.get("n_positions", int), cfg.get("layer_norm_epsilon", float, 1e-5)
        nl, ffn = cfg.get("n_layer", int), self.ffn
        p = "transformer." if w.has("transformer.wte.weight") else ""

        def pair(name, wshape, bshape):
            return (w.get(name + ".weight", wshape), w.get(name + ".bias", bshape))

        self.wte = w.get(p + "wte.weight", [self.vocab, d])
        self.wpe = w.get(p + "wpe.weight", [self.max_pos, d])
        self.layers = []
        for i in range(nl):
            q = f"{p}h.{i}."
            self.layers.append({
                "ln1": pair(q + "ln_1", [d], [d]), "attn": pair(q + "attn.c_attn", [d, 3 * d], [3 * d]),
                "proj": pair(q + "attn.c_proj", [d, d], [d]), "ln2": pair(q + "ln_2", [d], [d]),
                "fc": pair(q + "mlp.c_fc", [d, ffn], [ffn]), "out": pair(q + "mlp.c_proj", [ffn, d], [d]),
            })
        self.ln_f = pair(p + "ln_f", [d], [d])
        if w.has("lm_head.weight") and not torch.equal(w.get("lm_head.weight", [self.vocab, d]), self.wte):
            raise RefError(f"{w.dir}: tensor 'lm_head.weight' differs from wte; gpt2 heads must be tied")

    def forward(self, ids, start, cache):
        d, eps = self.d, self.eps
        x = self.wte[ids] + self.wpe[torch.arange(start, start + len(ids))]
        scale = 1.0 / math.sqrt(d // self.heads)
        for i, L in enumerate(self.layers):
            h = F.layer_norm(x, (d,), *L["ln1"], eps=eps)
            q, k, v = (h @ L["attn"][0] + L["attn"][1]).split(d, dim=-1)  # Conv1D: y = x @ W + b
            k, v = _append(cache, i, _heads(k, self.heads), _heads(v, self.heads))
            x = x + _attend(_heads(q, self.heads), k, v, start, scale) @ L["proj"][0] + L["proj"][1]
            h = F.layer_norm(x, (d,), *L["ln2"], eps=eps)
            x = x + F.gelu(h @ L["fc"][0] + L["fc"][1], approximate="tanh") @ L["out"][0] + L["out"][1]
        return F.linear(F.layer_norm(x, (d,), *self.ln_f, eps=eps), self.wte)


class _Llama:
    def __init__(self, cfg, w):
        if cfg.get("hidden_act", str, "silu") != "silu":
            cfg.reject(f"hidden_act={cfg.raw['hidden_act']!r} (only silu)")
        for flag in ("attention_bias", "mlp_bias"):
            if cfg.get(flag, bool, False):
                cfg.reject(f"{flag}=true")
        if cfg.raw.get("rope_scaling") is not None:
            cfg.reject("rope_scaling other than null")
        d, heads = cfg.get("hidden_size", int), cfg.get("num_attention_heads", int)
        kv = cfg.get("num_key_value_heads", int, heads)
        if heads % kv:
            raise RefError(f"{cfg.path}: num_attention_heads {heads} is not a multiple of num_key_value_heads {kv}")
        if "head_dim" not in cfg.raw and d % heads:
            raise RefError(f"{cfg.path}: hidden_size {d} is not a multiple of num_attention_heads {heads}; set head_dim")
        hd = cfg.get("head_dim", int, d // heads)
        if hd % 2:
            raise RefError(f"{cfg.path}: head_dim {hd} is odd; rotary positions need an even head_dim")
        self.vocab, self.d, self.heads, self.kv, self.hd = cfg.get("vocab_size", int), d, heads, kv, hd
        self.eps = cfg.get("rms_norm_eps", float, 1e-6)
        self.max_pos = cfg.get("max_position_embeddings", int)
        ffn, nl = cfg.get("intermediate_size", int), cfg.get("num_hidden_layers", int)
        theta = cfg.get("rope_theta", float, 10000.0)
        self.inv_freq = 1.0 / (theta ** (torch.arange(0, hd, 2, dtype=torch.float32) / hd))
        self.embed = w.get("model.embed_tokens.weight", [self.vocab, d])
        self.layers = []
        for i in range(nl):
            q = f"model.layers.{i}."
            self.layers.append({
                "n1": w.get(q + "input_layernorm.weight", [d]),
                "q": w.get(q + "self_attn.q_proj.weight", [heads * hd, d]),
                "k": w.get(q + "self_attn.k_proj.weight", [kv * hd, d]),
                "v": w.get(q + "self_attn.v_proj.weight", [kv * hd, d]),
                "o": w.get(q + "self_attn.o_proj.weight", [d, heads * hd]),
                "n2": w.get(q + "post_attention_layernorm.weight", [d]),
                "gate": w.get(q + "mlp.gate_proj.weight", [ffn, d]),
                "up": w.get(q + "mlp.up_proj.weight", [ffn, d]),
                "down": w.get(q + "mlp.down_proj.weight", [d, ffn]),
            })
        self.norm = w.get("model.norm.weight", [d])
        tied = cfg.get("tie_word_embeddings", bool, False)
        if not tied:
            self.head = w.get("lm_head.weight", [self.vocab, d])
        else:
            self.head = self.embed
            if w.has("lm_head.weight") and not torch.equal(w.get("lm_head.weight", [self.vocab, d]), self.embed):
                raise RefError(f"{w.dir}: tie_word_embeddings is true but 'lm_head.weight' differs from embed_tokens")

    def _rms(self, x, weight):
        return x * torch.rsqrt(x.pow(2).mean(-1, keepdim=True) + self.eps) * weight

    def _rope(self, x, cos, sin):
        half = x.shape[-1] // 2
        rotated = torch.cat([-x[..., half:], x[..., :half]], dim=-1)  # rotate_half layout
        return x * cos + rotated * sin

    def forward(self, ids, start, cache):
        x = self.embed[ids]
        angles = torch.arange(start, start + len(ids), dtype=torch.float32)[:, None] * self.inv_freq[None, :]
        angles = torch.cat([angles, angles], dim=-1)
        cos, sin = angles.cos(), angles.sin()
        group, scale = self.heads // self.kv, 1.0 / math.sqrt(self.hd)
        for i, L in enumerate(self.layers):
            h = self._rms(x, L["n1"])
            q = self._rope(_heads(F.linear(h, L["q"]), self.heads), cos, sin)
            k = self._rope(_heads(F.linear(h, L["k"]), self.kv), cos, sin)
            k, v = _append(cache, i, k, _heads(F.linear(h, L["v"]), self.kv))
            # KV head j serves the consecutive query heads j*group .. j*group+group-1
            k, v = k.repeat_interleave(group, dim=0), v.repeat_interleave(group, dim=0)
            x = x + F.linear(_attend(q, k, v, start, scale), L["o"])
            h = self._rms(x, L["n2"])
            x = x + F.linear(F.silu(F.linear(h, L["gate"])) * F.linear(h, L["up"]), L["down"])
        return F.linear(self._rms(x, self.norm), self.head)


_FAMILIES = {"opt": _OPT, "gpt2": _GPT2, "llama": _Llama}


# ---------------------------------------------------------------- model API

class Model:
    """Model is a loaded checkpoint of one family; all math is float32."""

    def __init__(self, model_dir):
        cfg_path = os.path.join(model_dir, "config.json")
        cfg = _Config(cfg_path, _read_json(cfg_path))
        family = cfg.get("model_type", str)
        if family not in _FAMILIES:
            cfg.reject(f"model_type {family!r} (want one of {sorted(_FAMILIES)})")
        weights = _Weights(model_dir, load_tensors(model_dir))
        self.family = family
        self.impl = _FAMILIES[family](cfg, weights)
        weights.check_all_used()
        self.vocab, self.max_pos = self.impl.vocab, self.impl.max_pos
        self.n_layers = len(self.impl.layers)

    def new_cache(self):
        """new_cache returns an empty per-layer key/value cache."""
        return [None] * self.n_layers

    def forward(self, ids, start=0, cache=None):
        """forward returns logits [len(ids), vocab] for tokens at positions start.. .

        With cache (from new_cache, holding exactly `start` earlier positions)
        the new keys/values are appended to it; without, start must be 0."""
        if cache is None:
            if start != 0:
                raise ValueError("torchref: forward without a cache must start at 0")
            cache = self.new_cache()
        if start + len(ids) > self.max_pos:
            raise RefError(f"sequence of {start + len(ids)} positions exceeds the model's {self.max_pos}")
        with torch.inference_mode():
            return self.impl.forward(torch.tensor(ids, dtype=torch.long), start, cache)

    def generate(self, prompt, max_new_tokens, stop_ids=()):
        """generate runs greedy decoding with the KV cache; ties go to the lowest id."""
        cache, out, stop = self.new_cache(), [], set(stop_ids)
        if max_new_tokens == 0:
            return out
        logits = self.forward(prompt, 0, cache)
        pos = len(prompt)
        while True:
            tok = int(torch.argmax(logits[-1]))  # torch.argmax returns the first maximal index
            out.append(tok)
            if tok in stop or len(out) == max_new_tokens:
                return out
            logits = self.forward([tok], pos, cache)
            pos += 1


# ---------------------------------------------------------------- CLI

def _ids(path, where, ids, vocab):
    if not isinstance(ids, list) or not ids:
        raise RefError(f"{path}: {where} must be a non-empty list of token ids")
    for j, t in enumerate(ids):
        if not isinstance(t, int) or isinstance(t, bool) or not 0 <= t < vocab:
            raise RefError(f"{path}: {where}[{j}] = {t!r} is not a token id in [0, {vocab})")
    return ids


def run(model, inp, in_path):
    """run evaluates one input object and returns the output object."""
    logits, generated = [], []
    seqs = inp.get("sequences", [])
    if not isinstance(seqs, list):
        raise RefError(f"{in_path}: \"sequences\" is not a list")
    for s, ids in enumerate(seqs):
        where = f"sequences[{s}]"
        _ids(in_path, where, ids, model.vocab)
        if len(ids) > model.max_pos:
            raise RefError(f"{in_path}: {where} has {len(ids)} tokens, the model allows {model.max_pos}")
        logits.append(model.forward(ids).tolist())  # float32 -> Python float is exact
    reqs = inp.get("generate", [])
    if not isinstance(reqs, list):
        raise RefError(f"{in_path}: \"generate\" is not a list")
    for r, req in enumerate(reqs):
        where = f"generate[{r}]"
        if not isinstance(req, dict):
            raise RefError(f"{in_path}: {where} is not an object")
        prompt = _ids(in_path, where + ".prompt", req.get("prompt"), model.vocab)
        n = req.get("max_new_tokens")
        if not isinstance(n, int) or isinstance(n, bool) or n < 0:
            raise RefError(f"{in_path}: {where}.max_new_tokens = {n!r} is not a non-negative integer")
        if len(prompt) + n > model.max_pos:
            raise RefError(f"{in_path}: {where} needs {len(prompt) + n} positions, the model allows {model.max_pos}")
        stop = req.get("stop_ids", [])
        if not isinstance(stop, list) or not all(isinstance(t, int) and not isinstance(t, bool) for t in stop):
            raise RefError(f"{in_path}: {where}.stop_ids is not a list of integers")
        generated.append(model.generate(prompt, n, stop))
    return {"logits": logits, "generated": generated}


def main(argv=None):
    """main is the command line entry point; it returns the exit status."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", required=True, help="checkpoint directory (config.json + safetensors)")
    ap.add_argument("--input", required=True, help="request JSON")
    ap.add_argument("--output", required=True, help="where to write the result JSON")
    ap.add_argument("--threads", type=int, default=1, help="torch intra-op threads")
    args = ap.parse_args(argv)
    if args.threads < 1:
        ap.error("--threads must be at least 1")
    torch.set_num_threads(args.threads)
    try:
        model = Model(args.model)
        out = run(model, _read_json(args.input), args.input)
        try:
            text = json.dumps(out, allow_nan=False, separators=(",", ":"))
        except ValueError as e:  # json refuses NaN/Inf
            raise RefError(f"{args.model}: logits are not finite ({e}); check the weights") from e
    except RefError as e:
        print(f"torchref: {e}", file=sys.stderr)
        return 2
    with open(args.output, "w", encoding="utf-8") as f:
        f.write(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
