package main

import (
	"fmt"
	"os"

	"sparsegate/harness/engine"
	"sparsegate/harness/progress"
	"sparsegate/harness/sparsity"
)

const sparsifyUsage = `usage: sparsegate sparsify --base DIR --text FILE --out BUILD [flags]

Make a sparse build from a dense checkpoint: run the base densely over the
calibration text, record which MLP neurons (and attention heads) each token
really uses, train a low-rank predictor per layer in Go, pick each layer's
budget, and write BUILD/manifest.json and BUILD/predictors.safetensors. The
build names its base by relative path and weights hash. Deterministic for a
given seed.

flags:
  --base DIR         dense checkpoint (required)
  --text FILE        calibration text (required; use text like what the model serves)
  --out BUILD        build directory to write (required)
  --keep-mlp F       fraction of MLP neurons each token keeps (default 0.1)
  --keep-heads F     fraction of attention heads each token keeps; 0 = dense (default 0)
  --recall R         instead of --keep-mlp, the smallest budget per layer whose
                     held-out recall reaches R (default 0: off)
  --rank N           MLP predictor rank (default 64)
  --head-rank N      head predictor rank (default 16)
  --lookahead        predictors read the previous layer's input (default: their own)
  --max-tokens N     calibration tokens at most (default 20000)
  --window N         tokens per calibration window (default 256)
  --epochs N         predictor training epochs at most (default 20)
  --seed N           random seed (default 1)
  --threads N        kernel threads (default: all CPUs)

example:
  sparsegate sparsify --base ./models/opt-125m --text calib.txt --out ./builds/opt-125m-s10 --keep-mlp 0.1 --keep-heads 0.5
`

func runSparsify(c *cli, args []string) error {
	fs := newFlags(c, "sparsify", sparsifyUsage)
	base := fs.String("base", "", "dense checkpoint")
	text := fs.String("text", "", "calibration text")
	out := fs.String("out", "", "build directory")
	keepMLP := fs.Float64("keep-mlp", 0.1, "MLP keep fraction")
	keepHeads := fs.Float64("keep-heads", 0, "head keep fraction")
	recall := fs.Float64("recall", 0, "recall target")
	rank := fs.Int("rank", 64, "MLP predictor rank")
	headRank := fs.Int("head-rank", 16, "head predictor rank")
	lookahead := fs.Bool("lookahead", false, "read the previous layer's input")
	maxTokens := fs.Int("max-tokens", 20000, "calibration tokens")
	window := fs.Int("window", 256, "window length")
	epochs := fs.Int("epochs", 20, "training epochs")
	seed := fs.Uint64("seed", 1, "random seed")
	threads := fs.Int("threads", 0, "kernel threads")
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case *base == "" || *text == "" || *out == "":
		return usageError("sparsify", "--base DIR, --text FILE and --out BUILD are required")
	case fs.NArg() > 0:
		return usageError("sparsify", "unexpected arguments %q", fs.Args())
	case *rank <= 0 || *headRank <= 0 || *maxTokens <= 0 || *window <= 0 || *epochs <= 0:
		return usageError("sparsify", "--rank, --head-rank, --max-tokens, --window and --epochs must be positive")
	}
	data, err := os.ReadFile(*text)
	if err != nil {
		return fmt.Errorf("reading the calibration text: %w", err)
	}
	m, err := engine.Load(*base, engine.Options{Threads: *threads})
	if err != nil {
		return err
	}
	defer m.Close()
	input := sparsity.InputSelf
	if *lookahead {
		input = sparsity.InputPrevious
	}
	tty := progress.IsTerminal(c.stderr)
	rep, err := sparsity.Calibrate(m, *base, data, *out, sparsity.CalibrateOptions{
		KeepMLP: *keepMLP, KeepHeads: *keepHeads, Recall: *recall, Rank: *rank, HeadRank: *headRank,
		Input: input, Window: *window, MaxTokens: *maxTokens, Seed: *seed,
		Train: sparsity.TrainOptions{Epochs: *epochs},
		Progress: func(line string) {
			if tty {
				fmt.Fprintf(c.stderr, "\r\x1b[K%s", line)
			} else {
				fmt.Fprintln(c.stderr, line)
			}
		},
	})
	if tty {
		fmt.Fprint(c.stderr, "\r\x1b[K")
	}
	if err != nil {
		return err
	}
	fmt.Fprintf(c.stdout, "wrote %s (base %s)\n", *out, *base)
	return rep.WriteTable(c.stdout)
}
