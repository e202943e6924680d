package stats

import (
	"fmt"
	"math"
)

// PairedSampleSize returns the number of pairs needed to detect a difference
// delta = p10 - p01 between two paired proportions with discordant proportion
// psi = p10 + p01, two-sided level alpha and power 1-beta, by Connor's formula
// (R. J. Connor, "Sample size for testing differences in proportions for the
// paired-sample design", Biometrics 43(1), 1987, pp. 207-211):
//
//	n = (z_{1-a/2} sqrt(psi) + z_{1-b} sqrt(psi - delta^2))^2 / delta^2
//
// rounded up (a value within 1e-9 of an integer counts as that integer).
// It errors unless 0 < |delta| <= psi <= 1, 0 < alpha < 1 and 0 < power < 1.
func PairedSampleSize(delta, psi, alpha, power float64) (int, error) {
	ad := math.Abs(delta)
	if !(ad > 0 && ad <= psi && psi <= 1) {
		return 0, fmt.Errorf("stats: paired sample size needs 0 < |delta| <= psi <= 1, got delta %v, psi %v; psi is the share of discordant pairs and bounds |delta|", delta, psi)
	}
	if !(alpha > 0 && alpha < 1) || !(power > 0 && power < 1) {
		return 0, fmt.Errorf("stats: paired sample size needs alpha and power in (0, 1), got alpha %v, power %v", alpha, power)
	}
	x := connorN(ad, psi, NormalQuantile(1-alpha/2), NormalQuantile(power))
	if x > 1<<52 {
		return 0, fmt.Errorf("stats: paired sample size for delta %v, psi %v is %.3g pairs, too many to count; ask for a larger delta", delta, psi, x)
	}
	if near := math.Round(x); math.Abs(x-near) < 1e-9 {
		x = near
	}
	return max(1, int(math.Ceil(x))), nil
}

// MinDetectable returns the smallest delta (0 < delta <= psi) that n pairs
// detect with two-sided level alpha and the given power, psi the discordant
// proportion, by solving Connor's formula (see PairedSampleSize) for delta by
// bisection to 1e-12. It returns psi and ok=false when even delta = psi is
// not detectable with n pairs, including when n < 1 or psi == 0. It panics
// when psi is not in [0, 1], alpha is not in (0, 1) or power is not in
// [0.5, 1) (below 0.5 the formula is not monotone in delta).
func MinDetectable(n int, psi, alpha, power float64) (delta float64, ok bool) {
	if !(psi >= 0 && psi <= 1) {
		panic("stats: MinDetectable psi outside [0, 1]")
	}
	if !(alpha > 0 && alpha < 1) || !(power >= 0.5 && power < 1) {
		panic("stats: MinDetectable needs alpha in (0, 1) and power in [0.5, 1)")
	}
	if n < 1 || psi == 0 {
		return psi, false
	}
	za, zb := NormalQuantile(1-alpha/2), NormalQuantile(power)
	fn := float64(n)
	if connorN(psi, psi, za, zb) > fn {
		return psi, false
	}
	lo, hi := 0.0, psi
	for range 200 {
		if hi-lo <= 1e-12 {
			break
		}
		mid := lo + (hi-lo)/2
		if connorN(mid, psi, za, zb) <= fn {
			hi = mid
		} else {
			lo = mid
		}
	}
	return hi, true
}

// connorN is Connor's pair count before rounding, for 0 < d <= psi.
func connorN(d, psi, za, zb float64) float64 {
	s := za*math.Sqrt(psi) + zb*math.Sqrt(max(psi-d*d, 0))
	return s * s / (d * d)
}
