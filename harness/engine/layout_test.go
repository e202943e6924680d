package engine

import (
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/synth"
)

// rewrite copies a checkpoint's tensors into a new single file under dir,
// renaming or dropping them with edit (return "" to drop).
func rewrite(t *testing.T, from, to string, edit func(string) string) {
	t.Helper()
	w, err := checkpoint.OpenWeights(from)
	require.NoError(t, err)
	defer w.Close()
	var ts []checkpoint.NamedTensor
	for _, n := range w.Names() {
		tt, _ := w.Lookup(n)
		if nn := edit(n); nn != "" {
			ts = append(ts, checkpoint.NamedTensor{Name: nn, DType: tt.DType, Shape: tt.Shape, Data: append([]byte(nil), tt.Bytes()...)})
		}
	}
	require.NoError(t, checkpoint.Write(filepath.Join(to, "model.safetensors"), ts, nil))
	cfg, err := checkpoint.LoadConfig(filepath.Join(from, "config.json"))
	require.NoError(t, err)
	require.NoError(t, checkpoint.WriteConfig(to, cfg))
}

func TestShardedAndPrefixedLayoutsLoad(t *testing.T) {
	toks := seq(20, 96, 3)
	base := t.TempDir()
	require.NoError(t, synth.Write(base, synth.Tiny(checkpoint.GPT2), synth.Options{Seed: 3}))
	m, err := Load(base, Options{Threads: 1})
	require.NoError(t, err)
	want, err := m.LogProbs(toks, nil)
	require.NoError(t, err)
	m.Close()

	// Shards listed by an index.
	sharded := t.TempDir()
	require.NoError(t, synth.Write(sharded, synth.Tiny(checkpoint.GPT2), synth.Options{Seed: 3, MaxShardBytes: 20000}))
	require.NoFileExists(t, filepath.Join(sharded, "model.safetensors"))
	m, err = Load(sharded, Options{Threads: 1})
	require.NoError(t, err)
	require.Greater(t, len(m.Weights().Files()), 1)
	got, err := m.LogProbs(toks, nil)
	require.NoError(t, err)
	require.Equal(t, want, got)
	m.Close()

	// GPT-2 checkpoints saved from the head model carry a "transformer." prefix.
	prefixed := t.TempDir()
	rewrite(t, base, prefixed, func(n string) string { return "transformer." + n })
	m, err = Load(prefixed, Options{Threads: 1})
	require.NoError(t, err)
	got, err = m.LogProbs(toks, nil)
	require.NoError(t, err)
	require.Equal(t, want, got)
	m.Close()
}

func TestLayoutErrorsNameFileAndTensor(t *testing.T) {
	base := t.TempDir()
	require.NoError(t, synth.Write(base, synth.Tiny(checkpoint.Llama), synth.Options{Seed: 3}))
	cases := []struct {
		name string
		edit func(string) string
		want []string
	}{
		{"missing tensor", func(n string) string {
			if n == "model.layers.1.mlp.up_proj.weight" {
				return ""
			}
			return n
		}, []string{`tensor "model.layers.1.mlp.up_proj.weight" is missing from model.safetensors`}},
		{"extra layer", func(n string) string {
			if n == "model.norm.weight" {
				return "model.layers.7.input_layernorm.weight"
			}
			return n
		}, []string{`"model.norm.weight" is missing`, "unexpected tensors", "model.layers.7.input_layernorm.weight"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			rewrite(t, base, dir, c.edit)
			_, err := Load(dir, Options{})
			require.Error(t, err)
			require.Contains(t, err.Error(), dir)
			for _, w := range c.want {
				require.Contains(t, err.Error(), w)
			}
		})
	}
}
