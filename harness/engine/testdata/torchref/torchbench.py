#!/usr/bin/python3
"""torchbench: CPU speed of the PyTorch reference on a checkpoint (written for OPT).

    /usr/bin/python3 torchbench.py --model DIR [--threads 2] [--prefill 512] [--decode 64]

Weights are upcast to float32 at load, as a CPU user of torch would run them.
Prints one JSON object on stdout. Every measured phase runs once as a warm-up
first. Token ids are a fixed arithmetic sequence, so runs are repeatable.
"""

import argparse
import json
import os
import statistics
import sys
import time

import torch

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import torchref  # noqa: E402  (sibling file)

DECODE_PROMPT = 16
GEMM_SHAPES = ((512, 768, 3072), (512, 3072, 768))  # M x K x N


def vmrss_mib():
    """vmrss_mib returns this process's resident set size in MiB (VmRSS of /proc/self/status)."""
    with open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024.0  # the field is in kB
    raise RuntimeError("torchbench: /proc/self/status has no VmRSS line")


def token_ids(n, vocab):
    """token_ids returns n fixed, well-spread token ids below vocab."""
    return [(i * 7919 + 13) % vocab for i in range(n)]


def time_prefill(model, ids):
    """time_prefill returns seconds for one full forward (all logits) over ids."""
    model.forward(ids)  # warm-up
    t = time.perf_counter()
    model.forward(ids)
    return time.perf_counter() - t


def time_decode(model, prompt, steps):
    """time_decode returns seconds for `steps` greedy single-token steps with the
    KV cache, after an untimed prefill of prompt."""
    def once():
        cache = model.new_cache()
        logits = model.forward(prompt, 0, cache)
        t = time.perf_counter()
        for pos in range(len(prompt), len(prompt) + steps):
            tok = int(torch.argmax(logits[-1]))
            logits = model.forward([tok], pos, cache)
        return time.perf_counter() - t

    once()  # warm-up
    return once()


def gemm_gflops(m, k, n, reps):
    """gemm_gflops returns the median GFLOPS of torch.matmul f32 [m,k] @ [k,n]."""
    gen = torch.Generator().manual_seed(0)
    a, b = torch.randn(m, k, generator=gen), torch.randn(k, n, generator=gen)
    torch.matmul(a, b)  # warm-up
    times = []
    for _ in range(reps):
        t = time.perf_counter()
        torch.matmul(a, b)
        times.append(time.perf_counter() - t)
    return 2.0 * m * k * n / statistics.median(times) / 1e9


def main(argv=None):
    """main runs the benchmark and prints its JSON; it returns the exit status."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", required=True, help="checkpoint directory")
    ap.add_argument("--threads", type=int, default=2, help="torch intra-op threads")
    ap.add_argument("--prefill", type=int, default=512, help="tokens in the prefill sequence")
    ap.add_argument("--decode", type=int, default=64, help="greedy decode steps after a 16-token prompt")
    ap.add_argument("--gemm-reps", type=int, default=5, help="timed repetitions per GEMM shape (median is reported)")
    args = ap.parse_args(argv)
    if min(args.threads, args.prefill, args.decode, args.gemm_reps) < 1:
        ap.error("--threads, --prefill, --decode and --gemm-reps must be at least 1")
    torch.set_num_threads(args.threads)
    with torch.inference_mode():
        try:
            t = time.perf_counter()
            model = torchref.Model(args.model)
            load_s = time.perf_counter() - t
            rss = vmrss_mib()
            need = max(args.prefill, DECODE_PROMPT + args.decode)
            if need > model.max_pos:
                raise torchref.RefError(f"{args.model}: the benchmark needs {need} positions, the model has {model.max_pos}; lower --prefill/--decode")
        except torchref.RefError as e:
            print(f"torchbench: {e}", file=sys.stderr)
            return 2
        prefill_s = time_prefill(model, token_ids(args.prefill, model.vocab))
        decode_s = time_decode(model, token_ids(DECODE_PROMPT, model.vocab), args.decode)
        gemm = {f"{m}x{k}x{n}": gemm_gflops(m, k, n, args.gemm_reps) for m, k, n in GEMM_SHAPES}
    print(json.dumps({
        "impl": f"pytorch {torch.__version__}",
        "threads": args.threads,
        "rss_after_load_mib": rss,
        "load_s": load_s,
        "prefill_tok_s": args.prefill / prefill_s,
        "decode_tok_s": args.decode / decode_s,
        "gemm_gflops": gemm,
    }))
    return 0


if __name__ == "__main__":
    sys.exit(main())
