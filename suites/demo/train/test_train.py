#!/usr/bin/python3
"""Tests for train.py: /usr/bin/python3 test_train.py (a few seconds).

Trains a tiny model on a synthetic repeating id stream and checks the loss,
the written checkpoint against the project's independent reference forward
pass (harness/engine/testdata/torchref/torchref.py), determinism, the
activation-L1 option, the file layouts and the input errors."""

import contextlib
import importlib.util
import io
import json
import math
import os
import shutil
import struct
import subprocess
import sys
import tempfile
import unittest

import numpy as np
import torch

HERE = os.path.dirname(os.path.abspath(__file__))
TORCHREF = os.path.join(HERE, "..", "..", "..", "harness", "engine", "testdata", "torchref", "torchref.py")


def _load(name, path):
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


train = _load("train", os.path.join(HERE, "train.py"))
torchref = _load("torchref", TORCHREF)

VOCAB, BOS = 64, 2
TINY = ["--vocab", str(VOCAB), "--layers", "2", "--hidden", "32", "--heads", "2", "--ffn", "64",
        "--seq", "32", "--batch", "8", "--steps", "60", "--warmup", "10", "--eval-every", "20",
        "--eval-windows", "16", "--max-positions", "64", "--threads", "1", "--seed", "3",
        "--bos", str(BOS), "--eos", str(BOS), "--pad", "1"]


def expected_names(layers):
    names = ["model.decoder.embed_tokens.weight", "model.decoder.embed_positions.weight"]
    for i in range(layers):
        p = f"model.decoder.layers.{i}."
        names += [p + "self_attn_layer_norm.weight", p + "self_attn_layer_norm.bias"]
        for proj in ("q_proj", "k_proj", "v_proj", "out_proj"):
            names += [p + f"self_attn.{proj}.weight", p + f"self_attn.{proj}.bias"]
        names += [p + "final_layer_norm.weight", p + "final_layer_norm.bias",
                  p + "fc1.weight", p + "fc1.bias", p + "fc2.weight", p + "fc2.bias"]
    return names + ["model.decoder.final_layer_norm.weight", "model.decoder.final_layer_norm.bias"]


def write_stream(folder):
    """Documents of BOS + a fixed pseudo-random 47-id pattern: ids repeat with
    different successors, so context (not a bigram table) is needed."""
    pattern = np.random.Generator(np.random.PCG64(7)).integers(3, VOCAB, size=47)
    doc = np.concatenate([[BOS], pattern])
    stream = np.tile(doc, 120).astype("<u2")
    cut = len(doc) * 100
    paths = os.path.join(folder, "train.u16"), os.path.join(folder, "valid.u16")
    stream[:cut].tofile(paths[0])
    stream[cut:].tofile(paths[1])
    return paths


class TinyRun(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.TemporaryDirectory()
        d = cls.tmp.name
        cls.train_path, cls.valid_path = write_stream(d)
        cls.out1, cls.out2, cls.out_l1 = (os.path.join(d, n) for n in ("run1", "run2", "runl1"))
        cls.log_path = os.path.join(d, "evals.txt")
        base = ["--train", cls.train_path, "--valid", cls.valid_path] + TINY
        pair = base  # one thread: two threads on a tiny model cost seconds of spinning on a busy machine
        with contextlib.redirect_stderr(io.StringIO()):
            cls.model, cls.log = train.run(train.parse_args(pair + ["--out", cls.out1, "--log", cls.log_path]))
            _, cls.log_l1 = train.run(train.parse_args(base + ["--out", cls.out_l1, "--act-l1", "2.0"]))
        # the second identical run goes through the command line in a fresh process
        cls.cli = subprocess.run([sys.executable, os.path.join(HERE, "train.py")] + pair + ["--out", cls.out2],
                                 capture_output=True, text=True)

    @classmethod
    def tearDownClass(cls):
        cls.tmp.cleanup()

    def test_loss_goes_down(self):
        first = self.log["evals"][0]["valid_loss"]
        self.assertAlmostEqual(first, math.log(VOCAB), delta=0.3)  # untrained: near uniform over 64 ids
        self.assertLess(self.log["best_valid_loss"], 0.7 * first)
        self.assertLess(self.log["evals"][-1]["train_loss"], self.log["evals"][1]["train_loss"])

    def test_reference_forward_matches(self):
        # Independent reference: the project's torchref.py (torch.nn.functional OPT forward).
        ref = torchref.Model(self.out1)
        ids = np.fromfile(self.valid_path, dtype="<u2")[:64].astype(np.int64).tolist()  # all 64 positions
        want = ref.forward(ids).numpy()
        with torch.no_grad():
            mine = self.model(torch.tensor([ids]))[0].numpy()
            rounded = train.OPTDecoder(VOCAB, 32, 2, 2, 64, 64, seed=0)
            rounded.load_state_dict({k: v.half().float() for k, v in self.model.state_dict().items()})
            mine_f16 = rounded(torch.tensor([ids]))[0].numpy()
        top = np.abs(want).max()
        self.assertGreater(top, 1.0)
        self.assertLess(np.abs(mine - want).max() / top, 2e-3, "f32 weights vs stored f16 weights")
        self.assertLess(np.abs(mine_f16 - want).max() / top, 1e-4, "same f16 weights, two forward passes")

    def test_same_seed_same_bytes(self):
        self.assertEqual(self.cli.returncode, 0, self.cli.stderr)
        with open(os.path.join(self.out1, "model.safetensors"), "rb") as a, \
                open(os.path.join(self.out2, "model.safetensors"), "rb") as b:
            self.assertEqual(a.read(), b.read())

    def test_act_l1_raises_zero_fraction(self):
        plain, l1 = self.log["evals"][-1], self.log_l1["evals"][-1]
        self.assertEqual(plain["act_l1"], 0.0)
        self.assertGreater(l1["act_l1"], 0.0)
        self.assertGreater(l1["zero_frac"], plain["zero_frac"] + 0.05)

    def test_safetensors_layout(self):
        path = os.path.join(self.out1, "model.safetensors")
        with open(path, "rb") as f:
            data = f.read()
        (n,) = struct.unpack("<Q", data[:8])
        self.assertEqual((8 + n) % 8, 0)
        raw = data[8:8 + n].decode("utf-8")
        self.assertEqual(raw, raw.rstrip(" ") + " " * (len(raw) - len(raw.rstrip(" "))))
        header = json.loads(raw)
        self.assertEqual(header.pop("__metadata__"), {"format": "pt"})
        self.assertEqual(list(header), expected_names(2))  # insertion order is data order
        state, offset = self.model.state_dict(), 0
        for name, info in header.items():
            self.assertEqual(info["dtype"], "F16", name)
            self.assertEqual(info["shape"], list(state[name].shape), name)
            begin, end = info["data_offsets"]
            self.assertEqual(begin, offset, name)
            stored = np.frombuffer(data[8 + n + begin:8 + n + end], dtype="<f2")
            np.testing.assert_array_equal(stored, state[name].numpy().astype(np.float16).ravel(), err_msg=name)
            offset = end
        self.assertEqual(len(data), 8 + n + offset)

    def test_config_json(self):
        with open(os.path.join(self.out1, "config.json"), encoding="utf-8") as f:
            cfg = json.load(f)
        self.assertEqual(cfg, {
            "model_type": "opt", "architectures": ["OPTForCausalLM"], "vocab_size": 64, "hidden_size": 32,
            "num_hidden_layers": 2, "num_attention_heads": 2, "ffn_dim": 64, "max_position_embeddings": 64,
            "word_embed_proj_dim": 32, "do_layer_norm_before": True, "activation_function": "relu",
            "enable_bias": True, "tie_word_embeddings": True, "bos_token_id": 2, "eos_token_id": 2,
            "pad_token_id": 1})
        self.assertEqual(sorted(os.listdir(self.out1)), ["config.json", "model.safetensors", "train_log.json"])

    def test_train_log(self):
        with open(os.path.join(self.out1, "train_log.json"), encoding="utf-8") as f:
            log = json.load(f)
        evals = log["evals"]
        self.assertEqual([e["step"] for e in evals], [0, 20, 40, 60])
        best = min(evals, key=lambda e: e["valid_loss"])
        self.assertEqual((log["best_step"], log["best_valid_loss"]), (best["step"], best["valid_loss"]))
        self.assertEqual(log["tokens_seen"], 60 * 8 * 32)
        self.assertEqual(log["parameters"], sum(p.numel() for p in self.model.parameters()))
        self.assertEqual(log["args"]["steps"], 60)
        self.assertEqual(log["torch_version"], torch.__version__)
        self.assertTrue(all(e["tokens_per_s"] > 0 for e in evals[1:]))
        with open(self.log_path, encoding="utf-8") as f:
            self.assertEqual(f.read().splitlines(), [e["line"] for e in evals])
        self.assertIn("tok/s", evals[1]["line"])


class Schedule(unittest.TestCase):
    def test_warmup_then_cosine_to_tenth(self):
        lr, steps, warmup = 1.0, 110, 10
        self.assertAlmostEqual(train.lr_at(0, steps, lr, warmup), 0.1)
        self.assertAlmostEqual(train.lr_at(9, steps, lr, warmup), 1.0)
        self.assertAlmostEqual(train.lr_at(10, steps, lr, warmup), 1.0)
        self.assertAlmostEqual(train.lr_at(59.5, steps, lr, warmup), 0.55)  # cosine midpoint
        self.assertAlmostEqual(train.lr_at(109, steps, lr, warmup), 0.1)

    def test_constant_after_warmup(self):
        self.assertAlmostEqual(train.lr_at(0, 110, 1.0, 10, "constant"), 0.1)
        self.assertAlmostEqual(train.lr_at(60, 110, 1.0, 10, "constant"), 1.0)
        self.assertAlmostEqual(train.lr_at(109, 110, 1.0, 10, "constant"), 1.0)

    def test_no_decay_on_biases_norms_embeddings(self):
        model = train.OPTDecoder(16, 8, 1, 2, 16, 8, seed=0)
        decay, plain = train.param_groups(model, 0.1)
        names = {id(p): n for n, p in model.named_parameters()}
        self.assertEqual(sorted(names[id(p)].split("layers.0.")[1] for p in decay["params"]),
                         ["fc1.weight", "fc2.weight", "self_attn.k_proj.weight", "self_attn.out_proj.weight",
                          "self_attn.q_proj.weight", "self_attn.v_proj.weight"])
        self.assertEqual(plain["weight_decay"], 0.0)
        self.assertEqual(len(decay["params"]) + len(plain["params"]), len(names))


class BadInput(unittest.TestCase):
    def run_main(self, train_ids, valid_ids, *extra):
        with tempfile.TemporaryDirectory() as d:
            tp, vp = os.path.join(d, "t.u16"), os.path.join(d, "v.u16")
            for path, ids in ((tp, train_ids), (vp, valid_ids)):
                with open(path, "wb") as f:
                    f.write(ids if isinstance(ids, bytes) else np.asarray(ids, dtype="<u2").tobytes())
            err = io.StringIO()
            with contextlib.redirect_stderr(err):
                rc = train.main(["--train", tp, "--valid", vp, "--out", os.path.join(d, "o"), "--steps", "1"]
                                + TINY[:2] + ["--seq", "4"] + list(extra))
            return rc, err.getvalue(), os.path.exists(os.path.join(d, "o"))

    def test_odd_length(self):
        rc, err, wrote = self.run_main(b"\x02\x00\x05", [2] * 10)
        self.assertEqual(rc, 2)
        self.assertIn("t.u16 (--train): file is 3 bytes", err)
        self.assertFalse(wrote)

    def test_id_past_vocab(self):
        rc, err, _ = self.run_main([2] * 10, [2, 3, 4, 64, 5, 6])
        self.assertEqual(rc, 2)
        self.assertIn("v.u16 (--valid): token id 64 at byte offset 6 is not below --vocab 64", err)

    def test_missing_bos(self):
        rc, err, _ = self.run_main([5] * 10, [2] * 10)
        self.assertEqual(rc, 2)
        self.assertIn("t.u16 (--train): token at byte offset 0 is 5", err)

    def test_too_short(self):
        rc, err, _ = self.run_main([2] * 10, [2, 3, 4])
        self.assertEqual(rc, 2)
        self.assertIn("holds 3 tokens, fewer than --seq + 1 = 5", err)


class Curriculum(unittest.TestCase):
    """--drill mixes a second id stream into the training windows; --dev
    logs few-shot accuracy on probes built from token ids."""

    def test_drill_is_learned_and_dev_accuracy_logged(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            # The drill stream: another pattern, which only the drill teaches.
            pattern = np.random.Generator(np.random.PCG64(9)).integers(3, VOCAB, size=31)
            doc = np.concatenate([[BOS], pattern])
            drill_path = os.path.join(d, "drill.u16")
            np.tile(doc, 200).astype("<u2").tofile(drill_path)
            # Dev probes: a drill prefix twice over, then the right next id
            # against three others.
            probes = []
            for cut in range(6, 26, 4):
                prompt = [int(v) for v in np.concatenate([doc, doc[:cut]])]
                right = int(doc[cut])
                wrong = [v for v in range(3, VOCAB) if v != right][:3]
                probes.append({"prompt": prompt, "options": [[right]] + [[v] for v in wrong], "answer": 0})
            dev_path = os.path.join(d, "dev.json")
            with open(dev_path, "w", encoding="utf-8") as f:
                json.dump({"drillfam": probes}, f)
            args = ["--train", train_path, "--valid", valid_path] + TINY + ["--steps", "120", "--dev", dev_path]
            with contextlib.redirect_stderr(io.StringIO()):
                _, plain = train.run(train.parse_args(args + ["--out", os.path.join(d, "a")]))
                _, mixed = train.run(train.parse_args(args + ["--out", os.path.join(d, "b"), "--drill", drill_path,
                                                              "--drill-mix-start", "0.6", "--drill-mix-end", "0.4"]))
            self.assertIn("drillfam", mixed["evals"][-1]["dev_acc"])
            self.assertGreaterEqual(mixed["evals"][-1]["dev_acc"]["drillfam"], 0.8, mixed["evals"][-1]["line"])
            self.assertLess(plain["evals"][-1]["dev_acc"]["drillfam"], mixed["evals"][-1]["dev_acc"]["drillfam"])
            for e in mixed["evals"]:
                self.assertTrue(0 < e["residual_cos"] <= 1.0 + 1e-6, e["line"])

    def test_drill_options_need_a_drill_and_a_share(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            base = ["--train", train_path, "--valid", valid_path, "--out", os.path.join(d, "o")] + TINY
            for extra, msg in ((["--drill-mix-start", "0.5"], "need --drill FILE"),
                               (["--drill", train_path, "--drill-mix-end", "1.5"], "must lie in [0, 1]")):
                err = io.StringIO()
                with contextlib.redirect_stderr(err):
                    rc = train.main(base + extra)
                self.assertEqual(rc, 2, err.getvalue())
                self.assertIn(msg, err.getvalue())


def layer0_attention(model, ids):
    """layer0_attention returns layer 0's attention probabilities [heads, T, T]
    for one sequence, computed from the model's weights as its forward pass
    does (pre-LayerNorm, q scaled by head_dim^-0.5, causal)."""
    dec = model.model.decoder
    d, nh = model.hidden, model.heads
    hd = d // nh
    t = len(ids)
    x = dec.embed_tokens.weight[ids] + dec.embed_positions.weight[2:2 + t]
    a = dec.layers[0].self_attn
    h = torch.nn.functional.layer_norm(x, (d,), dec.layers[0].self_attn_layer_norm.weight,
                                       dec.layers[0].self_attn_layer_norm.bias, 1e-5)
    q = torch.nn.functional.linear(h, a.q_proj.weight, a.q_proj.bias).view(t, nh, hd).transpose(0, 1)
    k = torch.nn.functional.linear(h, a.k_proj.weight, a.k_proj.bias).view(t, nh, hd).transpose(0, 1)
    scores = (q * hd ** -0.5) @ k.transpose(-1, -2)
    scores = scores.masked_fill(torch.triu(torch.ones(t, t, dtype=torch.bool), 1), float("-inf"))
    return torch.softmax(scores, dim=-1)


class PrevHead(unittest.TestCase):
    """--prev-head builds fixed-lag heads into layer 0: frozen sinusoidal
    position rows, held query/key rows and held inputs (the model card's
    copying recipe search)."""

    def test_heads_attend_at_their_lags_and_are_held(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            args = ["--train", train_path, "--valid", valid_path, "--out", os.path.join(d, "p")] + TINY
            # weight decay on: the held entries must be written back after every step
            args += ["--hidden", "96", "--heads", "3", "--prev-head", "2.5", "--prev-head-pos-amp", "0.5",
                     "--prev-head-lags", "1,2", "--embed-std", "0.1"]
            model = train.OPTDecoder(VOCAB, 96, 2, 3, 64, 64, seed=3, embed_std=0.1)
            held = train.prev_token_init(model, 2.5, 0.5, (1, 2))
            ids = torch.tensor(np.fromfile(valid_path, dtype="<u2")[:60].astype(np.int64))

            def at_lag(att, head, lag):
                return torch.stack([att[head, i, i - lag] for i in range(lag, len(ids))])

            with torch.no_grad():
                att = layer0_attention(model, ids)
            self.assertGreater(float(at_lag(att, 0, 1).min()), 0.9, "head 0 at initialisation")
            self.assertGreater(float(at_lag(att, 1, 2).min()), 0.9, "head 1 at initialisation")
            self.assertLess(float(at_lag(att, 2, 1).mean()), 0.5, "head 2 is left as initialised")
            dec0 = model.model.decoder
            self.assertEqual(float(dec0.embed_tokens.weight[:, :32].abs().max()), 0.0, "positions only in head width")
            before = [v.clone() for _, _, v in held]
            with contextlib.redirect_stderr(io.StringIO()):
                trained, log = train.run(train.parse_args(args))
            self.assertEqual(log["args"]["prev_head_lags"], "1,2")
            dec = trained.model.decoder
            by_name = dict(trained.named_parameters())
            names = {id(p): n for n, p in model.named_parameters()}
            for (p, idx, _), value in zip(held, before):
                torch.testing.assert_close(by_name[names[id(p)]].detach()[idx], value, rtol=0, atol=0,
                                           msg=f"{names[id(p)]} held")
            torch.testing.assert_close(dec.embed_positions.weight.detach(), dec0.embed_positions.weight.detach(),
                                       rtol=0, atol=0)
            a = dec.layers[0].self_attn
            self.assertFalse(torch.equal(a.q_proj.weight.detach()[64:], dec0.layers[0].self_attn.q_proj.weight.detach()[64:]),
                             "the free head trained")
            self.assertFalse(torch.equal(dec.embed_tokens.weight.detach()[:, 32:], dec0.embed_tokens.weight.detach()[:, 32:]),
                             "the rest of the embedding trained")
            with torch.no_grad():
                att = layer0_attention(trained, ids)
            self.assertGreater(float(at_lag(att, 0, 1).mean()), 0.9, "head 0 after training")
            self.assertGreater(float(at_lag(att, 1, 2).mean()), 0.9, "head 1 after training")

    def test_positions_do_not_repeat_within_the_window(self):
        # The geometric frequencies keep every position's row far from every
        # other's over 512 positions (measured: at most 0.51 of a row's own
        # score), so a built head's score peaks at its lag alone; harmonic
        # frequencies (the first version) repeated exactly every 64 positions.
        model = train.OPTDecoder(VOCAB, 64, 1, 2, 16, 512, seed=0)
        train.prev_token_init(model, 1.0, 1.0, (1,))
        p = model.model.decoder.embed_positions.weight.detach()[2:, :32].double()
        gram = p @ p.T
        own = gram.diagonal().clone()
        gram.fill_diagonal_(float("-inf"))
        self.assertLess(float((gram.max(dim=1).values / own).max()), 0.6)

    def test_bad_prev_head_arguments(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            base = ["--train", train_path, "--valid", valid_path, "--out", os.path.join(d, "o")] + TINY
            for extra, msg in ((["--prev-head", "-1"], "must not be negative"),
                               (["--prev-head", "1", "--prev-head-pos-amp", "0"], "must be positive"),
                               (["--prev-head", "1", "--hidden", "30", "--heads", "2"], "even head width"),
                               (["--prev-head", "1", "--prev-head-lags", "1,2,3"], "give 1 to 2 lags"),
                               (["--prev-head", "1", "--prev-head-lags", "0"], "each at least 1"),
                               (["--prev-head", "1", "--prev-head-lags", "one"], "comma-separated integers")):
                err = io.StringIO()
                with contextlib.redirect_stderr(err):
                    rc = train.main(base + extra)
                self.assertEqual(rc, 2, err.getvalue())
                self.assertIn(msg, err.getvalue())




class Resume(unittest.TestCase):
    """--state saves the run at every eval; a later run with a larger --steps
    goes on from there and ends with the bytes one uninterrupted run writes."""

    def test_resumed_run_matches_one_run(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            base = ["--train", train_path, "--valid", valid_path, "--schedule", "constant"] + TINY
            whole = base + ["--out", os.path.join(d, "whole")]
            state = os.path.join(d, "state.pt")
            part = base + ["--out", os.path.join(d, "part"), "--state", state]
            with contextlib.redirect_stderr(io.StringIO()):
                _, log_whole = train.run(train.parse_args(whole))
                train.run(train.parse_args([a if a != "60" else "40" for a in part]))
                err = io.StringIO()
                with contextlib.redirect_stderr(err):
                    _, log_part = train.run(train.parse_args(part))
            self.assertIn("resuming", err.getvalue())
            with open(os.path.join(d, "whole", "model.safetensors"), "rb") as f:
                a = f.read()
            with open(os.path.join(d, "part", "model.safetensors"), "rb") as f:
                b = f.read()
            self.assertEqual(a, b)
            self.assertEqual([e["valid_loss"] for e in log_whole["evals"]], [e["valid_loss"] for e in log_part["evals"]])

    def test_changed_arguments_are_refused(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            state = os.path.join(d, "state.pt")
            base = ["--train", train_path, "--valid", valid_path, "--out", os.path.join(d, "o"),
                    "--state", state] + TINY
            with contextlib.redirect_stderr(io.StringIO()):
                train.run(train.parse_args([a if a != "60" else "20" for a in base]))
            err = io.StringIO()
            with contextlib.redirect_stderr(err):
                rc = train.main(base + ["--weight-decay", "0.01"])
            self.assertEqual(rc, 2)
            self.assertIn("different arguments (weight_decay", err.getvalue())
            with open(state, "wb") as f:
                f.write(b"not a state")
            err = io.StringIO()
            with contextlib.redirect_stderr(err):
                rc = train.main(base)
            self.assertEqual(rc, 2)
            self.assertIn("cannot read the saved state", err.getvalue())


class Select(unittest.TestCase):
    """--select picks the written weights: the lowest validation loss by
    default, the last step's with last. A second phase at a ruinous rate
    makes the last eval far worse than the best, so the two must differ."""

    def test_last_writes_the_final_weights(self):
        with tempfile.TemporaryDirectory() as d:
            train_path, valid_path = write_stream(d)
            state = os.path.join(d, "state.pt")
            base = ["--train", train_path, "--valid", valid_path, "--schedule", "constant",
                    "--state", state] + TINY
            with contextlib.redirect_stderr(io.StringIO()):
                train.run(train.parse_args(base + ["--out", os.path.join(d, "p1")]))
                steps = [a if a != "60" else "80" for a in base] + ["--lr", "1.0"]
                shutil.copy(state, state + ".p1")
                _, log_best = train.run(train.parse_args(steps + ["--out", os.path.join(d, "best")]))
                shutil.copy(state + ".p1", state)
                _, log_last = train.run(train.parse_args(steps + ["--out", os.path.join(d, "last"), "--select", "last"]))
            self.assertEqual(log_last["written_step"], 80)
            self.assertEqual(log_last["select"], "last")
            self.assertLessEqual(log_best["written_step"], 60)
            self.assertGreater(log_last["written_valid_loss"], log_best["written_valid_loss"])
            final = torch.load(state)["model"]
            best, last = (torchref.read_safetensors(os.path.join(d, name, "model.safetensors"))
                          for name in ("best", "last"))
            for k, v in last.items():
                self.assertTrue(torch.equal(v, final[k].half().float()), k)
            self.assertTrue(any(not torch.equal(best[k], last[k]) for k in last))


if __name__ == "__main__":
    unittest.main()
