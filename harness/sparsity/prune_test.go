package sparsity

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/synth"
)

func TestPrunedCheckpointEqualsStaticMask(t *testing.T) {
	for _, f := range testFamilies {
		for _, dt := range []checkpoint.DType{checkpoint.F32, checkpoint.BF16} {
			t.Run(string(f)+"/"+string(dt), func(t *testing.T) {
				fx := newFixture(t, f, nil)
				if dt != checkpoint.F32 { // rewrite the base in half precision
					require.NoError(t, synth.Write(fx.baseDir, synth.Tiny(f), synth.Options{Seed: 11, DType: dt}))
					m, err := engine.Load(fx.baseDir, engine.Options{Threads: 1})
					require.NoError(t, err)
					t.Cleanup(func() { m.Close() })
					fx.base, fx.cfg = m, m.Config
					fx.sha, err = m.Weights().SHA256()
					require.NoError(t, err)
				}
				b := fx.open(fx.write(fx.manifest(maskRule(fx)), nil))
				keep, err := b.StaticKeep()
				require.NoError(t, err)
				require.Len(t, keep, 2*fx.cfg.Layers)
				out := filepath.Join(fx.root, "pruned")
				require.NoError(t, Prune(fx.base, out, keep))
				pruned, err := engine.Load(out, engine.Options{Threads: 1})
				require.NoError(t, err)
				defer pruned.Close()
				require.Equal(t, fx.cfg, pruned.Config)
				toks := lpTokens(21, 8)
				want, err := fx.base.LogProbs(toks, b.Hook(HookOptions{}))
				require.NoError(t, err)
				got, err := pruned.LogProbs(toks, nil)
				require.NoError(t, err)
				requireRelClose(t, want, got, 1e-5)
				// Same tensors, same shapes and dtypes.
				for _, n := range fx.base.Weights().Names() {
					a, _ := fx.base.Weights().Lookup(n)
					p, ok := pruned.Weights().Lookup(n)
					require.True(t, ok, n)
					require.Equal(t, a.Shape, p.Shape, n)
					require.Equal(t, a.DType, p.DType, n)
				}
				cfgA, err := os.ReadFile(filepath.Join(fx.baseDir, "config.json"))
				require.NoError(t, err)
				cfgB, err := os.ReadFile(filepath.Join(out, "config.json"))
				require.NoError(t, err)
				require.Equal(t, cfgA, cfgB)
			})
		}
	}
}

func TestPruneKeepsUnlistedUnitsAndCopiesTokenizer(t *testing.T) {
	root := t.TempDir()
	base := filepath.Join(root, "base")
	cfg := synth.Tiny(checkpoint.OPT)
	require.NoError(t, synth.WithTokenizer(base, cfg, []string{"the cat sat on the mat", "a dog ran"}, 280))
	require.NoError(t, synth.Write(base, cfg, synth.Options{Seed: 3}))
	m, err := engine.Load(base, engine.Options{Threads: 1})
	require.NoError(t, err)
	defer m.Close()
	out := filepath.Join(root, "out")
	// Keeping every unit listed, and none listed, both give the base's function.
	all := map[Unit][]int{{0, MLP}: iotaInts(cfg.FFN), {1, Attention}: iotaInts(cfg.Heads)}
	for _, keep := range []map[Unit][]int{nil, all} {
		require.NoError(t, Prune(m, out, keep))
		p, err := engine.Load(out, engine.Options{Threads: 1})
		require.NoError(t, err)
		require.NotNil(t, p.Tokenizer, "tokenizer files are copied")
		toks := lpTokens(12, 9)
		want, err := m.LogProbs(toks, nil)
		require.NoError(t, err)
		got, err := p.LogProbs(toks, nil)
		require.NoError(t, err)
		require.Equal(t, want, got)
		p.Close()
	}
	err = Prune(m, out, map[Unit][]int{{0, MLP}: {3, 3}})
	require.ErrorContains(t, err, "layer 0 mlp: keep[1] = 3 appears twice")
	err = Prune(m, out, map[Unit][]int{{5, Attention}: {0}})
	require.ErrorContains(t, err, "layer 5 attention is not a unit of")
	err = Prune(m, base, nil)
	require.ErrorContains(t, err, "is the base checkpoint")
}

func iotaInts(n int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = i
	}
	return s
}
