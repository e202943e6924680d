package stats

import "math"

// BinomialCDF returns P(X <= k) for X ~ Binomial(n, p). It is computed in log
// space (lgamma-based Stirling error terms and the deviance form of the
// probability mass, see the package formulas), summing only the smaller tail,
// so n up to 1e7 and beyond is accurate to a few units in the last place of
// the tail. k < 0 gives 0 and k >= n gives 1. It panics when n < 0 or p is
// not in [0, 1].
func BinomialCDF(k, n int, p float64) float64 {
	if n < 0 {
		panic("stats: BinomialCDF with negative n")
	}
	if !(p >= 0 && p <= 1) {
		panic("stats: BinomialCDF probability outside [0, 1]")
	}
	if k < 0 {
		return 0
	}
	if k >= n {
		return 1
	}
	if float64(k) < float64(n)*p {
		return lowerTail(k, n, p)
	}
	return 1 - upperTail(k+1, n, p)
}

// BinomialTwoSided returns the exact two-sided binomial test p-value of
// observing k successes in n trials with p = 0.5: the doubled smaller tail,
// capped at 1. n == 0 gives 1. It panics when n < 0 or k is not in [0, n].
func BinomialTwoSided(k, n int) float64 {
	if n < 0 || k < 0 || k > n {
		panic("stats: BinomialTwoSided with k outside [0, n]")
	}
	if n == 0 {
		return 1
	}
	m := min(k, n-k)
	if 2*m+1 >= n {
		// The smaller tail holds the middle: it is at least one half.
		return 1
	}
	return min(1, 2*lowerTail(m, n, 0.5))
}

// tailTiny is where a tail sum stops: the next term no longer changes it.
const tailTiny = 1e-17

// lowerTail returns P(X <= k) by summing from k down; the caller guarantees
// k <= n*p, so the terms fall as i falls.
func lowerTail(k, n int, p float64) float64 {
	sum := 0.0
	for i := k; i >= 0; i-- {
		t := binomPMF(i, n, p)
		sum += t
		if t <= tailTiny*sum {
			break
		}
	}
	return sum
}

// upperTail returns P(X >= k) by summing from k up; the caller guarantees
// k > n*p, so the terms fall as i rises.
func upperTail(k, n int, p float64) float64 {
	sum := 0.0
	for i := k; i <= n; i++ {
		t := binomPMF(i, n, p)
		sum += t
		if t <= tailTiny*sum {
			break
		}
	}
	return sum
}

// binomPMF returns P(X = x) for X ~ Binomial(n, p) in the saddle-point form
// (C. Loader, "Fast and Accurate Computation of Binomial Probabilities",
// 2000), which avoids the cancellation of three large lgamma values.
func binomPMF(x, n int, p float64) float64 {
	q := 1 - p
	if p == 0 {
		if x == 0 {
			return 1
		}
		return 0
	}
	if q == 0 {
		if x == n {
			return 1
		}
		return 0
	}
	fn := float64(n)
	if x == 0 {
		if n == 0 {
			return 1
		}
		if p < 0.1 {
			return math.Exp(-bd0(fn, fn*q) - fn*p)
		}
		return math.Exp(fn * math.Log(q))
	}
	if x == n {
		if q < 0.1 {
			return math.Exp(-bd0(fn, fn*p) - fn*q)
		}
		return math.Exp(fn * math.Log(p))
	}
	fx := float64(x)
	lc := stirlerr(n) - stirlerr(x) - stirlerr(n-x) - bd0(fx, fn*p) - bd0(fn-fx, fn*q)
	// ln(2π x (n−x)/n) from exact integers: log1p(−x/n) would lose digits
	// to cancellation when x is close to n.
	lf := math.Log(2*math.Pi) + math.Log(fx) + math.Log(fn-fx) - math.Log(fn)
	return math.Exp(lc - 0.5*lf)
}

// stirlerr returns ln(m!) − (m+½)ln m + m − ½ln(2π) for m >= 1.
func stirlerr(m int) float64 {
	const (
		s0 = 1.0 / 12
		s1 = 1.0 / 360
		s2 = 1.0 / 1260
		s3 = 1.0 / 1680
		s4 = 1.0 / 1188
	)
	x := float64(m)
	if m <= 15 {
		lg, _ := math.Lgamma(x + 1)
		return lg - (x+0.5)*math.Log(x) + x - 0.5*math.Log(2*math.Pi)
	}
	xx := x * x
	switch {
	case m > 500:
		return (s0 - s1/xx) / x
	case m > 80:
		return (s0 - (s1-s2/xx)/xx) / x
	case m > 35:
		return (s0 - (s1-(s2-s3/xx)/xx)/xx) / x
	default:
		return (s0 - (s1-(s2-(s3-s4/xx)/xx)/xx)/xx) / x
	}
}

// bd0 returns the deviance x ln(x/mu) + mu − x, by a series when x is close
// to mu so that no digits cancel.
func bd0(x, mu float64) float64 {
	if math.Abs(x-mu) < 0.1*(x+mu) {
		v := (x - mu) / (x + mu)
		s := (x - mu) * v
		ej := 2 * x * v
		v *= v
		for j := 1; j < 1000; j++ {
			ej *= v
			s1 := s + ej/float64(2*j+1)
			if s1 == s {
				return s1
			}
			s = s1
		}
		return s
	}
	return x*math.Log(x/mu) + mu - x
}
