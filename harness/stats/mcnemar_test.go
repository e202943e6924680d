package stats

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// relClose asserts got agrees with want to sig significant digits.
func relClose(t *testing.T, want, got float64, sig int, what string) {
	t.Helper()
	tol := 0.5 * math.Pow(10, float64(1-sig))
	assert.InDelta(t, 0, (got-want)/want, tol, "%s: want %.6g, got %.6g", what, want, got)
}

// TestMcNemarApprovalRatings uses the paired presidential approval example
// (first survey x second survey: 794 approve/approve, 150 approve/disapprove,
// 86 disapprove/approve, 570 disapprove/disapprove), from A. Agresti,
// Categorical Data Analysis (Wiley, 1990), pp. 350-354, which is also the
// example in R's mcnemar.test documentation. Table from memory; the R outputs
// below are what R prints for that example, as seen in public code that runs it.
//
// Derivation by hand, B = 150, C = 86, B + C = 236, B - C = 64:
//
//	statistic  = 64² / 236 = 4096 / 236 = 17.3559...
//	corrected  = 63² / 236 = 3969 / 236 = 16.8178...
//	ChiSquareP = erfc(sqrt(16.8178 / 2)) = 4.1146e-5  (R: "McNemar's chi-squared = 16.818, p-value = 4.115e-05")
//	uncorrected p = erfc(sqrt(17.3559 / 2)) = 3.0993e-5 (R with correct = FALSE: 17.356, 3.099e-05)
//
// The recalled "chi2 = 34.71, p = 3.8e-9" does not hold for this table: any
// arrangement of it has the same two discordant cells, 150 and 86. 34.71 is
// exactly twice 17.356, and 3.8e-9 is the chi-square(1) tail of 34.71.
func TestMcNemarApprovalRatings(t *testing.T) {
	m := McNemarTest(150, 86)
	assert.Equal(t, 150, m.B)
	assert.Equal(t, 86, m.C)
	relClose(t, 17.36, m.Statistic, 4, "statistic")
	relClose(t, 4096.0/236, m.Statistic, 12, "statistic exact")
	relClose(t, 4.115e-5, m.ChiSquareP, 4, "corrected chi-square p")
	relClose(t, 3.099e-5, ChiSquare1SF(m.Statistic), 4, "uncorrected chi-square p")
	assert.Greater(t, math.Abs(m.Statistic-34.71), 1.0, "the recalled 34.71 is not this table's statistic")

	// The exact p-value must agree with the chi-square one in order of
	// magnitude. Its value, 3.7159e-5, is from scipy.stats.binomtest(86, 236)
	// (scipy 1.10.1), recorded here so the test runs without it.
	assert.Equal(t, math.Floor(math.Log10(m.ChiSquareP)), math.Floor(math.Log10(m.ExactP)))
	relClose(t, 3.715936139571387e-05, m.ExactP, 8, "exact p")

	// Swapping the cells swaps B and C and leaves every p-value unchanged.
	s := McNemarTest(86, 150)
	assert.Equal(t, m.Statistic, s.Statistic)
	assert.Equal(t, m.ChiSquareP, s.ChiSquareP)
	assert.Equal(t, m.ExactP, s.ExactP)
}

func TestMcNemarEdges(t *testing.T) {
	z := McNemarTest(0, 0)
	assert.Equal(t, McNemar{ChiSquareP: 1, ExactP: 1}, z)

	// Equal discordant counts are no evidence at all.
	e := McNemarTest(40, 40)
	assert.Equal(t, 0.0, e.Statistic)
	assert.Equal(t, 1.0, e.ChiSquareP)
	assert.Equal(t, 1.0, e.ExactP)

	// One regression out of one discordant pair: exact p = 2 * 0.5 = 1.
	one := McNemarTest(1, 0)
	assert.Equal(t, 1.0, one.Statistic)
	assert.Equal(t, 1.0, one.ExactP)

	// Ten regressions, no improvements: exact p = 2 / 2^10 (hand computed).
	ten := McNemarTest(10, 0)
	assert.Equal(t, 2.0/1024, ten.ExactP)
	relClose(t, math.Erfc(math.Sqrt(81.0/20)), ten.ChiSquareP, 12, "corrected (10-0-1)^2/10")

	require.PanicsWithValue(t, "stats: negative count", func() { McNemarTest(-1, 3) })
	require.PanicsWithValue(t, "stats: negative count", func() { McNemarTest(3, -1) })
}
