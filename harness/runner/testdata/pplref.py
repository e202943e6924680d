#!/usr/bin/python3
"""pplref: perplexity, mean NLL and bits per byte of sliding windows, recomputed
with the independent PyTorch forward pass of harness/engine/testdata/torchref.

    /usr/bin/python3 pplref.py --model DIR --input IN.json --output OUT.json

IN.json: {"tokens": [ids], "windows": [[start, end, first], ...],
          "bytes": [text bytes of each token as a target]}
Each window runs tokens[start:end] from an empty cache and scores the targets
first..end-1 (target t is predicted by the row of position t-1). OUT.json:
{"windows": [{"nll", "tokens", "bytes"}], "nll", "tokens", "bytes",
 "mean_nll", "perplexity", "bits_per_byte"}.
"""

import argparse
import json
import math
import os
import sys

import torch
import torch.nn.functional as F

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "engine", "testdata", "torchref"))
from torchref import Model, RefError  # noqa: E402


def score(model, inp):
    """score returns the per-window and total figures for one input object."""
    tokens, wins, nbytes = inp["tokens"], inp["windows"], inp["bytes"]
    if len(nbytes) != len(tokens):
        raise RefError(f"bytes has {len(nbytes)} entries, tokens {len(tokens)}; give one per token")
    out, total_nll, total_tok, total_bytes = [], 0.0, 0, 0
    for i, (start, end, first) in enumerate(wins):
        if not 0 <= start < first < end <= len(tokens):
            raise RefError(f"windows[{i}] = {[start, end, first]} is not 0 <= start < first < end <= {len(tokens)}")
        logits = model.forward(tokens[start:end - 1])  # float32, [end-1-start, vocab]
        lp = F.log_softmax(logits.double(), dim=-1)
        nll = 0.0
        for t in range(first, end):
            nll -= float(lp[t - start - 1, tokens[t]])
        b = sum(nbytes[first:end])
        out.append({"nll": nll, "tokens": end - first, "bytes": b})
        total_nll, total_tok, total_bytes = total_nll + nll, total_tok + end - first, total_bytes + b
    mean = total_nll / total_tok
    return {"windows": out, "nll": total_nll, "tokens": total_tok, "bytes": total_bytes,
            "mean_nll": mean, "perplexity": math.exp(mean), "bits_per_byte": total_nll / (math.log(2) * total_bytes)}


def main(argv=None):
    """main is the command line entry point; it returns the exit status."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", required=True)
    ap.add_argument("--input", required=True)
    ap.add_argument("--output", required=True)
    args = ap.parse_args(argv)
    torch.set_num_threads(1)
    try:
        with open(args.input, encoding="utf-8") as f:
            inp = json.load(f)
        res = score(Model(args.model), inp)
    except (RefError, OSError, ValueError, KeyError) as e:
        print(f"pplref: {e}", file=sys.stderr)
        return 2
    with open(args.output, "w", encoding="utf-8") as f:
        json.dump(res, f)
    return 0


if __name__ == "__main__":
    sys.exit(main())
