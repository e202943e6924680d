#!/usr/bin/python3
"""selftest: checks torchref.py and torchbench.py on tiny random checkpoints.

    /usr/bin/python3 selftest.py [-v]

Checkpoints are written by the small safetensors writer below into a
temporary directory; nothing is downloaded. Besides the properties the
reference must have (KV cache == recomputation, OPT position offset, tied and
untied heads, grouped-query attention, uniform logits), each family is checked
against a second, loop-based float64 numpy implementation in this file.
"""

import json
import math
import os
import struct
import subprocess
import sys
import tempfile
import unittest

import numpy as np
import torch

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
import torchref  # noqa: E402

PY = "/usr/bin/python3"


# ---------------------------------------------------------------- checkpoint writing

def write_safetensors(path, tensors, dtype="F32"):
    """Writes {name: float array} with every tensor stored as dtype (F32, F16, BF16)."""
    header, blobs, off = {}, [], 0
    for name in sorted(tensors):
        a = np.asarray(tensors[name], dtype=np.float32)
        if dtype == "F32":
            raw = a.astype("<f4").tobytes()
        elif dtype == "F16":
            raw = a.astype("<f2").tobytes()
        else:  # BF16 by truncation, enough for tests
            raw = (a.view(np.uint32) >> 16).astype("<u2").tobytes()
        header[name] = {"dtype": dtype, "shape": list(a.shape), "data_offsets": [off, off + len(raw)]}
        blobs.append(raw)
        off += len(raw)
    header["__metadata__"] = {"format": "pt"}
    text = json.dumps(header).encode()
    text += b" " * (-len(text) % 8)
    with open(path, "wb") as f:
        f.write(struct.pack("<Q", len(text)) + text + b"".join(blobs))


def write_checkpoint(d, config, tensors, dtype="F32"):
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, "config.json"), "w") as f:
        json.dump(config, f)
    write_safetensors(os.path.join(d, "model.safetensors"), tensors, dtype)
    return d


def _rand(rng, *shape, scale=0.3):
    return (rng.standard_normal(shape) * scale).astype(np.float32)


def opt_checkpoint(seed=0, d=16, heads=2, layers=2, ffn=24, vocab=40, max_pos=32):
    rng = np.random.default_rng(seed)
    cfg = {"model_type": "opt", "vocab_size": vocab, "hidden_size": d, "num_hidden_layers": layers,
           "num_attention_heads": heads, "ffn_dim": ffn, "max_position_embeddings": max_pos,
           "word_embed_proj_dim": d, "do_layer_norm_before": True, "activation_function": "relu"}
    p = "model.decoder."
    t = {p + "embed_tokens.weight": _rand(rng, vocab, d, scale=1.0),
         p + "embed_positions.weight": _rand(rng, max_pos + 2, d, scale=1.0),
         p + "final_layer_norm.weight": 1 + _rand(rng, d, scale=0.1), p + "final_layer_norm.bias": _rand(rng, d, scale=0.1)}
    for i in range(layers):
        q = f"{p}layers.{i}."
        for ln in ("self_attn_layer_norm", "final_layer_norm"):
            t[q + ln + ".weight"], t[q + ln + ".bias"] = 1 + _rand(rng, d, scale=0.1), _rand(rng, d, scale=0.1)
        for proj in ("q_proj", "k_proj", "v_proj", "out_proj"):
            t[q + f"self_attn.{proj}.weight"], t[q + f"self_attn.{proj}.bias"] = _rand(rng, d, d), _rand(rng, d)
        t[q + "fc1.weight"], t[q + "fc1.bias"] = _rand(rng, ffn, d), _rand(rng, ffn)
        t[q + "fc2.weight"], t[q + "fc2.bias"] = _rand(rng, d, ffn), _rand(rng, d)
    return cfg, t


def gpt2_checkpoint(seed=1, d=16, heads=4, layers=2, vocab=40, n_pos=32, prefix="transformer."):
    rng = np.random.default_rng(seed)
    ffn = 4 * d
    cfg = {"model_type": "gpt2", "vocab_size": vocab, "n_embd": d, "n_layer": layers, "n_head": heads,
           "n_positions": n_pos, "n_inner": None, "layer_norm_epsilon": 1e-5, "activation_function": "gelu_new"}
    p = prefix
    t = {p + "wte.weight": _rand(rng, vocab, d, scale=1.0), p + "wpe.weight": _rand(rng, n_pos, d, scale=1.0),
         p + "ln_f.weight": 1 + _rand(rng, d, scale=0.1), p + "ln_f.bias": _rand(rng, d, scale=0.1)}
    for i in range(layers):
        q = f"{p}h.{i}."
        for ln in ("ln_1", "ln_2"):
            t[q + ln + ".weight"], t[q + ln + ".bias"] = 1 + _rand(rng, d, scale=0.1), _rand(rng, d, scale=0.1)
        t[q + "attn.c_attn.weight"], t[q + "attn.c_attn.bias"] = _rand(rng, d, 3 * d), _rand(rng, 3 * d)
        t[q + "attn.c_proj.weight"], t[q + "attn.c_proj.bias"] = _rand(rng, d, d), _rand(rng, d)
        t[q + "mlp.c_fc.weight"], t[q + "mlp.c_fc.bias"] = _rand(rng, d, ffn), _rand(rng, ffn)
        t[q + "mlp.c_proj.weight"], t[q + "mlp.c_proj.bias"] = _rand(rng, ffn, d), _rand(rng, d)
        t[q + "attn.bias"] = np.tril(np.ones((n_pos, n_pos), np.float32))[None, None]  # buffer, ignored
    return cfg, t


def llama_checkpoint(seed=2, d=16, heads=4, kv=2, layers=2, ffn=24, vocab=40, tie=False):
    rng = np.random.default_rng(seed)
    hd = d // heads
    cfg = {"model_type": "llama", "vocab_size": vocab, "hidden_size": d, "num_hidden_layers": layers,
           "num_attention_heads": heads, "num_key_value_heads": kv, "intermediate_size": ffn,
           "max_position_embeddings": 64, "rms_norm_eps": 1e-6, "rope_theta": 10000.0, "rope_scaling": None,
           "hidden_act": "silu", "tie_word_embeddings": tie, "attention_bias": False}
    t = {"model.embed_tokens.weight": _rand(rng, vocab, d, scale=1.0), "model.norm.weight": 1 + _rand(rng, d, scale=0.1)}
    if not tie:
        t["lm_head.weight"] = _rand(rng, vocab, d, scale=1.0)
    for i in range(layers):
        q = f"model.layers.{i}."
        t[q + "input_layernorm.weight"] = 1 + _rand(rng, d, scale=0.1)
        t[q + "post_attention_layernorm.weight"] = 1 + _rand(rng, d, scale=0.1)
        t[q + "self_attn.q_proj.weight"] = _rand(rng, heads * hd, d, scale=0.5)
        t[q + "self_attn.k_proj.weight"] = _rand(rng, kv * hd, d, scale=0.5)
        t[q + "self_attn.v_proj.weight"] = _rand(rng, kv * hd, d)
        t[q + "self_attn.o_proj.weight"] = _rand(rng, d, heads * hd)
        t[q + "mlp.gate_proj.weight"] = _rand(rng, ffn, d)
        t[q + "mlp.up_proj.weight"] = _rand(rng, ffn, d)
        t[q + "mlp.down_proj.weight"] = _rand(rng, d, ffn)
    return cfg, t


# ---------------------------------------------------------------- float64 numpy second implementation

def np_layer_norm(x, w, b, eps):
    mu = x.mean(-1, keepdims=True)
    var = ((x - mu) ** 2).mean(-1, keepdims=True)
    return (x - mu) / np.sqrt(var + eps) * w + b


def np_causal_attention(q, k, v, kv_of_head, scale):
    """q [n, H, hd], k/v [n, KV, hd]; query head h reads KV head kv_of_head(h)."""
    n, nh, hd = q.shape
    out = np.zeros((n, nh, hd))
    for h in range(nh):
        g = kv_of_head(h)
        for i in range(n):
            s = np.array([q[i, h] @ k[j, g] * scale for j in range(i + 1)])
            p = np.exp(s - s.max())
            p /= p.sum()
            out[i, h] = sum(p[j] * v[j, g] for j in range(i + 1))
    return out.reshape(n, nh * hd)


def np_opt(cfg, t, ids):
    T = {k: v.astype(np.float64) for k, v in t.items()}
    p, d, H = "model.decoder.", cfg["hidden_size"], cfg["num_attention_heads"]
    hd = d // H
    x = np.stack([T[p + "embed_tokens.weight"][tok] + T[p + "embed_positions.weight"][i + 2] for i, tok in enumerate(ids)])
    n = len(ids)

    def lin(name, h):
        return h @ T[name + ".weight"].T + T[name + ".bias"]

    for i in range(cfg["num_hidden_layers"]):
        q = f"{p}layers.{i}."
        h = np_layer_norm(x, T[q + "self_attn_layer_norm.weight"], T[q + "self_attn_layer_norm.bias"], 1e-5)
        qq = lin(q + "self_attn.q_proj", h).reshape(n, H, hd)
        kk = lin(q + "self_attn.k_proj", h).reshape(n, H, hd)
        vv = lin(q + "self_attn.v_proj", h).reshape(n, H, hd)
        x = x + lin(q + "self_attn.out_proj", np_causal_attention(qq, kk, vv, lambda h: h, hd ** -0.5))
        h = np_layer_norm(x, T[q + "final_layer_norm.weight"], T[q + "final_layer_norm.bias"], 1e-5)
        x = x + lin(q + "fc2", np.maximum(lin(q + "fc1", h), 0))
    x = np_layer_norm(x, T[p + "final_layer_norm.weight"], T[p + "final_layer_norm.bias"], 1e-5)
    return x @ T.get("lm_head.weight", T[p + "embed_tokens.weight"]).T


def np_gpt2(cfg, t, ids, p="transformer."):
    T = {k: v.astype(np.float64) for k, v in t.items()}
    d, H = cfg["n_embd"], cfg["n_head"]
    hd, n = d // H, len(ids)
    x = np.stack([T[p + "wte.weight"][tok] + T[p + "wpe.weight"][i] for i, tok in enumerate(ids)])
    for i in range(cfg["n_layer"]):
        q = f"{p}h.{i}."
        h = np_layer_norm(x, T[q + "ln_1.weight"], T[q + "ln_1.bias"], 1e-5)
        qkv = h @ T[q + "attn.c_attn.weight"] + T[q + "attn.c_attn.bias"]
        qq, kk, vv = (qkv[:, j * d:(j + 1) * d].reshape(n, H, hd) for j in range(3))
        a = np_causal_attention(qq, kk, vv, lambda h: h, 1 / math.sqrt(hd))
        x = x + a @ T[q + "attn.c_proj.weight"] + T[q + "attn.c_proj.bias"]
        h = np_layer_norm(x, T[q + "ln_2.weight"], T[q + "ln_2.bias"], 1e-5)
        u = h @ T[q + "mlp.c_fc.weight"] + T[q + "mlp.c_fc.bias"]
        u = 0.5 * u * (1 + np.tanh(math.sqrt(2 / math.pi) * (u + 0.044715 * u ** 3)))  # gelu_new, from memory
        x = x + u @ T[q + "mlp.c_proj.weight"] + T[q + "mlp.c_proj.bias"]
    x = np_layer_norm(x, T[p + "ln_f.weight"], T[p + "ln_f.bias"], 1e-5)
    return x @ T[p + "wte.weight"].T


def np_llama(cfg, t, ids, kv_of_head=None):
    T = {k: v.astype(np.float64) for k, v in t.items()}
    d, H, KV = cfg["hidden_size"], cfg["num_attention_heads"], cfg["num_key_value_heads"]
    hd, n, eps, half = d // H, len(ids), cfg["rms_norm_eps"], d // H // 2
    kv_of_head = kv_of_head or (lambda h: h // (H // KV))

    def rms(x, w):
        return x / np.sqrt((x ** 2).mean(-1, keepdims=True) + eps) * w

    def rope(x):  # x [n, heads, hd]; pairs (i, i+half) rotate by pos * theta^(-2i/hd)
        out = x.copy()
        for pos in range(n):
            for i in range(half):
                a = pos * cfg["rope_theta"] ** (-2 * i / hd)
                x1, x2 = x[pos, :, i], x[pos, :, i + half]
                out[pos, :, i] = x1 * math.cos(a) - x2 * math.sin(a)
                out[pos, :, i + half] = x2 * math.cos(a) + x1 * math.sin(a)
        return out

    x = T["model.embed_tokens.weight"][ids]
    for i in range(cfg["num_hidden_layers"]):
        q = f"model.layers.{i}."
        h = rms(x, T[q + "input_layernorm.weight"])
        qq = rope((h @ T[q + "self_attn.q_proj.weight"].T).reshape(n, H, hd))
        kk = rope((h @ T[q + "self_attn.k_proj.weight"].T).reshape(n, KV, hd))
        vv = (h @ T[q + "self_attn.v_proj.weight"].T).reshape(n, KV, hd)
        x = x + np_causal_attention(qq, kk, vv, kv_of_head, 1 / math.sqrt(hd)) @ T[q + "self_attn.o_proj.weight"].T
        h = rms(x, T[q + "post_attention_layernorm.weight"])
        g = h @ T[q + "mlp.gate_proj.weight"].T
        x = x + (g / (1 + np.exp(-g)) * (h @ T[q + "mlp.up_proj.weight"].T)) @ T[q + "mlp.down_proj.weight"].T
    head = T["model.embed_tokens.weight"] if cfg["tie_word_embeddings"] else T["lm_head.weight"]
    return rms(x, T["model.norm.weight"]) @ head.T


# ---------------------------------------------------------------- tests

IDS = [3, 17, 5, 29, 0, 11, 38, 7]


class Base(unittest.TestCase):
    def setUp(self):
        self._tmp = tempfile.TemporaryDirectory()
        self.tmp = self._tmp.name

    def tearDown(self):
        self._tmp.cleanup()

    def model(self, name, cfg, t, dtype="F32"):
        return torchref.Model(write_checkpoint(os.path.join(self.tmp, name), cfg, t, dtype))

    def logits(self, name, cfg, t, ids=IDS, dtype="F32"):
        return self.model(name, cfg, t, dtype).forward(ids).numpy()


class AgainstNumpy(Base):
    """Each family agrees with the float64 loop implementation above."""

    def check(self, got, want):
        np.testing.assert_allclose(got, want, rtol=1e-4, atol=1e-4)
        self.assertGreater(np.ptp(want), 0.5)  # logits actually vary, so the comparison means something

    def test_opt(self):
        cfg, t = opt_checkpoint()
        self.check(self.logits("opt", cfg, t), np_opt(cfg, t, IDS))

    def test_gpt2_prefixed_and_bare(self):
        cfg, t = gpt2_checkpoint()
        want = np_gpt2(cfg, t, IDS)
        self.check(self.logits("gpt2", cfg, t), want)
        bare = {k[len("transformer."):]: v for k, v in t.items()}
        self.check(self.logits("gpt2bare", cfg, bare), want)

    def test_llama_gqa(self):
        cfg, t = llama_checkpoint()
        self.assertLess(cfg["num_key_value_heads"], cfg["num_attention_heads"])
        self.check(self.logits("llama", cfg, t), np_llama(cfg, t, IDS))


class KVCache(Base):
    """Cached greedy generation equals recomputing the whole sequence."""

    def check(self, m, prompt, steps=10):
        cache, step_logits = m.new_cache(), []
        logits = m.forward(prompt, 0, cache)
        gen = []
        for _ in range(steps):
            step_logits.append(logits[-1])
            gen.append(int(torch.argmax(logits[-1])))
            logits = m.forward([gen[-1]], len(prompt) + len(gen) - 1, cache)
        self.assertEqual(m.generate(prompt, steps), gen)
        full = m.forward(prompt + gen)
        n = len(prompt)
        self.assertEqual([int(torch.argmax(full[n - 1 + i])) for i in range(steps)], gen)
        np.testing.assert_allclose(torch.stack(step_logits).numpy(), full[n - 1:n - 1 + steps].numpy(), rtol=1e-5, atol=1e-5)
        self.assertGreater(len(set(gen)), 1)  # a degenerate model would make this vacuous

    def test_opt(self):
        self.check(self.model("opt", *opt_checkpoint()), [1, 2, 3])

    def test_gpt2(self):
        self.check(self.model("gpt2", *gpt2_checkpoint()), [4, 9])

    def test_llama(self):
        self.check(self.model("llama", *llama_checkpoint()), [5, 6, 7, 8])

    def test_stop_id_is_included(self):
        m = self.model("opt", *opt_checkpoint())
        free = m.generate([1, 2, 3], 10)
        k = next(i for i in range(1, 10) if free[i] not in free[:i])  # first fresh token after the first
        self.assertEqual(m.generate([1, 2, 3], 10, [free[k]]), free[:k + 1])
        self.assertEqual(m.generate([1, 2, 3], 0), [])


class OPTPositions(Base):
    def test_offset_of_two(self):
        cfg, t = opt_checkpoint()
        base = self.logits("base", cfg, t)
        pos = t["model.decoder.embed_positions.weight"]
        junk = dict(t)
        junk["model.decoder.embed_positions.weight"] = pos.copy()
        junk["model.decoder.embed_positions.weight"][:2] = 100.0  # rows 0 and 1 are never used
        np.testing.assert_array_equal(self.logits("junk01", cfg, junk), base)
        moved = dict(t)
        moved["model.decoder.embed_positions.weight"] = pos.copy()
        # row 2 is position 0 (not a constant shift: LayerNorm would remove that)
        moved["model.decoder.embed_positions.weight"][2] += np.linspace(-1, 1, cfg["hidden_size"], dtype=np.float32)
        got = self.logits("row2", cfg, moved)
        self.assertGreater(np.abs(got[0] - base[0]).max(), 1e-3)


class Heads(Base):
    """Tied and untied output heads; an untied head of 2*embed doubles every logit exactly."""

    def test_opt(self):
        cfg, t = opt_checkpoint()
        tied = self.logits("tied", cfg, t)
        untied = dict(t, **{"lm_head.weight": 2 * t["model.decoder.embed_tokens.weight"]})
        np.testing.assert_array_equal(self.logits("untied", cfg, untied), 2 * tied)

    def test_llama(self):
        cfg, t = llama_checkpoint(tie=True)
        tied = self.logits("tied", cfg, t)
        np.testing.assert_allclose(tied, np_llama(cfg, t, IDS), rtol=1e-4, atol=1e-4)
        untied = dict(t, **{"lm_head.weight": 2 * t["model.embed_tokens.weight"]})
        np.testing.assert_array_equal(self.logits("untied", dict(cfg, tie_word_embeddings=False), untied), 2 * tied)


class GroupedQueryAttention(Base):
    def test_kv_heads_serve_consecutive_query_heads(self):
        cfg, t = llama_checkpoint(kv=2, heads=4)
        gqa = self.logits("gqa", cfg, t)
        hd = cfg["hidden_size"] // cfg["num_attention_heads"]

        def expand(order):  # full multi-head model whose head h copies KV head order[h]
            full = dict(t)
            for i in range(cfg["num_hidden_layers"]):
                for p in ("k_proj", "v_proj"):
                    w = t[f"model.layers.{i}.self_attn.{p}.weight"].reshape(2, hd, -1)
                    full[f"model.layers.{i}.self_attn.{p}.weight"] = w[order].reshape(4 * hd, -1)
            return full

        mha = dict(cfg, num_key_value_heads=4)
        np.testing.assert_allclose(self.logits("consecutive", mha, expand([0, 0, 1, 1])), gqa, rtol=1e-5, atol=1e-5)
        wrong = self.logits("interleaved", mha, expand([0, 1, 0, 1]))
        self.assertGreater(np.abs(wrong - gqa).max(), 1e-3)


class UniformLogits(Base):
    def check(self, m):
        lp = torch.log_softmax(m.forward(IDS), dim=-1).numpy()
        np.testing.assert_allclose(lp, np.full(lp.shape, -math.log(m.vocab)), rtol=0, atol=1e-6)
        self.assertEqual(m.generate([1, 2], 3), [0, 0, 0])  # all tied: argmax takes the lowest id

    def test_opt(self):
        cfg, t = opt_checkpoint()
        t["model.decoder.final_layer_norm.weight"][:] = 0
        t["model.decoder.final_layer_norm.bias"][:] = 0
        self.check(self.model("opt", cfg, t))

    def test_llama(self):
        cfg, t = llama_checkpoint()
        t["model.norm.weight"][:] = 0
        self.check(self.model("llama", cfg, t))


class Storage(Base):
    def test_half_precision_upcast(self):
        cfg, t = opt_checkpoint()
        rounded = {k: v.astype(np.float16).astype(np.float32) for k, v in t.items()}
        np.testing.assert_array_equal(self.logits("f16", cfg, t, dtype="F16"), self.logits("f32", cfg, rounded))
        bf = {k: (v.view(np.uint32) & 0xFFFF0000).view(np.float32) for k, v in t.items()}
        np.testing.assert_array_equal(self.logits("bf16", cfg, t, dtype="BF16"), self.logits("f32bf", cfg, bf))

    def test_bf16_bits(self):
        path = os.path.join(self.tmp, "x.safetensors")
        raw = np.array([0x3F80, 0xC000, 0x4049, 0x0000], dtype="<u2").tobytes()  # IEEE bit patterns, common practice
        head = json.dumps({"x": {"dtype": "BF16", "shape": [4], "data_offsets": [0, 8]}}).encode()
        with open(path, "wb") as f:
            f.write(struct.pack("<Q", len(head)) + head + raw)
        self.assertEqual(torchref.read_safetensors(path)["x"].tolist(), [1.0, -2.0, 3.140625, 0.0])

    def test_sharded_equals_single(self):
        cfg, t = gpt2_checkpoint()
        single = self.logits("single", cfg, t)
        d = os.path.join(self.tmp, "sharded")
        os.makedirs(d)
        with open(os.path.join(d, "config.json"), "w") as f:
            json.dump(cfg, f)
        names = sorted(t)
        shards = {"model-00001-of-00002.safetensors": names[::2], "model-00002-of-00002.safetensors": names[1::2]}
        wmap = {}
        for file, part in shards.items():
            write_safetensors(os.path.join(d, file), {n: t[n] for n in part})
            wmap.update({n: file for n in part})
        with open(os.path.join(d, "model.safetensors.index.json"), "w") as f:
            json.dump({"metadata": {}, "weight_map": wmap}, f)
        np.testing.assert_array_equal(torchref.Model(d).forward(IDS).numpy(), single)


class CommandLine(Base):
    def cli(self, model_dir, request, threads=1):
        inp, out = os.path.join(self.tmp, "in.json"), os.path.join(self.tmp, f"out{threads}.json")
        with open(inp, "w") as f:
            json.dump(request, f)
        r = subprocess.run([PY, os.path.join(HERE, "torchref.py"), "--model", model_dir, "--input", inp,
                            "--output", out, "--threads", str(threads)], capture_output=True, text=True)
        if r.returncode != 0:
            return r, None
        with open(out) as f:
            return r, f.read()

    def test_protocol_round_trip_and_threads(self):
        cfg, t = llama_checkpoint()
        d = write_checkpoint(os.path.join(self.tmp, "llama"), cfg, t)
        req = {"sequences": [IDS, [1]], "generate": [{"prompt": [1, 2], "max_new_tokens": 5, "stop_ids": []}]}
        r1, text1 = self.cli(d, req, 1)
        self.assertEqual(r1.returncode, 0, r1.stderr)
        r2, text2 = self.cli(d, req, 2)
        self.assertEqual(r2.returncode, 0, r2.stderr)
        self.assertEqual(text1, text2)  # bit-identical for any thread count
        out = json.loads(text1)
        m = torchref.Model(d)
        want = m.forward(IDS).numpy()
        np.testing.assert_array_equal(np.array(out["logits"][0], dtype=np.float32), want)  # floats round-trip exactly
        self.assertEqual(np.array(out["logits"][1]).shape, (1, cfg["vocab_size"]))
        self.assertEqual(out["generated"], [m.generate([1, 2], 5)])

    def expect_error(self, cfg, t, needle, req=None, dtype="F32"):
        d = write_checkpoint(os.path.join(self.tmp, "bad"), cfg, t, dtype)
        r, _ = self.cli(d, req or {"sequences": [[1, 2]]})
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertIn(needle, r.stderr)
        return d

    def test_errors(self):
        cfg, t = opt_checkpoint()
        missing = dict(t)
        del missing["model.decoder.layers.1.fc2.bias"]
        self.expect_error(cfg, missing, "'model.decoder.layers.1.fc2.bias' is missing")
        wrong = dict(t, **{"model.decoder.layers.0.fc1.weight": np.zeros((3, 3), np.float32)})
        self.expect_error(cfg, wrong, "'model.decoder.layers.0.fc1.weight' has shape [3, 3]")
        self.expect_error(dict(cfg, do_layer_norm_before=False), t, "do_layer_norm_before")
        self.expect_error(cfg, t, "sequences[0][1] = 99", {"sequences": [[1, 99]]})
        self.expect_error(cfg, dict(t, extra=np.zeros(2, np.float32)), "'extra'")
        lcfg, lt = llama_checkpoint()
        self.expect_error(dict(lcfg, rope_scaling={"type": "linear", "factor": 2.0}), lt, "rope_scaling")
        del lt["lm_head.weight"]
        self.expect_error(lcfg, lt, "'lm_head.weight' is missing")

    def test_truncated_file(self):
        cfg, t = opt_checkpoint()
        d = write_checkpoint(os.path.join(self.tmp, "trunc"), cfg, t)
        path = os.path.join(d, "model.safetensors")
        size = os.path.getsize(path)
        with open(path, "r+b") as f:
            f.truncate(size - 4)
        r, _ = self.cli(d, {"sequences": [[1]]})
        self.assertEqual(r.returncode, 2)
        self.assertIn("past the end", r.stderr)


class Bench(Base):
    def test_torchbench_runs(self):
        cfg, t = opt_checkpoint(d=32, heads=4, layers=2, ffn=64, vocab=64, max_pos=128)
        d = write_checkpoint(os.path.join(self.tmp, "opt"), cfg, t, "F16")
        r = subprocess.run([PY, os.path.join(HERE, "torchbench.py"), "--model", d, "--threads", "1",
                            "--prefill", "32", "--decode", "8", "--gemm-reps", "1"], capture_output=True, text=True)
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(r.stdout)
        self.assertEqual(out["impl"], f"pytorch {torch.__version__}")
        self.assertEqual(out["threads"], 1)
        for k in ("rss_after_load_mib", "load_s", "prefill_tok_s", "decode_tok_s"):
            self.assertGreater(out[k], 0, k)
        self.assertEqual(sorted(out["gemm_gflops"]), ["512x3072x768", "512x768x3072"])
        self.assertTrue(all(v > 0 for v in out["gemm_gflops"].values()))


if __name__ == "__main__":
    unittest.main()
