package runner

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/harness/torchref"
)

const demoModel = "../../suites/demo/model"

// A perplexity probe on the demo model (a real trained checkpoint) gives the
// per-window NLL, perplexity, mean NLL and bits per byte that the PyTorch
// reference forward pass (harness/engine/testdata/torchref/torchref.py,
// driven by testdata/pplref.py) computes on the same windows, within 1e-5
// relative; the window layout is the engine's own SlidingLogProbs layout.
func TestPerplexityMatchesTorchReference(t *testing.T) {
	torchref.Require(t)
	text, err := os.ReadFile("../../suites/demo/data/heldout.txt")
	require.NoError(t, err)
	s := writeSuite(t, "format: 1\nname: ref\nprobes:\n  - name: ppl\n    kind: perplexity\n    text: heldout.txt\n    max_bytes: 1500\n    window: 64\n    stride: 32\n",
		map[string]string{"heldout.txt": string(text[:4000])})
	base := openTarget(t, demoModel, 2)
	r := run(t, s, base, nil, Options{})
	p := r.Probe("ppl")
	require.Equal(t, results.Ran, p.Status, p.Note)

	pp, err := prepare(s, s.Probes[0], base.Model)
	require.NoError(t, err)
	require.Greater(t, len(pp.windows), 4, "the slice spans several windows")
	// The layout is the engine's sliding-window layout.
	_, ew, err := base.Model.SlidingLogProbs(pp.tokens, engine.SlidingOptions{Window: 64, Stride: 32})
	require.NoError(t, err)
	require.Len(t, ew, len(pp.windows))
	var wins [][3]int
	for i, w := range pp.windows {
		require.Equal(t, engine.Window{Start: w.start, End: w.end, First: w.first}, ew[i])
		wins = append(wins, [3]int{w.start, w.end, w.first})
	}
	nbytes := make([]int, len(pp.tokens))
	for i, id := range pp.tokens {
		nbytes[i] = targetBytes(base.Model, id)
	}
	require.Zero(t, nbytes[0], "the leading BOS stands for no text bytes")

	dir := t.TempDir()
	in, err := json.Marshal(map[string]any{"tokens": pp.tokens, "windows": wins, "bytes": nbytes})
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(dir, "in.json"), in, 0o644))
	out, err := exec.Command(torchref.Python, "testdata/pplref.py", "--model", demoModel,
		"--input", filepath.Join(dir, "in.json"), "--output", filepath.Join(dir, "out.json")).CombinedOutput()
	require.NoError(t, err, "%s", out)
	var ref struct {
		Windows []struct {
			NLL           float64
			Tokens, Bytes int
		}
		NLL           float64
		Tokens, Bytes int
		MeanNLL       float64 `json:"mean_nll"`
		Perplexity    float64
		BitsPerByte   float64 `json:"bits_per_byte"`
	}
	b, err := os.ReadFile(filepath.Join(dir, "out.json"))
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(b, &ref))

	rel := func(want, got float64, what string) {
		t.Helper()
		require.LessOrEqual(t, math.Abs(got-want), 1e-5*math.Abs(want), "%s: sparsegate %.9g, reference %.9g", what, got, want)
	}
	require.Len(t, p.Items, len(ref.Windows))
	for i, it := range p.Items {
		rel(ref.Windows[i].NLL, *it.NLL, it.ID+" nll")
		require.Equal(t, ref.Windows[i].Tokens, *it.Tokens, it.ID)
		require.Equal(t, ref.Windows[i].Bytes, *it.Bytes, it.ID)
	}
	rel(ref.MeanNLL, p.Metric("mean_nll").Value, "mean_nll")
	rel(ref.Perplexity, p.Metric("perplexity").Value, "perplexity")
	rel(ref.BitsPerByte, p.Metric("bits_per_byte").Value, "bits_per_byte")
	require.Equal(t, len(pp.tokens)-1, ref.Tokens, "every token but the first is scored once")
	cut := text[:1500]
	cut = cut[:strings.LastIndexByte(string(cut), '\n')+1]
	require.Equal(t, len(cut), ref.Bytes, "bits per byte counts the scored text's bytes (max_bytes cut back to a line end)")
	t.Logf("%d tokens in %d windows: perplexity %.6g (reference %.6g), bits/byte %.6g (reference %.6g)",
		ref.Tokens, len(wins), p.Metric("perplexity").Value, ref.Perplexity, p.Metric("bits_per_byte").Value, ref.BitsPerByte)
}
