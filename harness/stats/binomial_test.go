package stats

import (
	"math"
	"math/big"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// exactBinomCDFs returns P(X <= k) for k = 0..n, X ~ Binomial(n, num/den),
// computed in exact rational arithmetic: the terms C(n, i) p^i (1-p)^(n-i)
// are built by the product rule term_i = term_{i-1} (n-i+1)/i p/(1-p),
// starting from (1-p)^n. It shares no code with the package.
func exactBinomCDFs(n int, num, den int64) []float64 {
	p := big.NewRat(num, den)
	q := new(big.Rat).Sub(big.NewRat(1, 1), p)
	ratio := new(big.Rat).Quo(p, q)
	term := big.NewRat(1, 1)
	for range n {
		term.Mul(term, q)
	}
	sum := new(big.Rat)
	out := make([]float64, n+1)
	for i := 0; i <= n; i++ {
		if i > 0 {
			term.Mul(term, big.NewRat(int64(n-i+1), int64(i)))
			term.Mul(term, ratio)
		}
		sum.Add(sum, term)
		out[i], _ = sum.Float64()
	}
	return out
}

func TestBinomialCDFExactSmall(t *testing.T) {
	type pr struct{ num, den int64 }
	for _, p := range []pr{{1, 2}, {3, 10}, {1, 100}, {9, 10}, {1, 7}} {
		for _, n := range []int{1, 2, 5, 20, 57, 150} {
			pf := float64(p.num) / float64(p.den)
			cdf := exactBinomCDFs(n, p.num, p.den)
			for k := 0; k < n; k++ {
				want := cdf[k]
				got := BinomialCDF(k, n, pf)
				// The package sums the smaller tail, so the larger side is
				// 1 - tail: its absolute error is a few ulps of 1.
				tol := 1e-12 * want
				if want > 0.5 {
					tol = 1e-14
				}
				if want < 1e-300 {
					tol = 1e-300
				}
				require.InDelta(t, want, got, tol, "CDF(%d; %d, %d/%d)", k, n, p.num, p.den)
			}
		}
	}
}

func TestBinomialTwoSidedExactSmall(t *testing.T) {
	for _, n := range []int{1, 2, 3, 10, 20, 49, 50, 236} {
		cdf := exactBinomCDFs(n, 1, 2)
		for k := 0; k <= n; k++ {
			// The doubled smaller tail, capped at 1.
			want := math.Min(1, 2*cdf[min(k, n-k)])
			require.InDelta(t, want, BinomialTwoSided(k, n), 1e-12*want, "k=%d n=%d", k, n)
		}
	}
	// Hand computed: 3 of 20, P(X <= 3) = (1 + 20 + 190 + 1140) / 2^20.
	assert.InDelta(t, 2*1351.0/1048576, BinomialTwoSided(3, 20), 1e-17)
	assert.InDelta(t, 2*1351.0/1048576, BinomialTwoSided(17, 20), 1e-17)
	assert.Equal(t, 1.0, BinomialTwoSided(0, 0))
	assert.Equal(t, 1.0, BinomialTwoSided(10, 20))
	assert.Equal(t, 1.0, BinomialTwoSided(5, 11))
}

func TestBinomialCDFEdges(t *testing.T) {
	assert.Equal(t, 0.0, BinomialCDF(-1, 10, 0.5))
	assert.Equal(t, 1.0, BinomialCDF(10, 10, 0.5))
	assert.Equal(t, 1.0, BinomialCDF(99, 10, 0.5))
	assert.Equal(t, 1.0, BinomialCDF(0, 10, 0))
	assert.Equal(t, 0.0, BinomialCDF(9, 10, 1))
	assert.Equal(t, 1.0, BinomialCDF(0, 0, 0.3))
	assert.InDelta(t, math.Pow(0.7, 10), BinomialCDF(0, 10, 0.3), 1e-16)
	require.Panics(t, func() { BinomialCDF(1, -1, 0.5) })
	require.Panics(t, func() { BinomialCDF(1, 5, 1.5) })
	require.Panics(t, func() { BinomialCDF(1, 5, math.NaN()) })
	require.Panics(t, func() { BinomialTwoSided(6, 5) })
	require.Panics(t, func() { BinomialTwoSided(-1, 5) })
}

// Large n: the CDF must be monotone in k, symmetric at p = 1/2 and close to
// the normal approximation near the mean (central limit theorem, common
// practice, no source); the scipy test checks digits.
func TestBinomialCDFLargeN(t *testing.T) {
	const n = 10_000_000
	prev := 0.0
	for k := n/2 - 8000; k <= n/2+8000; k += 500 {
		c := BinomialCDF(k, n, 0.5)
		require.GreaterOrEqual(t, c, prev)
		prev = c
		sym := 1 - BinomialCDF(n-k-1, n, 0.5)
		require.InDelta(t, c, sym, 1e-13, "symmetry at k=%d", k)
		z := (float64(k) + 0.5 - n/2) / math.Sqrt(n/4)
		require.InDelta(t, 0.5*math.Erfc(-z/math.Sqrt2), c, 1e-4, "normal approximation at k=%d", k)
	}
	assert.Equal(t, 1.0, BinomialTwoSided(n/2, n))
}

// TestBinomialHighPrecision checks large-n values against mpmath 1.2.1 (a
// reference library) at 40 significant digits: the probability-mass terms
// exp(loggamma(n+1) - loggamma(i+1) - loggamma(n-i+1) + i ln p + (n-i) ln(1-p)),
// with p the exact binary value of the float64 used here, summed over the
// smaller tail until a term is below 1e-35 of the sum. Computed once; the
// values are recorded here so the test runs without Python.
func TestBinomialHighPrecision(t *testing.T) {
	for _, c := range []struct {
		k, n int
		p    float64
		want float64
	}{
		{5, 10_000_000, 1e-6, 0.067085868295838488694},
		{25, 10_000_000, 1e-6, 0.99998231994709980995},
		{2_999_000, 10_000_000, 0.3, 0.24519256374147806472},
		{3_002_000, 10_000_000, 0.3, 0.91627354899485580972},
		{9_999_990, 10_000_000, 0.999999, 0.54207034811917734026},
		{100, 1_000_000, 0.0002, 3.7048880088030047665e-15},
	} {
		require.InDelta(t, c.want, BinomialCDF(c.k, c.n, c.p), 1e-12*c.want, "BinomialCDF(%d, %d, %v)", c.k, c.n, c.p)
	}
	// mpmath, same method, p = 1/2: 2 P(X <= 4995000), n = 1e7.
	require.InDelta(t, 0.0015671019056953984809, BinomialTwoSided(4_995_000, 10_000_000), 1e-12*0.0015671019056953984809)
}
