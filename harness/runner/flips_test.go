package runner

import (
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
)

// A candidate that differs from the base (oracle top-1 MLP neuron per token)
// has lost and gained counts equal to counting the per-item outcomes by hand,
// and the per-item base outcomes are the base's own results.
func TestFlipsCountByHand(t *testing.T) {
	s := writeSuite(t, mixedSuite, defaultFiles())
	base := openTarget(t, writeModel(t, 1, nil), 2)
	cand := sparseTarget(t, base, 1)
	r := run(t, s, base, cand, Options{})
	alone := run(t, s, base, nil, Options{})

	count := func(names ...string) (lost, gained, n int) {
		for _, name := range names {
			p := r.Probe(name)
			require.Equal(t, results.Ran, p.Status, p.Note)
			for i, it := range p.Items {
				require.Equal(t, *alone.Probe(name).Items[i].Correct, *it.BaseCorrect, "%s/%s: BaseCorrect is the base's outcome", name, it.ID)
				switch {
				case *it.BaseCorrect && !*it.Correct:
					lost++
				case !*it.BaseCorrect && *it.Correct:
					gained++
				}
				n++
			}
		}
		return lost, gained, n
	}
	check := func(flips string, names ...string) {
		t.Helper()
		lost, gained, n := count(names...)
		p := r.Probe(flips)
		require.Equal(t, results.Ran, p.Status, p.Note)
		require.Len(t, p.Items, n)
		require.Equal(t, float64(lost), p.Metric("lost").Value, flips)
		require.Equal(t, float64(gained), p.Metric("gained").Value, flips)
		require.Equal(t, float64(lost+gained)/float64(n), p.Metric("flip_rate").Value, flips)
	}
	lost, gained, _ := count("mc", "mc-bytes", "gen")
	require.Positive(t, lost+gained, "the candidate must flip some items, or this test checks nothing")
	check("flips", "mc", "mc-bytes", "gen")
	check("flips-rev", "mc", "gen")
	t.Logf("lost %d, gained %d", lost, gained)
}
