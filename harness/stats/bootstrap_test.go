package stats

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// pairedDiffs draws n synthetic paired units: a ~ N(0, 1), b = a + shift + e
// with e ~ N(0, 0.5²), and returns b - a per unit.
func pairedDiffs(r *rand.Rand, n int, shift float64) []float64 {
	d := make([]float64, n)
	for i := range d {
		a := r.NormFloat64()
		b := a + shift + 0.5*r.NormFloat64()
		d[i] = b - a
	}
	return d
}

// meanStat is the weighted mean of d with the resample counts as weights,
// summed in index order.
func meanStat(d []float64) func([]int) float64 {
	return func(counts []int) float64 {
		var s, w float64
		for i, c := range counts {
			s += float64(c) * d[i]
			w += float64(c)
		}
		return s / w
	}
}

// TestPairedBootstrapCoverage: the 95% percentile interval of a mean of 200
// roughly normal paired differences should cover the true difference in about
// 95% of repetitions (the percentile bootstrap's large-sample coverage,
// common practice, no source). With 1000 repetitions the binomial standard
// error of the coverage is 0.7%, so 93-97% is a band of about ±3 errors.
func TestPairedBootstrapCoverage(t *testing.T) {
	const (
		reps  = 1000
		n     = 200
		shift = 0.3
	)
	const resamples = 1000
	data := rand.New(rand.NewPCG(7, 11))
	covered := 0
	for rep := range reps {
		d := pairedDiffs(data, n, shift)
		iv, err := PairedBootstrap(n, resamples, uint64(rep), 0.95, meanStat(d))
		require.NoError(t, err)
		require.LessOrEqual(t, iv.Lo, iv.Estimate)
		require.GreaterOrEqual(t, iv.Hi, iv.Estimate)
		if iv.Lo <= shift && shift <= iv.Hi {
			covered++
		}
	}
	t.Logf("coverage %d/%d with %d resamples", covered, reps, resamples)
	assert.GreaterOrEqual(t, covered, 930)
	assert.LessOrEqual(t, covered, 970)
}

func TestPairedBootstrapDeterminism(t *testing.T) {
	d := pairedDiffs(rand.New(rand.NewPCG(1, 2)), 50, 0.1)
	a, err := PairedBootstrap(len(d), 500, 42, 0.95, meanStat(d))
	require.NoError(t, err)
	b, err := PairedBootstrap(len(d), 500, 42, 0.95, meanStat(d))
	require.NoError(t, err)
	assert.Equal(t, a, b, "same seed must give an identical interval")
	c, err := PairedBootstrap(len(d), 500, 43, 0.95, meanStat(d))
	require.NoError(t, err)
	assert.Equal(t, a.Estimate, c.Estimate)
	assert.False(t, a.Lo == c.Lo && a.Hi == c.Hi, "a different seed must move the bounds")

	// Regression values recorded from this implementation (no outside
	// source): they pin the generator, the bounded draw and the quantile
	// rule, so any change to the resampling sequence fails here. The data
	// are multiples of 1/4, so every weighted sum is exact and nothing but
	// the draws can move the result.
	fixed := make([]float64, 50)
	for i := range fixed {
		fixed[i] = float64(i%7)*0.25 - 0.5
	}
	mean := meanStat(fixed)
	var first []int
	calls := 0
	p, err := PairedBootstrap(len(fixed), 500, 42, 0.95, func(counts []int) float64 {
		if calls++; calls == 2 {
			first = append([]int(nil), counts...)
		}
		return mean(counts)
	})
	require.NoError(t, err)
	assert.Equal(t, [3]float64{0.09, 0.375, 0}, [3]float64{p.Lo, p.Hi, p.P})
	// The first resample's counts were also reproduced by an independent
	// Python reimplementation of 128-bit PCG with the DXSM output step (the
	// generator math/rand/v2 documents) and Lemire's rejection rule.
	pinnedFirst := []int{
		1, 1, 1, 2, 0, 1, 1, 0, 0, 0, 0, 3, 0, 2, 0, 1, 1, 1, 1, 0, 2, 1, 2, 0, 0,
		1, 0, 0, 3, 5, 2, 0, 1, 0, 1, 1, 1, 1, 0, 3, 0, 2, 0, 1, 2, 0, 1, 2, 1, 1,
	}
	assert.Equal(t, pinnedFirst, first, "counts of the first resample, seed 42")
}

func TestPairedBootstrapPValue(t *testing.T) {
	// A large true difference: every resampled mean is positive.
	big := pairedDiffs(rand.New(rand.NewPCG(3, 4)), 200, 0.3)
	iv, err := PairedBootstrap(len(big), 1000, 5, 0.95, meanStat(big))
	require.NoError(t, err)
	assert.Greater(t, iv.Lo, 0.0)
	assert.Equal(t, 0.0, iv.P)
	assert.Equal(t, 1000, iv.Resamples)

	// No true difference: P is roughly uniform on [0, 1], so across
	// repetitions its mean is near 1/2 and about 5% fall below 0.05.
	data := rand.New(rand.NewPCG(9, 10))
	const reps = 200
	var sum float64
	below := 0
	for rep := range reps {
		d := pairedDiffs(data, 100, 0)
		iv, err := PairedBootstrap(len(d), 400, uint64(rep), 0.95, meanStat(d))
		require.NoError(t, err)
		sum += iv.P
		if iv.P < 0.05 {
			below++
		}
	}
	t.Logf("null: mean P %.3f, %d/%d below 0.05", sum/reps, below, reps)
	assert.InDelta(t, 0.5, sum/reps, 0.07)
	assert.GreaterOrEqual(t, below, 2)
	assert.LessOrEqual(t, below, 20)
}

// TestPairedBootstrapQuantileRule feeds the known values 0..R-1 (in reverse
// call order) to check the sorted-index rule stated in the doc comment.
func TestPairedBootstrapQuantileRule(t *testing.T) {
	for _, c := range []struct {
		r      int
		level  float64
		lo, hi float64
	}{
		{1000, 0.95, 25, 974}, // floor(25) = 25, ceil(975) - 1 = 974
		{20, 0.90, 1, 18},     // floor(1) = 1, ceil(19) - 1 = 18
		{10, 0.90, 0, 9},      // floor(0.5) = 0, ceil(9.5) - 1 = 9
		{1, 0.95, 0, 0},
		{999, 0.95, 24, 974}, // floor(24.975) = 24, ceil(974.025) - 1 = 974
	} {
		calls := 0
		stat := func([]int) float64 {
			calls++
			if calls == 1 {
				return -7 // the estimate
			}
			return float64(c.r - calls + 1) // ..., 0
		}
		iv, err := PairedBootstrap(3, c.r, 1, c.level, stat)
		require.NoError(t, err)
		assert.Equal(t, -7.0, iv.Estimate)
		assert.Equal(t, c.lo, iv.Lo, "R=%d level=%v", c.r, c.level)
		assert.Equal(t, c.hi, iv.Hi, "R=%d level=%v", c.r, c.level)
		// One value (0) is <= 0 and all are >= 0: P = 2/R, capped at 1.
		assert.Equal(t, math.Min(1, 2/float64(c.r)), iv.P)
	}
}

// TestPairedBootstrapCounts: every resample draws n units in all, and each
// unit is drawn equally often in the long run (expected count 1 per resample;
// the bound is about 5 binomial standard errors, common practice, no source).
func TestPairedBootstrapCounts(t *testing.T) {
	const n, resamples = 7, 20000
	total := make([]int, n)
	calls := 0
	_, err := PairedBootstrap(n, resamples, 99, 0.95, func(counts []int) float64 {
		calls++
		s := 0
		for i, c := range counts {
			s += c
			total[i] += c
		}
		require.Equal(t, n, s)
		return float64(counts[0])
	})
	require.NoError(t, err)
	require.Equal(t, resamples+1, calls)
	for i, tot := range total {
		draws := tot - 1 // the estimate's all-ones call
		sd := math.Sqrt(n * resamples * (1.0 / n) * (1 - 1.0/n))
		assert.InDelta(t, resamples, draws, 5*sd, "unit %d", i)
	}
}

func TestPairedBootstrapErrors(t *testing.T) {
	ok := func([]int) float64 { return 1 }
	_, err := PairedBootstrap(0, 10, 1, 0.95, ok)
	assert.ErrorContains(t, err, "at least 1 paired unit")
	_, err = PairedBootstrap(5, 0, 1, 0.95, ok)
	assert.ErrorContains(t, err, "at least 1 resample")
	for _, lv := range []float64{0, 1, -0.5, 95, math.NaN()} {
		_, err = PairedBootstrap(5, 10, 1, lv, ok)
		assert.ErrorContains(t, err, "confidence level")
	}
	_, err = PairedBootstrap(5, 10, 1, 0.95, nil)
	assert.ErrorContains(t, err, "statistic function")
	_, err = PairedBootstrap(5, 10, 1, 0.95, func([]int) float64 { return math.NaN() })
	assert.ErrorContains(t, err, "NaN on the original sample")
	calls := 0
	_, err = PairedBootstrap(5, 10, 1, 0.95, func([]int) float64 {
		calls++
		if calls == 4 {
			return math.NaN()
		}
		return 0
	})
	assert.ErrorContains(t, err, "NaN in resample 3 of 10")
}

// TestRatioDiff on a hand example: golden numerators 2, 4 over denominators
// 1, 3; candidate numerators 3, 5 over the same denominators.
func TestRatioDiff(t *testing.T) {
	f := RatioDiff([]float64{2, 4}, []float64{1, 3}, []float64{3, 5}, []float64{1, 3})
	assert.Equal(t, 0.5, f([]int{1, 1}))                    // 8/4 - 6/4
	assert.Equal(t, 1.0, f([]int{2, 0}))                    // 6/2 - 4/2
	assert.InDelta(t, 1.0/3, f([]int{0, 3}), 1e-15)         // 15/9 - 12/9
	assert.InDelta(t, 13.0/7-10.0/7, f([]int{1, 2}), 1e-15) // (3+10)/(1+6) - (2+8)/(1+6)
	require.PanicsWithValue(t, "stats: RatioDiff slices differ in length", func() {
		RatioDiff([]float64{1}, []float64{1, 2}, []float64{1}, []float64{1})
	})
	require.PanicsWithValue(t, "stats: RatioDiff counts length differs from the units", func() { f([]int{1}) })

	// With unit denominators it is the mean paired difference.
	a := []float64{0.5, 1.5, -1}
	b := []float64{1, 1, 0}
	one := []float64{1, 1, 1}
	assert.InDelta(t, (0.5-0.5+1)/3, RatioDiff(a, one, b, one)([]int{1, 1, 1}), 1e-15)
}

func BenchmarkPairedBootstrap(b *testing.B) {
	d := pairedDiffs(rand.New(rand.NewPCG(1, 1)), 1000, 0.1)
	for b.Loop() {
		if _, err := PairedBootstrap(len(d), 1000, 1, 0.95, meanStat(d)); err != nil {
			b.Fatal(err)
		}
	}
}
