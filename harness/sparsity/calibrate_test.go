package sparsity

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/synth"
)

const calibText = "Parcel KX-4471 weighs 7 kg and parcel MV-0912 weighs 12 kg. Together they weigh 19 kg.\n" +
	"Route 12: Saltquay, Gullpoint, Fogrock, Heronreach, Kelpgate.\nAfter Fogrock comes: Heronreach\n" +
	"Log: PG-6942 arrived at Gullmouth as planned. Status: on time\n"

func calibBase(t *testing.T) (string, *engine.Model) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "base")
	cfg := synth.Tiny(checkpoint.OPT)
	cfg.MaxPositions = 128
	require.NoError(t, synth.WithTokenizer(dir, cfg, []string{calibText}, 300))
	require.NoError(t, synth.Write(dir, cfg, synth.Options{Seed: 4}))
	m, err := engine.Load(dir, engine.Options{Threads: 1})
	require.NoError(t, err)
	t.Cleanup(func() { m.Close() })
	return dir, m
}

func TestCalibrateWritesAWorkingBuild(t *testing.T) {
	baseDir, base := calibBase(t)
	text := []byte(strings.Repeat(calibText, 12))
	opts := CalibrateOptions{KeepMLP: 0.4, KeepHeads: 0.5, Rank: 8, HeadRank: 4, Window: 64, Seed: 3,
		Train: TrainOptions{Epochs: 6}}
	out := filepath.Join(t.TempDir(), "build")
	rep, err := Calibrate(base, baseDir, text, out, opts)
	require.NoError(t, err)
	require.Len(t, rep.Units, 2*base.Config.Layers)
	for _, u := range rep.Units {
		require.Greater(t, u.Recall, 0.0, "%s", u.Unit)
		// A predictor must beat choosing k units at random (recall ≈ k/width).
		require.Greater(t, u.Recall, float64(u.K)/float64(u.Width), "%s", u.Unit)
	}
	b, err := Open(out, OpenOptions{})
	require.NoError(t, err)
	defer b.Close()
	require.Len(t, b.Units(), 2*base.Config.Layers)
	stats := NewStats()
	toks := base.Tokenizer.EncodeForModel(calibText)
	toks = toks[:min(len(toks), 100)]
	_, err = b.Base.LogProbs(toks, b.Hook(HookOptions{Stats: stats, Recall: true}))
	require.NoError(t, err)
	for _, u := range b.Units() {
		require.InDelta(t, float64(b.Rule(u).K)/float64(b.Width(u)), stats.KeptFraction(u), 1e-9, "%s", u)
	}
	// Same inputs and seed: the same bytes.
	out2 := filepath.Join(t.TempDir(), "build")
	_, err = Calibrate(base, baseDir, text, out2, opts)
	require.NoError(t, err)
	for _, f := range []string{ManifestFile, "predictors.safetensors"} {
		a, err := os.ReadFile(filepath.Join(out, f))
		require.NoError(t, err)
		c, err := os.ReadFile(filepath.Join(out2, f))
		require.NoError(t, err)
		require.Equal(t, a, c, f)
	}
}

func TestCalibrateRecallTarget(t *testing.T) {
	baseDir, base := calibBase(t)
	text := []byte(strings.Repeat(calibText, 12))
	rep, err := Calibrate(base, baseDir, text, filepath.Join(t.TempDir(), "b"),
		CalibrateOptions{KeepMLP: 0.3, Recall: 0.9, Rank: 8, Window: 64, Seed: 1, Train: TrainOptions{Epochs: 4}})
	require.NoError(t, err)
	for _, u := range rep.Units {
		require.True(t, u.Recall >= 0.9 || u.K == u.Width/2, "%s: recall %.3f at k %d", u.Unit, u.Recall, u.K)
	}
}

func TestCalibrateErrors(t *testing.T) {
	baseDir, base := calibBase(t)
	_, err := Calibrate(base, baseDir, []byte("short"), t.TempDir(), CalibrateOptions{})
	require.ErrorContains(t, err, "at least 200")
	_, err = Calibrate(base, baseDir, []byte(calibText), t.TempDir(), CalibrateOptions{KeepMLP: 2})
	require.ErrorContains(t, err, "keep fraction 2")
	_, err = Calibrate(base, baseDir, []byte(calibText), t.TempDir(), CalibrateOptions{Input: "sideways"})
	require.ErrorContains(t, err, `"sideways"`)
}
