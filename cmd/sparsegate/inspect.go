package main

import (
	"fmt"

	"sparsegate/harness/inspect"
)

const inspectUsage = `usage: sparsegate inspect DIR

Describe the checkpoint in DIR (config.json, *.safetensors or a sharded index,
and tokenizer files): family, parameter count, dtypes, per-layer tensor shapes,
tokenizer, and the SHA-256 of the weights. Every weight is scanned for NaN and
Inf; any found are listed and the exit code is 2.

example:
  sparsegate inspect ./models/opt-125m
`

func runInspect(c *cli, args []string) error {
	fs := newFlags(c, "inspect", inspectUsage)
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usageError("inspect", "needs exactly one checkpoint directory, got %d arguments", fs.NArg())
	}
	r, err := inspect.Inspect(fs.Arg(0))
	if err != nil {
		return err
	}
	if err := r.WriteText(c.stdout); err != nil {
		return err
	}
	if n := len(r.NonFinite); n > 0 {
		return fmt.Errorf("%s: %d tensors hold NaN or Inf values (listed above); the checkpoint is damaged — re-export or re-download it", r.Dir, n)
	}
	return nil
}
