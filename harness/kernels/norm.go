package kernels

import "math"

// LayerNorm sets dst = (x − mean)/√(var + eps)·gamma + beta over the whole
// of x, with the biased variance (divided by len(x)), as PyTorch's
// layer_norm defines it. Mean and variance are computed in float64 (two
// passes, each summing into eight lane sums, lane i mod 8 in ascending i,
// combined in a fixed order); the normalised value is rounded to float32
// before gamma and beta are applied in float32. gamma and beta may be nil
// (meaning 1 and 0); otherwise they, and dst, have len(x) entries. dst may
// alias x. With AVX2 the blocks of eight run in assembly, the same bits.
func LayerNorm(dst, x, gamma, beta []float32, eps float32) {
	if len(dst) != len(x) || (gamma != nil && len(gamma) != len(x)) || (beta != nil && len(beta) != len(x)) {
		panic(msgNormLen)
	}
	n := len(x)
	if n == 0 {
		return
	}
	blocks := n &^ 7
	var acc [8]float64
	if blocks > 0 {
		lnSumBlocks(x[:blocks], &acc)
	}
	lnSumGo(x[blocks:], &acc)
	mean := sum8(&acc) / float64(n)
	acc = [8]float64{}
	if blocks > 0 {
		lnSqBlocks(x[:blocks], mean, &acc)
	}
	lnSqGo(x[blocks:], mean, &acc)
	inv := 1 / math.Sqrt(sum8(&acc)/float64(n)+f64(eps))
	if blocks > 0 {
		lnApplyBlocks(dst[:blocks], x[:blocks], mean, inv, gamma, beta)
	}
	var g, b []float32
	if gamma != nil {
		g = gamma[blocks:]
	}
	if beta != nil {
		b = beta[blocks:]
	}
	lnApplyGo(dst[blocks:], x[blocks:], mean, inv, g, b)
}

// sum8 combines eight lane sums in LayerNorm's fixed order.
func sum8(a *[8]float64) float64 {
	return ((a[0] + a[4]) + (a[1] + a[5])) + ((a[2] + a[6]) + (a[3] + a[7]))
}

// lnSumGo adds each x[i] (widened) into acc[i mod 8], ascending i; x starts
// at a multiple of 8 of LayerNorm's vector.
func lnSumGo(x []float32, acc *[8]float64) {
	for i, v := range x {
		acc[i&7] += f64(v)
	}
}

// lnSqGo adds (x[i] − mean)² into acc[i mod 8], ascending i, each square
// rounded to float64 before it is added.
func lnSqGo(x []float32, mean float64, acc *[8]float64) {
	for i, v := range x {
		d := f64(v) - mean
		acc[i&7] += float64(d * d) // explicit rounding forbids FMA fusion (same bits on every build)
	}
}

// lnApplyGo sets dst[i] = float32((x[i] − mean)·inv), then ·gamma[i] and
// +beta[i] in float32 when they are not nil.
func lnApplyGo(dst, x []float32, mean, inv float64, gamma, beta []float32) {
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
