package kernels

import "math"

// Softmax replaces x by softmax(x) in place, subtracting the maximum first
// so that no exponential overflows; the exponentials and their sum are
// computed in float64. A NaN anywhere makes every output NaN; so does an
// input whose maximum is +Inf or whose entries are all −Inf (as the float
// formula gives). An empty slice is left alone.
func Softmax(x []float32) {
	if len(x) == 0 {
		return
	}
	mx := maxOrNaN(x)
	// Each exponential is computed once and kept, in chunks, for the
	// division: the same values as computing it twice.
	var e [1024]float64
	if len(x) <= len(e) {
		var sum float64
		for i, v := range x {
			e[i] = math.Exp(f64(v) - mx)
			sum += e[i]
		}
		for i := range x {
			x[i] = float32(e[i] / sum)
		}
		return
	}
	var sum float64
	for _, v := range x {
		sum += math.Exp(f64(v) - mx)
	}
	for i, v := range x {
		x[i] = float32(math.Exp(f64(v)-mx) / sum)
	}
}

// LogSumExp returns log Σ exp(x[i]), computed stably in float64 around the
// maximum. It returns −Inf for an empty slice or all −Inf entries, +Inf if
// any entry is +Inf (and none is NaN), and NaN if any entry is NaN.
func LogSumExp(x []float32) float64 {
	if len(x) == 0 {
		return math.Inf(-1)
	}
	mx := maxOrNaN(x)
	if math.IsNaN(mx) || math.IsInf(mx, 0) {
		return mx
	}
	var sum float64
	for _, v := range x {
		sum += math.Exp(f64(v) - mx)
	}
	return mx + math.Log(sum)
}

// maxOrNaN returns the maximum of a non-empty x as float64, or NaN if x
// holds a NaN.
func maxOrNaN(x []float32) float64 {
	mx := x[0]
	for _, v := range x {
		if v != v {
			return math.NaN()
		}
		if v > mx {
			mx = v
		}
	}
	return f64(mx)
}
