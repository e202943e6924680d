package kernels

import "math"

// GELU applies the exact, erf-based GELU in place:
// x·½·(1 + erf(x/√2)), evaluated in float64 as x·½·erfc(−x/√2) (the same
// function, without the cancellation of 1 + erf for negative x) and rounded
// once.
func GELU(x []float32) {
	for i, v := range x {
		t := f64(v)
		x[i] = float32(0.5 * t * math.Erfc(-t/math.Sqrt2))
	}
}

// GELUTanh applies the tanh approximation of GELU in place:
// ½·x·(1 + tanh(u)) with u = √(2/π)·(x + 0.044715·x³), GPT-2's "gelu_new".
// It is evaluated in float64 as x/(1 + e^(−2u)) (the same function, since
// 1 + tanh(u) = 2/(1 + e^(−2u)), without the cancellation for negative x)
// and rounded once.
func GELUTanh(x []float32) {
	c := math.Sqrt(2 / math.Pi)
	for i, v := range x {
		t := f64(v)
		u := c * (t + float64(0.044715*t*t*t)) // explicit rounding: no FMA, same bits on every build
		x[i] = float32(t / (1 + math.Exp(-2*u)))
	}
}

// SiLU applies x·σ(x) = x/(1+e^(−x)) in place, evaluated in float64.
func SiLU(x []float32) {
	for i, v := range x {
		x[i] = float32(silu64(f64(v)))
	}
}

// SiLUMul sets gate[i] = silu(gate[i])·up[i] (the SwiGLU gate), with the
// SiLU rounded to float32 before the multiplication, as a float32 reference
// evaluating silu(gate) * up does. len(gate) must equal len(up).
func SiLUMul(gate, up []float32) {
	if len(gate) != len(up) {
		panic(msgSiLUMulLen)
	}
	for i, v := range gate {
		gate[i] = float32(silu64(f64(v))) * up[i]
	}
}

// silu64 is x/(1+e^(−x)); for very negative x it tends to −0, and the
// quotient form never computes Inf·0.
func silu64(t float64) float64 {
	return t / (1 + math.Exp(-t))
}

// f64 widens a float32; it keeps the float64 formulas readable.
func f64(v float32) float64 { return float64(v) }
