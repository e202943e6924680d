package textscore

import (
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/synth"
)

const text = "Parcel KX-4471, 3.2 kg, left SMR at 06:40 for Gullhaven Quay (GHQ). Status: on time.\n" +
	"Parcel KX-4472, 0.8 kg, held at SMR: label smudged. Status: delayed.\n"

func model(t *testing.T, edit func(string, []float32)) *engine.Model {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "m")
	cfg := synth.Tiny(checkpoint.OPT)
	require.NoError(t, synth.WithTokenizer(dir, cfg, []string{text, text}, 280))
	require.NoError(t, synth.Write(dir, cfg, synth.Options{Seed: 2, Edit: edit}))
	m, err := engine.Load(dir, engine.Options{Threads: 2})
	require.NoError(t, err)
	t.Cleanup(func() { m.Close() })
	return m
}

// A model whose logits are all equal has perplexity equal to its vocabulary
// size, and bits per byte of log2(V) per scored token spread over the bytes
// (a textbook identity; common practice, no source).
func TestUniformModel(t *testing.T) {
	m := model(t, func(name string, v []float32) {
		if strings.HasSuffix(name, "embed_tokens.weight") {
			clear(v) // the tied head: every logit is 0
		}
	})
	r, err := Score(m, []byte(text), Options{Window: 32, Stride: 16})
	require.NoError(t, err)
	V := float64(m.Config.VocabSize)
	require.InEpsilon(t, V, r.Perplexity, 1e-12)
	require.InEpsilon(t, math.Log(V), r.MeanNLL, 1e-12)
	// BOS is prepended, so every content token is scored and all bytes count.
	require.Equal(t, len(text), r.Bytes)
	require.InEpsilon(t, float64(r.Targets)*math.Log2(V)/float64(len(text)), r.BitsPerByte, 1e-12)
	require.Equal(t, r.Tokens-1, r.Targets)
}

func TestWindowCoversWholeText(t *testing.T) {
	m := model(t, nil)
	long, err := Score(m, []byte(text), Options{Window: 64, Stride: 32})
	require.NoError(t, err)
	short, err := Score(m, []byte(text), Options{Window: 16, Stride: 4})
	require.NoError(t, err)
	require.Equal(t, long.Targets, short.Targets)
	require.Greater(t, short.Windows, long.Windows)
	require.NotEqual(t, long.NLL, short.NLL, "less context must change the score")
	again, err := Score(m, []byte(text), Options{Window: 16, Stride: 4})
	require.NoError(t, err)
	require.Equal(t, short, again)
}

func TestErrors(t *testing.T) {
	m := model(t, nil)
	_, err := Score(m, nil, Options{})
	require.ErrorContains(t, err, "empty")
	_, err = Score(m, []byte(text), Options{Window: 1000})
	require.ErrorContains(t, err, "window 1000")
}
