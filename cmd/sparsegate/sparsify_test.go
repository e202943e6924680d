package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestSparsifyThenInspectBuild(t *testing.T) {
	root := t.TempDir()
	base := filepath.Join(root, "base")
	text := "../../harness/synth/testdata/sample.txt"
	code, _, errs := sparsegate(t, "synth", "--out", base, "--tokenizer-text", text)
	require.Equal(t, 0, code, errs)
	build := filepath.Join(root, "build")
	code, out, errs := sparsegate(t, "sparsify", "--base", base, "--text", text, "--out", build,
		"--keep-mlp", "0.25", "--keep-heads", "0.5", "--rank", "8", "--head-rank", "4", "--window", "64", "--epochs", "3", "--threads", "1")
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "layer 1 attention")
	require.Contains(t, out, "recall")
	code, out, errs = sparsegate(t, "inspect", build)
	require.Equal(t, 0, code, errs)
	for _, want := range []string{"sparse build", "verified", "layer 0 mlp", "predictor", "16/64", "2/4"} {
		require.Contains(t, out, want)
	}
	// A damaged manifest is bad input: exit 2, naming the file and the layer.
	p := filepath.Join(build, "manifest.json")
	b, err := os.ReadFile(p)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(p, []byte(strings.Replace(string(b), `"k":16`, `"k":640`, 1)), 0o644))
	code, _, errs = sparsegate(t, "inspect", build)
	require.Equal(t, 2, code, errs)
	require.Contains(t, errs, "manifest.json")
	require.Contains(t, errs, "640")
}
