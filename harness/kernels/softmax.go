package kernels

import "math"

// Softmax replaces x by softmax(x) in place: e_i = exp32(x_i − max) in
// float32 (exp.go), their sum in float64 (eight lane sums in a fixed
// order), and x_i = e_i · float32(1/sum). Shifting by the maximum keeps
// every exponential ≤ 1, so none overflows; an e_i below the smallest
// normal float32 (x_i more than about 87 below the maximum) is 0. A NaN
// anywhere makes every output NaN; so does an input whose maximum is +Inf
// or whose entries are all −Inf (as the formula gives). An empty slice is
// left alone. The result is the same bits with and without assembly.
func Softmax(x []float32) {
	if len(x) == 0 {
		return
	}
	mx := maxOrNaN(x)
	if math.IsNaN(mx) || math.IsInf(mx, 0) {
		nan := float32(math.NaN())
		for i := range x {
			x[i] = nan
		}
		return
	}
	sum := expSum(x, x, float32(mx))
	Scale(float32(1/sum), x)
}

// LogSumExp returns log Σ exp(x[i]), computed stably around the maximum m
// as m + log Σ exp32(x[i] − m), the exponentials in float32 and their sum in
// float64 (as Softmax). It returns −Inf for an empty slice or all −Inf
// entries, +Inf if any entry is +Inf (and none is NaN), and NaN if any
// entry is NaN.
func LogSumExp(x []float32) float64 {
	if len(x) == 0 {
		return math.Inf(-1)
	}
	mx := maxOrNaN(x)
	if math.IsNaN(mx) || math.IsInf(mx, 0) {
		return mx
	}
	return mx + math.Log(expSum(nil, x, float32(mx)))
}
