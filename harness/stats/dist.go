package stats

import "math"

// ChiSquare1SF returns the upper tail P(X >= x) of a chi-square distribution
// with one degree of freedom, erfc(sqrt(x/2)); x <= 0 gives 1.
func ChiSquare1SF(x float64) float64 {
	if x <= 0 {
		return 1
	}
	return math.Erfc(math.Sqrt(x / 2))
}

// NormalQuantile returns z with Phi(z) = p for the standard normal
// distribution, 0 < p < 1, computed as -sqrt(2)*erfcinv(2p) (math.Erfinv
// based). It panics when p is not in (0, 1).
func NormalQuantile(p float64) float64 {
	if !(p > 0 && p < 1) {
		panic("stats: NormalQuantile probability outside (0, 1)")
	}
	return -math.Sqrt2 * math.Erfcinv(2*p)
}
