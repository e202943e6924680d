#!/usr/bin/python3
"""scorebench: the demo suite's scoring work in PyTorch, on token ids from Go.

    /usr/bin/python3 scorebench.py --model DIR --work WORK.json [--threads 2] [--reps 1]

WORK.json is what suites/demo's BenchmarkDemoScoring writes with
SPARSEGATE_BENCH_SCORING_IDS=FILE: perplexity windows ({"ids", "first"}:
score ids[first:], each from the tokens before it) and choice items
({"context", "options", "option_bytes", "per_byte"}), plus the Go side's
answers ("go": {"window_nll", "chosen"}). The same forward passes as the Go
engine: one pass per window, logits only for scored rows; per item the
context once, then every option as one batch on its key/value cache (right
padded; causal masking keeps padding out of every real row). An OPT model
only; weights upcast to float32 at load, as torchbench.py does. Every rep
runs the whole work; one untimed warm-up pass comes first and is the one
checked against Go's answers and against torchref.py's forward pass.
Prints one JSON object on stdout.
"""

import argparse
import json
import os
import statistics
import sys
import time

import torch
import torch.nn.functional as F

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import torchref  # noqa: E402  (sibling file)


def hidden(opt, ids, start, past):
    """hidden runs OPT on ids [B, n] at positions start.. after the cached
    keys/values past (per layer (k, v) of shape [1 or B, H, start, hd], or None)
    and returns the final-norm hidden states [B, n, d] and the new per-layer
    (k, v) of this step alone."""
    d, heads, eps = opt.d, opt.heads, 1e-5
    bsz, n = ids.shape
    hd = d // heads
    x = opt.embed[ids] + opt.pos[torch.arange(start, start + n) + 2]  # OPT offsets positions by 2
    future = torch.arange(start + n)[None, :] > torch.arange(start, start + n)[:, None]
    step = []
    for i, L in enumerate(opt.layers):
        h = F.layer_norm(x, (d,), *L["ln1"], eps=eps)
        q = (F.linear(h, *L["q"]) * hd ** -0.5).view(bsz, n, heads, hd).transpose(1, 2)
        k = F.linear(h, *L["k"]).view(bsz, n, heads, hd).transpose(1, 2)
        v = F.linear(h, *L["v"]).view(bsz, n, heads, hd).transpose(1, 2)
        step.append((k, v))
        if past is not None:
            pk, pv = past[i]
            k = torch.cat([pk.expand(bsz, -1, -1, -1), k], dim=2)
            v = torch.cat([pv.expand(bsz, -1, -1, -1), v], dim=2)
        probs = F.softmax(torch.matmul(q, k.transpose(2, 3)).masked_fill(future, float("-inf")), dim=-1)
        a = torch.matmul(probs, v).transpose(1, 2).reshape(bsz, n, d)
        x = x + F.linear(a, *L["o"])
        h = F.layer_norm(x, (d,), *L["ln2"], eps=eps)
        x = x + F.linear(F.relu(F.linear(h, *L["fc1"])), *L["fc2"])
    return F.layer_norm(x, (d,), *opt.ln_f, eps=eps), step


def target_logprobs(opt, rows, targets):
    """target_logprobs returns log P(target | row) for hidden rows [R, d]."""
    lp = F.log_softmax(F.linear(rows, opt.head), dim=-1)
    return lp.gather(1, targets[:, None])[:, 0].double()


def window_nll(opt, w):
    """window_nll is one forward pass over ids[:-1]; the rows first-1.. are scored."""
    ids, first = w["ids"], w["first"]
    h, _ = hidden(opt, torch.tensor([ids[:-1]]), 0, None)
    return -float(target_logprobs(opt, h[0, first - 1:], torch.tensor(ids[first:])).sum())


def choose(opt, c):
    """choose scores every option after the context and returns the best index
    (ties to the lowest) by total or per-byte log-likelihood."""
    ctx, opts = c["context"], c["options"]
    h, past = hidden(opt, torch.tensor([ctx]), 0, None)
    last = h[0, -1]
    rows, targets = [last.expand(len(opts), -1)], [o[0] for o in opts]
    longest = max(len(o) for o in opts) - 1
    if longest > 0:
        inputs = torch.tensor([o[:-1] + [0] * (longest - len(o) + 1) for o in opts])
        h2, _ = hidden(opt, inputs, len(ctx), past)
        for b, o in enumerate(opts):
            rows.append(h2[b, :len(o) - 1])
            targets.extend(o[1:])
    lp = target_logprobs(opt, torch.cat(rows), torch.tensor(targets)).tolist()
    scores, off = [], len(opts)
    for b, o in enumerate(opts):
        s = lp[b] + sum(lp[off:off + len(o) - 1])
        off += len(o) - 1
        scores.append(s / c["option_bytes"][b] if c["per_byte"] else s)
    return max(range(len(scores)), key=lambda i: (scores[i], -i))


def run(opt, work):
    """run does the whole work once and returns (window NLLs, chosen options)."""
    return [window_nll(opt, w) for w in work["windows"]], [choose(opt, c) for c in work["choices"]]


def check_forward(model, work):
    """check_forward compares hidden() with torchref's own forward pass on the
    first window and the first item's context: logits within 1e-4 of max|logit|
    (the engine's tolerance against torchref)."""
    opt = model.impl
    for ids in (work["windows"][0]["ids"][:-1], work["choices"][0]["context"]):
        want = model.forward(ids)
        h, _ = hidden(opt, torch.tensor([ids]), 0, None)
        got = F.linear(h[0], opt.head)
        diff, scale = float((got - want).abs().max()), float(want.abs().max())
        if diff > 1e-4 * scale:
            raise torchref.RefError(f"scorebench: the batched forward pass differs from torchref.py by {diff:.3g} (max|logit| {scale:.3g})")


def main(argv=None):
    """main runs the benchmark and prints its JSON; it returns the exit status."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", required=True, help="checkpoint directory (an OPT model)")
    ap.add_argument("--work", required=True, help="the token ids BenchmarkDemoScoring wrote")
    ap.add_argument("--threads", type=int, default=2, help="torch intra-op threads")
    ap.add_argument("--reps", type=int, default=1, help="timed passes over the whole work (median is reported)")
    args = ap.parse_args(argv)
    if min(args.threads, args.reps) < 1:
        ap.error("--threads and --reps must be at least 1")
    torch.set_num_threads(args.threads)
    with torch.inference_mode():
        try:
            model = torchref.Model(args.model)
            if model.family != "opt":
                raise torchref.RefError(f"{args.model}: scorebench runs OPT models only, not {model.family}")
            with open(args.work, encoding="utf-8") as f:
                work = json.load(f)
            if not work.get("windows") or not work.get("choices"):
                raise torchref.RefError(f"{args.work}: no windows or no choices to score")
            check_forward(model, work)
        except (torchref.RefError, OSError, json.JSONDecodeError) as e:
            print(f"scorebench: {e}", file=sys.stderr)
            return 2
        nll, chosen = run(model.impl, work)  # warm-up, and the answers to check
        times = []
        for _ in range(args.reps):
            t = time.perf_counter()
            run(model.impl, work)
            times.append(time.perf_counter() - t)
    go = work.get("go", {})
    go_nll, go_chosen = go.get("window_nll", []), go.get("chosen", [])
    rel = max((abs(a - b) / max(abs(b), 1e-30) for a, b in zip(nll, go_nll)), default=None)
    print(json.dumps({
        "impl": f"pytorch {torch.__version__}",
        "threads": args.threads,
        "seconds": times,
        "median_s": statistics.median(times),
        "windows": len(nll),
        "items": len(chosen),
        "nll_total": sum(nll),
        "go_nll_total": sum(go_nll) if go_nll else None,
        "max_window_nll_rel_diff": rel if len(go_nll) == len(nll) else None,
        "chosen_agree": sum(a == b for a, b in zip(chosen, go_chosen)) if len(go_chosen) == len(chosen) else None,
    }))
    return 0


if __name__ == "__main__":
    sys.exit(main())
