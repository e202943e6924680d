package engine

import (
	"testing"

	"github.com/stretchr/testify/require"
)

// lateHook keeps layers before from dense and applies posHook after.
type lateHook struct {
	posHook
	from int
}

func (h lateHook) Heads(t *Token) []int32 {
	if t.Layer < h.from {
		return nil
	}
	return h.posHook.Heads(t)
}

func (h lateHook) Neurons(t *Token) []int32 {
	if t.Layer < h.from {
		return nil
	}
	if t.PrevLayerInput == nil {
		panic("lookahead input missing")
	}
	return h.posHook.Neurons(t)
}

// Starting from a dense prefix gives the bits of a full run whose hook keeps
// the layers before the prefix dense; the prefix is what a dense run has at
// that layer boundary.
func TestForwardFromPrefixEqualsFullRun(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			toks := seq(30, 96, 5)
			h := lateHook{posHook{heads: m.Config.Heads}, 1}
			want, err := m.LogProbs(toks, h)
			require.NoError(t, err)
			p, err := m.DensePrefix(toks[:len(toks)-1], 1)
			require.NoError(t, err)
			require.Equal(t, 1, p.Layer)
			require.Len(t, p.Prev, len(p.At), "the previous layer's input is kept for lookahead predictors")
			got, err := m.LogProbsFrom(toks, p, h)
			require.NoError(t, err)
			require.Equal(t, want, got)
			dense, err := m.LogProbs(toks, nil)
			require.NoError(t, err)
			require.NotEqual(t, dense, got, "the hook does change later layers")
		})
	}
}
