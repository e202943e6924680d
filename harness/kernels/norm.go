package kernels

import "math"

// LayerNorm sets dst = (x − mean)/√(var + eps)·gamma + beta over the whole
// of x, with the biased variance (divided by len(x)), as PyTorch's
// layer_norm defines it. Mean and variance are computed in float64 (two
// passes); the normalised value is rounded to float32 before gamma and beta
// are applied in float32. gamma and beta may be nil (meaning 1 and 0);
// otherwise they, and dst, have len(x) entries. dst may alias x.
func LayerNorm(dst, x, gamma, beta []float32, eps float32) {
	if len(dst) != len(x) || (gamma != nil && len(gamma) != len(x)) || (beta != nil && len(beta) != len(x)) {
		panic(msgNormLen)
	}
	if len(x) == 0 {
		return
	}
	var sum float64
	for _, v := range x {
		sum += f64(v)
	}
	mean := sum / float64(len(x))
	var sq float64
	for _, v := range x {
		d := f64(v) - mean
		sq += float64(d * d) // explicit rounding forbids FMA fusion (same bits on every build)
	}
	inv := 1 / math.Sqrt(sq/float64(len(x))+f64(eps))
	for i, v := range x {
		y := float32((f64(v) - mean) * inv)
		if gamma != nil {
			y *= gamma[i]
		}
		if beta != nil {
			y += beta[i]
		}
		dst[i] = y
	}
}

// RMSNorm sets dst = x/√(mean(x²) + eps)·gamma, the Llama-family RMS norm.
// The mean of squares is accumulated in float64; the reciprocal root is
// rounded to float32 and applied in float32 (x·r, then ·gamma), the order
// the float32 reference computes in. gamma may be nil (meaning 1);
// otherwise it, and dst, have len(x) entries. dst may alias x.
func RMSNorm(dst, x, gamma []float32, eps float32) {
	if len(dst) != len(x) || (gamma != nil && len(gamma) != len(x)) {
		panic(msgNormLen)
	}
	if len(x) == 0 {
		return
	}
	var sq float64
	for _, v := range x {
		sq += float64(f64(v) * f64(v)) // explicit rounding forbids FMA fusion
	}
	ms := float32(sq / float64(len(x)))
	r := float32(1 / math.Sqrt(f64(ms+eps)))
	for i, v := range x {
		y := v * r
		if gamma != nil {
			y = gamma[i] * y
		}
		dst[i] = y
	}
}
