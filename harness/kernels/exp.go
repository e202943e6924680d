package kernels

import "math"

// The single-precision exponential of the softmax and log-sum-exp kernels:
// Cody–Waite range reduction t = n·ln2 + r with ln2 split in two (C1 exact
// in nine bits, so n·C1 and t − n·C1 are exact for the n that occur), a
// degree-5 minimax polynomial for (e^r − 1 − r)/r², and the scale 2^n built
// in the exponent bits. The constants are those of the Cephes library's
// expf (Stephen L. Moshier's Cephes Math Library, expf.c; recalled from
// memory, checked against math.Exp in exp_test.go to within 2 ulp over
// the whole domain used). Every step is one rounded float32 multiply or
// add, never fused, so the Go twin below and the AVX2 kernel give the same
// bits.
const (
	expLog2e = float32(1.44269504088896341)
	expC1    = float32(0.693359375)
	expC2    = float32(-2.12194440e-4)
	expP0    = float32(1.9875691500e-4)
	expP1    = float32(1.3981999507e-3)
	expP2    = float32(8.3334519073e-3)
	expP3    = float32(4.1665795894e-2)
	expP4    = float32(1.6666665459e-1)
	expP5    = float32(5.0000001201e-1)
	// expLo is ln 2^-126: below it e^t is subnormal and exp32 returns 0.
	expLo = float32(-87.33654475)
)

// exp32 returns e^t for t ≤ 0 (the shifted arguments of a softmax), to
// within 2 ulp; 0 for t < expLo (e^t below the smallest normal float32) and
// for t = −Inf. t must not be NaN (the callers rule NaN out first). It is
// the lane-by-lane twin of the AVX2 kernel in exp_amd64.s: each explicit
// float32 conversion below is one rounded VMULPS or VADDPS there.
func exp32(t float32) float32 {
	if t < expLo {
		return 0
	}
	n := float32(math.RoundToEven(float64(float32(t * expLog2e))))
	r := t - float32(n*expC1)
	r = r - float32(n*expC2)
	z := float32(r * r)
	p := float32(expP0*r) + expP1
	p = float32(p*r) + expP2
	p = float32(p*r) + expP3
	p = float32(p*r) + expP4
	p = float32(p*r) + expP5
	y := float32(p*z) + r
	y = y + 1
	return y * math.Float32frombits(uint32(int32(n)+127)<<23)
}

// expSumGo is expSum's pure-Go body: for i < len(x) it computes
// e = exp32(x[i] − m), stores it in dst[i] when dst is not nil, and adds
// float64(e) to acc[i mod 8], in ascending i.
func expSumGo(dst, x []float32, m float32, acc *[8]float64) {
	for i, v := range x {
		e := exp32(v - m)
		if dst != nil {
			dst[i] = e
		}
		acc[i&7] += float64(e)
	}
}

// expSum returns Σ exp32(x[i] − m) for x's entries, each e rounded to
// float32 and summed in float64, and stores each e in dst[i] when dst is not
// nil (dst may be x itself). Every x[i] − m must be ≤ 0 or −Inf and none NaN
// (m is x's maximum). The sum is the fixed-order reduction of eight
// lane sums (lane i mod 8, ascending i), the same bits on every path.
func expSum(dst, x []float32, m float32) float64 {
	var acc [8]float64
	blocks := len(x) &^ 7
	if blocks > 0 {
		var d []float32
		if dst != nil {
			d, dst = dst[:blocks], dst[blocks:]
		}
		expSumBlocks(d, x[:blocks], m, &acc)
	}
	expSumGo(dst, x[blocks:], m, &acc)
	return ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]))
}

// maxLanesGo is maxOrNaN's pure-Go lane body over n = len(x), a positive
// multiple of 8: lane j keeps the largest of x[j], x[j+8], … (a later value
// replaces the kept one only when greater), and nan reports any NaN.
func maxLanesGo(x []float32, lanes *[8]float32) (nan bool) {
	copy(lanes[:], x[:8])
	for i := 0; i < len(x); i += 8 {
		for j := range 8 {
			v := x[i+j]
			if v != v {
				nan = true
			}
			if v > lanes[j] {
				lanes[j] = v
			}
		}
	}
	return nan
}

// maxOrNaN returns the largest entry of x (len(x) > 0) as a float64, or NaN
// if any entry is NaN. Which of +0 and −0 it returns when both are the
// maximum is unspecified; subtracting either gives the same differences.
func maxOrNaN(x []float32) float64 {
	blocks := len(x) &^ 7
	mx := x[0]
	if blocks > 0 {
		var lanes [8]float32
		nan := maxLanes(x[:blocks], &lanes)
		if nan {
			return math.NaN()
		}
		for _, v := range lanes {
			if v > mx {
				mx = v
			}
		}
	}
	for _, v := range x[blocks:] {
		if v != v {
			return math.NaN()
		}
		if v > mx {
			mx = v
		}
	}
	return f64(mx)
}
