package stats

import (
	"fmt"
	"math"
	"math/bits"
	"math/rand/v2"
	"sort"
)

// An Interval is a bootstrap confidence interval of a statistic.
type Interval struct {
	Estimate  float64 // the statistic on the original sample
	Lo, Hi    float64 // percentile interval at the requested level
	P         float64 // two-sided bootstrap p-value for "difference = 0": 2*min(frac(resampled <= 0), frac(resampled >= 0)), capped at 1
	Resamples int
}

// bootstrapStream is the second PCG seed word, mixed with the caller's seed.
const bootstrapStream = 0x9e3779b97f4a7c15

// PairedBootstrap resamples n paired units with replacement `resamples` times
// and returns the percentile interval of stat at the given level (e.g. 0.95).
//
// The generator is math/rand/v2 PCG seeded with (seed, seed^0x9e3779b97f4a7c15);
// each resample draws n unit indices with Lemire's unbiased multiply-and-reject
// rule on PCG.Uint64, so the sequence does not depend on how the standard
// library maps random words to ranges. stat is called with counts, where
// counts[i] is how many times unit i was drawn in this resample, so it can
// form weighted sums in a fixed index order: the result does not depend on
// draw order. The counts slice is reused between calls; stat must not keep
// it. The estimate is stat of all ones.
//
// Quantile rule: with the resampled values sorted ascending into v[0..R-1],
// lo = v[floor((1-level)/2*R)] and hi = v[ceil((1+level)/2*R)-1], the products
// rounded to the nearest integer first when within 1e-9 of it and the indices
// clamped to [0, R-1]. For R = 1000 and level 0.95 that is v[25] and v[974].
//
// It returns an error when n < 1, resamples < 1, level is not in (0, 1),
// stat is nil, or stat returns NaN. The result is bit-identical for the same
// inputs.
func PairedBootstrap(n, resamples int, seed uint64, level float64, stat func(counts []int) float64) (Interval, error) {
	switch {
	case n < 1:
		return Interval{}, fmt.Errorf("stats: paired bootstrap needs at least 1 paired unit, got %d; score the probe before comparing", n)
	case resamples < 1:
		return Interval{}, fmt.Errorf("stats: paired bootstrap needs at least 1 resample, got %d; pass a positive resample count (1000 or more is usual)", resamples)
	case !(level > 0 && level < 1):
		return Interval{}, fmt.Errorf("stats: paired bootstrap confidence level %v is not in (0, 1); pass e.g. 0.95", level)
	case stat == nil:
		return Interval{}, fmt.Errorf("stats: paired bootstrap needs a statistic function, got nil")
	}
	counts := make([]int, n)
	for i := range counts {
		counts[i] = 1
	}
	est := stat(counts)
	if math.IsNaN(est) {
		return Interval{}, fmt.Errorf("stats: paired bootstrap statistic is NaN on the original sample; check for empty denominators")
	}
	src := rand.NewPCG(seed, seed^bootstrapStream)
	vals := make([]float64, resamples)
	un := uint64(n)
	for r := range vals {
		clear(counts)
		for range n {
			counts[boundedDraw(src, un)]++
		}
		v := stat(counts)
		if math.IsNaN(v) {
			return Interval{}, fmt.Errorf("stats: paired bootstrap statistic is NaN in resample %d of %d; check for units whose denominators can all be zero", r+1, resamples)
		}
		vals[r] = v
	}
	sort.Float64s(vals)
	rr := float64(resamples)
	lo := quantileIndex(math.Floor, (1-level)/2*rr, resamples)
	hi := quantileIndex(math.Ceil, (1+level)/2*rr, resamples+1) - 1
	nle := sort.Search(resamples, func(i int) bool { return vals[i] > 0 })
	nge := resamples - sort.Search(resamples, func(i int) bool { return vals[i] >= 0 })
	p := min(1, 2*float64(min(nle, nge))/rr)
	return Interval{Estimate: est, Lo: vals[lo], Hi: vals[hi], P: p, Resamples: resamples}, nil
}

// quantileIndex rounds x with round (floor or ceil), snapping to the nearest
// integer first when x is within 1e-9 of it, and clamps to [0, r-1].
func quantileIndex(round func(float64) float64, x float64, r int) int {
	if near := math.Round(x); math.Abs(x-near) < 1e-9 {
		x = near
	}
	i := int(round(x))
	return min(max(i, 0), r-1)
}

// boundedDraw returns a uniform integer in [0, n) from src, n > 0, by
// Lemire's multiply-and-reject method.
func boundedDraw(src *rand.PCG, n uint64) uint64 {
	hi, lo := bits.Mul64(src.Uint64(), n)
	if lo < n {
		thresh := -n % n
		for lo < thresh {
			hi, lo = bits.Mul64(src.Uint64(), n)
		}
	}
	return hi
}

// RatioDiff is a ready-made stat for PairedBootstrap: with per-unit
// numerators and denominators of two runs (e.g. per-window NLL sums and token
// counts of golden a and candidate b), it returns
// sum(w*numB)/sum(w*denB) - sum(w*numA)/sum(w*denA) with w = counts, summed
// in index order. It panics when the four slices differ in length, and the
// returned function panics when counts has another length.
func RatioDiff(numA, denA, numB, denB []float64) func(counts []int) float64 {
	n := len(numA)
	if len(denA) != n || len(numB) != n || len(denB) != n {
		panic("stats: RatioDiff slices differ in length")
	}
	return func(counts []int) float64 {
		if len(counts) != n {
			panic("stats: RatioDiff counts length differs from the units")
		}
		var na, da, nb, db float64
		for i, c := range counts {
			// The explicit conversions round each product, so no platform
			// fuses multiply and add and the sums are the same everywhere.
			w := float64(c)
			na += float64(w * numA[i])
			da += float64(w * denA[i])
			nb += float64(w * numB[i])
			db += float64(w * denB[i])
		}
		return nb/db - na/da
	}
}
