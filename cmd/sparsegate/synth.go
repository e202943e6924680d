package main

import (
	"fmt"
	"os"
	"strings"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/synth"
)

const synthUsage = `usage: sparsegate synth --out DIR [--family F] [--size S] [--dtype T] [--seed N]
                       [--tokenizer-text FILE --vocab N]

Write a checkpoint with random weights (seeded: the same flags write the same
bytes) in the open layout of a family, for smoke tests of a pipeline and for
benchmarks. It predicts nothing useful.

flags:
  --out DIR              directory to write (created; existing files replaced)
  --family F             opt, gpt2 or llama (default opt)
  --size S               tiny (2 layers, width 32) or 125m (12 layers, width 768,
                         MLP 3072, vocabulary 50272; opt only) (default tiny)
  --dtype T              f32, f16 or bf16 (default f32)
  --seed N               random seed (default 1)
  --tokenizer-text FILE  train a byte-level BPE tokenizer on this text and save it
  --vocab N              tokenizer vocabulary size, at least 259 (default 320)

example:
  sparsegate synth --family opt --size 125m --dtype f16 --out /tmp/opt-125m
`

func runSynth(c *cli, args []string) error {
	fs := newFlags(c, "synth", synthUsage)
	out := fs.String("out", "", "directory to write")
	family := fs.String("family", "opt", "family")
	size := fs.String("size", "tiny", "size")
	dtype := fs.String("dtype", "f32", "stored dtype")
	seed := fs.Uint64("seed", 1, "random seed")
	text := fs.String("tokenizer-text", "", "text to train a tokenizer on")
	vocab := fs.Int("vocab", 320, "tokenizer vocabulary size")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usageError("synth", "--out DIR is required")
	}
	if fs.NArg() > 0 {
		return usageError("synth", "unexpected arguments %q", fs.Args())
	}
	var cfg *checkpoint.Config
	switch f := checkpoint.Family(*family); {
	case *size == "125m" && f == checkpoint.OPT:
		cfg = synth.OPT125M()
	case *size == "125m":
		return usageError("synth", "--size 125m exists for --family opt only")
	case *size != "tiny":
		return usageError("synth", "--size %q: use tiny or 125m", *size)
	case f == checkpoint.OPT || f == checkpoint.GPT2 || f == checkpoint.Llama:
		cfg = synth.Tiny(f)
	default:
		return usageError("synth", "--family %q: use opt, gpt2 or llama", *family)
	}
	dt := checkpoint.DType(strings.ToUpper(*dtype))
	if dt != checkpoint.F32 && dt != checkpoint.F16 && dt != checkpoint.BF16 {
		return usageError("synth", "--dtype %q: use f32, f16 or bf16", *dtype)
	}
	if *text != "" {
		data, err := os.ReadFile(*text)
		if err != nil {
			return fmt.Errorf("reading the tokenizer text: %w", err)
		}
		if err := synth.WithTokenizer(*out, cfg, strings.SplitAfter(string(data), "\n"), *vocab); err != nil {
			return err
		}
	}
	if err := synth.Write(*out, cfg, synth.Options{Seed: *seed, DType: dt}); err != nil {
		return err
	}
	_, err := fmt.Fprintf(c.stdout, "wrote %s: %s family, %d parameters, %s\n", *out, cfg.Family, cfg.Params(), dt)
	return err
}
