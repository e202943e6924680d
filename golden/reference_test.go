package golden

import (
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/stats"
)

// TestCompareMcNemarApprovalRatings runs the paired presidential approval
// example of A. Agresti, Categorical Data Analysis (Wiley, 1990) through
// Compare: 1600 people asked twice, 794 approve/approve, 150
// approve/disapprove, 86 disapprove/approve, 570 disapprove/disapprove (cell
// counts from memory; harness/stats's TestMcNemarApprovalRatings checks the
// test itself against published R output of the same example). The first
// survey plays the golden run and the second the candidate, "approve" being
// a right answer, so 150 items are lost and 86 gained.
//
// The chi-square statistic without continuity correction is
// (150−86)²/236 = 17.36; the value sometimes recalled as 34.71 is twice it
// and does not belong to this table (see harness/stats). The gate uses the
// exact binomial test on the 236 discordant pairs, p ≈ 3.7e-5.
func TestCompareMcNemarApprovalRatings(t *testing.T) {
	var gold, cand []bool
	add := func(n int, g, c bool) {
		for range n {
			gold, cand = append(gold, g), append(cand, c)
		}
	}
	add(794, true, true)
	add(150, true, false)
	add(86, false, true)
	add(570, false, false)
	require.Len(t, gold, 1600)

	s := parseSuite(t, choiceYAML("approval", "accuracy: {abs: 0.5, test: mcnemar, fail_if: significant}"))
	v := compareOne(t, s, newResults(s, choiceProbe(t, "approval", gold)), newResults(s, choiceProbe(t, "approval", cand)), Options{})
	m := metricOf(t, v, "approval", "accuracy")
	require.Equal(t, 150, m.Lost)
	require.Equal(t, 86, m.Gained)
	require.Equal(t, 944.0/1600, *m.Golden)
	require.Equal(t, 880.0/1600, *m.Candidate)
	require.Equal(t, "mcnemar-exact", m.Test)
	require.Equal(t, stats.McNemarTest(150, 86).ExactP, *m.P)
	require.Less(t, *m.P, 1e-4)
	require.InDelta(t, 17.36, *m.Statistic, 0.005, "(150−86)²/236, no continuity correction")
	require.Equal(t, Fail, m.Outcome, "significant at α = 0.05 although within abs 0.5")
	require.False(t, v.Passed)
}
