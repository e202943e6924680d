package bisect

import (
	"math"
	"slices"
	"testing"

	"github.com/stretchr/testify/require"
)

// failsWhen returns a test that fails when every unit of cause is sparse.
func failsWhen(cause ...int) Test {
	return func(sparse []int) (Outcome, string) {
		for _, c := range cause {
			if !slices.Contains(sparse, c) {
				return Pass, ""
			}
		}
		return Fail, ""
	}
}

// A single culprit is found by binary splitting in at most 2·⌈log₂ n⌉ + 2
// tests (the two endpoint checks, then at most two tests per halving), for
// every position and every n up to 40.
func TestSingleCulpritInLogarithmicRuns(t *testing.T) {
	for n := 1; n <= 40; n++ {
		for c := range n {
			r := Search(n, failsWhen(c))
			require.Equal(t, Found, r.Status)
			require.Equal(t, []int{c}, r.Culprits, "n=%d", n)
			require.False(t, r.Interaction)
			bound := 2*int(math.Ceil(math.Log2(float64(n)))) + 2
			require.LessOrEqual(t, r.Runs, bound, "n=%d culprit %d: %d runs", n, c, r.Runs)
			require.Equal(t, r.Runs, len(r.Steps))
		}
	}
}

// Two units that fail only together are reported as a pair, and the result is
// 1-minimal: dropping either one passes.
func TestInteractionIsReportedAsAPair(t *testing.T) {
	for n := 2; n <= 24; n++ {
		for a := range n {
			for b := a + 1; b < n; b++ {
				test := failsWhen(a, b)
				r := Search(n, test)
				require.Equal(t, []int{a, b}, r.Culprits, "n=%d", n)
				require.True(t, r.Interaction)
				for _, drop := range r.Culprits {
					o, _ := test(minus(r.Culprits, []int{drop}))
					require.Equal(t, Pass, o)
				}
			}
		}
	}
}

// Delta debugging stays within its published bounds: Zeller & Hildebrandt
// (IEEE TSE 2002) give at most |c|² + 3|c| tests in the worst case for a
// failing set c (here plus the two endpoint checks); a failure caused by
// every unit at once is that worst case for the reduction.
func TestDeltaDebuggingWithinPublishedBounds(t *testing.T) {
	for n := 1; n <= 16; n++ {
		all := make([]int, n)
		for i := range all {
			all[i] = i
		}
		r := Search(n, failsWhen(all...))
		require.Equal(t, all, r.Culprits)
		require.LessOrEqual(t, r.Runs, n*n+3*n+2, "n=%d", n)
	}
	// Three scattered causes: still 1-minimal, within the bound for |c| = 32
	// and far below it.
	r := Search(32, failsWhen(3, 17, 30))
	require.Equal(t, []int{3, 17, 30}, r.Culprits)
	require.LessOrEqual(t, r.Runs, 32*32+3*32+2)
	t.Logf("three causes among 32 units: %d tests", r.Runs)
}

func TestEndpoints(t *testing.T) {
	r := Search(8, func([]int) (Outcome, string) { return Pass, "" })
	require.Equal(t, Passes, r.Status)
	require.Equal(t, 1, r.Runs)

	r = Search(8, func([]int) (Outcome, string) { return Fail, "" })
	require.Equal(t, NoCulprit, r.Status, "fails even with every unit dense")
	require.Empty(t, r.Culprits)
	require.Equal(t, 2, r.Runs)

	r = Search(8, func(s []int) (Outcome, string) {
		if len(s) == 0 {
			return Unresolved, "error"
		}
		return Fail, ""
	})
	require.Equal(t, Undecided, r.Status)
}

// An unresolved step in the middle counts as not failing; the search still
// ends with a failing set (here the culprit's half is unresolved once, so the
// search falls back to finer parts).
func TestUnresolvedStepsDoNotBreakTheSearch(t *testing.T) {
	test := func(s []int) (Outcome, string) {
		if len(s) == 4 && s[0] == 4 {
			return Unresolved, "flaky"
		}
		return failsWhen(5)(s)
	}
	r := Search(8, test)
	require.Equal(t, Found, r.Status)
	require.Equal(t, []int{5}, r.Culprits)
	require.Contains(t, r.Steps, Step{Sparse: []int{4, 5, 6, 7}, Outcome: Unresolved, Note: "flaky"})
}
