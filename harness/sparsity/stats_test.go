package sparsity

import (
	"bytes"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestStatsCountsAndTable(t *testing.T) {
	var s Stats // the zero value is usable
	require.Empty(t, s.Units())
	require.Zero(t, s.KeptFraction(Unit{0, MLP}))
	_, ok := s.Recall(Unit{0, MLP})
	require.False(t, ok)

	a, b := Unit{1, MLP}, Unit{0, Attention}
	s.Add(a, 8, 2)
	s.Add(a, 8, 4)
	s.AddRecall(a, 8, 5, 6)
	s.Add(b, 4, 4)
	require.Equal(t, []Unit{b, a}, s.Units(), "by layer, mlp before attention")
	require.Equal(t, 6.0/16, s.KeptFraction(a))
	r, ok := s.Recall(a)
	require.True(t, ok)
	require.Equal(t, 5.0/6, r)
	_, ok = s.Recall(b)
	require.False(t, ok)

	o := NewStats()
	o.Add(a, 8, 8)
	o.AddRecall(a, 8, 1, 2)
	o.Add(Unit{0, MLP}, 8, 1)
	s.Merge(o)
	us, ok := s.Unit(a)
	require.True(t, ok)
	require.Equal(t, UnitStats{Tokens: 3, Kept: 14, Width: 8, RecallHits: 6, RecallOf: 8}, us)

	var buf bytes.Buffer
	require.NoError(t, s.WriteTable(&buf))
	want := "" +
		"unit                       tokens  width  mean kept     kept   recall\n" +
		"layer 0 mlp                     1      8       1.00   0.1250        -\n" +
		"layer 0 attention               1      4       4.00   1.0000        -\n" +
		"layer 1 mlp                     3      8       4.67   0.5833   0.7500\n"
	require.Equal(t, want, buf.String())
	var again bytes.Buffer
	require.NoError(t, s.WriteTable(&again))
	require.Equal(t, buf.String(), again.String())
}
