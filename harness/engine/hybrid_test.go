package engine

import (
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// A hybrid that takes nothing from the other model is the base, bit for bit;
// one that takes everything is the other model; one that takes a single
// pruned unit equals a checkpoint pruned in that unit only.
func TestHybridTakesExactlyTheChosenUnits(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			base := tinyModel(t, f, 2, nil)
			prune := func(layer string) func(string, []float32) {
				return func(name string, v []float32) {
					if strings.Contains(name, layer) && (strings.Contains(name, "fc1") || strings.Contains(name, "c_fc") || strings.Contains(name, "up_proj")) {
						clear(v[:len(v)/2])
					}
				}
			}
			other := tinyModel(t, f, 2, prune(".0."))
			only1 := tinyModel(t, f, 2, prune(".1."))
			both := tinyModel(t, f, 2, func(n string, v []float32) { prune(".0.")(n, v); prune(".1.")(n, v) })
			toks := seq(16, 96, 3)
			lp := func(m *Model) []float64 {
				out, err := m.LogProbs(toks, nil)
				require.NoError(t, err)
				return out
			}
			none, err := Hybrid(base, other, func(int, bool) bool { return false })
			require.NoError(t, err)
			require.Equal(t, lp(base), lp(none))
			all, err := Hybrid(base, other, func(int, bool) bool { return true })
			require.NoError(t, err)
			require.Equal(t, lp(other), lp(all))
			require.NotEqual(t, lp(base), lp(other))
			// Layer 1's MLP from a model pruned in layers 0 and 1 equals one pruned in layer 1 only.
			one, err := Hybrid(base, both, func(l int, mlp bool) bool { return l == 1 && mlp })
			require.NoError(t, err)
			require.Equal(t, lp(only1), lp(one))
			require.True(t, SameUnit(base, other, 1, true))
			require.False(t, SameUnit(base, other, 0, true))
			require.True(t, SameUnit(base, other, 0, false))
			require.NoError(t, one.Close(), "closing a hybrid leaves the weights to their models")
			require.Equal(t, lp(base), lp(none))
		})
	}
}
