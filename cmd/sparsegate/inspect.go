package main

import (
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/harness/inspect"
	"sparsegate/harness/sparsity"
)

// inspectBuild describes a sparse build: its base and the per-layer rules.
func inspectBuild(c *cli, dir string) error {
	b, err := sparsity.Open(dir, sparsity.OpenOptions{})
	if err != nil {
		return err
	}
	defer b.Close()
	fmt.Fprintf(c.stdout, "sparse build  %s\nbase          %s (sha256 %s, verified)\n\n", dir, b.Manifest.Base.Path, b.Manifest.Base.SHA256)
	return b.WriteTable(c.stdout)
}

const inspectUsage = `usage: sparsegate inspect [DIR]

Describe the checkpoint in DIR (default: the embedded demo model), or, when DIR
holds a manifest.json, the sparse build: its base and, per layer, each
component's mode, budget k, predictor rank, calibration recall and share of
the component's multiply-adds kept (config.json, *.safetensors or a sharded index,
and tokenizer files): family, parameter count, dtypes, per-layer tensor shapes,
tokenizer, and the SHA-256 of the weights. Every weight is scanned for NaN and
Inf; any found are listed and the exit code is 2.

flags: none

examples:
  sparsegate inspect
  sparsegate inspect ./models/opt-125m
`

func runInspect(c *cli, args []string) error {
	fs := newFlags(c, "inspect", inspectUsage)
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 1 {
		return usageError("inspect", "takes one checkpoint directory, got %d arguments", fs.NArg())
	}
	dir, name := fs.Arg(0), fs.Arg(0)
	if dir == "" {
		root, cleanup, err := extractDemo()
		if err != nil {
			return err
		}
		defer cleanup()
		dir, name = demoModelDir(root), demoName
	}
	if _, err := os.Stat(filepath.Join(dir, sparsity.ManifestFile)); err == nil {
		return inspectBuild(c, dir)
	}
	r, err := inspect.Inspect(dir)
	if err != nil {
		return err
	}
	r.Dir = name
	if err := r.WriteText(c.stdout); err != nil {
		return err
	}
	if n := len(r.NonFinite); n > 0 {
		return fmt.Errorf("%s: %d tensors hold NaN or Inf values (listed above); the checkpoint is damaged — re-export or re-download it", r.Dir, n)
	}
	return nil
}
