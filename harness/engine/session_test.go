package engine

import (
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
)

// A closed session's memory goes to the next NewSession, and a session
// started in used memory gives the same bits as one started in fresh
// memory: scores, continuations, generations and sliding windows are
// unchanged when they run after other work has left its caches behind,
// including longer ones (stale values past the new length are never read).
func TestClosedSessionMemoryIsReusedWithTheSameBits(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			fresh := tinyModel(t, f, 2, nil)
			used := tinyModel(t, f, 2, nil)
			long, short := seq(60, 96, 11), seq(9, 96, 12)
			run := func(m *Model) ([]float64, []ContinuationScore, []int, []float64) {
				lp, err := m.LogProbs(short, nil)
				require.NoError(t, err)
				cs, err := m.Continuations(short, [][]int{{3}, seq(4, 96, 13)}, nil)
				require.NoError(t, err)
				g, err := m.Generate(short, GenerateOptions{MaxTokens: 8})
				require.NoError(t, err)
				sl, _, err := m.SlidingLogProbs(long, SlidingOptions{Window: 16, Stride: 8})
				require.NoError(t, err)
				return lp, cs, g.Tokens, sl
			}
			lp0, cs0, g0, sl0 := run(fresh)
			// Leave long caches behind in used's pool: a long sequence scored
			// and generated from, and sessions closed by hand.
			_, err := used.LogProbs(long, nil)
			require.NoError(t, err)
			_, err = used.Generate(long, GenerateOptions{MaxTokens: 4})
			require.NoError(t, err)
			for range 3 {
				s := used.NewSession()
				_, err := used.Forward([]*Session{s}, [][]int{long}, nil)
				require.NoError(t, err)
				s.Close()
				s.Close() // a second Close does nothing
			}
			lp1, cs1, g1, sl1 := run(used)
			require.Equal(t, lp0, lp1)
			require.Equal(t, cs0, cs1)
			require.Equal(t, g0, g1)
			require.Equal(t, sl0, sl1)
		})
	}
}

// Close really hands the memory on: a NewSession after it starts empty but
// with the closed cache's capacity (sync.Pool may drop an entry now and
// then, as it does at random under the race detector, so a few tries).
func TestNewSessionTakesAClosedSessionsMemory(t *testing.T) {
	m := tinyModel(t, checkpoint.OPT, 1, nil)
	reused := false
	for range 8 {
		s := m.NewSession()
		_, err := m.Forward([]*Session{s}, [][]int{seq(30, 96, 14)}, nil)
		require.NoError(t, err)
		s.Close()
		n := m.NewSession()
		require.Equal(t, 0, n.Len())
		for i := range n.k {
			require.Empty(t, n.k[i])
			require.Empty(t, n.v[i])
		}
		if cap(n.k[0]) >= 30*m.Config.KVHeads*m.Config.HeadDim {
			reused = true
			break
		}
	}
	require.True(t, reused, "no NewSession reused a closed session's memory in 8 tries")
}
