package kernels

import "math"

// RopeInvFreq returns the rotary inverse frequencies
// inv_freq[i] = 1/theta^(2i/headDim) for i < headDim/2, computed the way the
// float32 PyTorch reference code does: the exponent 2i/headDim is a float32
// division, theta is taken as float32, the power is rounded to float32
// (here evaluated in float64 and rounded once) and the reciprocal is a
// float32 division. headDim must be even and positive, theta positive.
func RopeInvFreq(headDim int, theta float64) []float32 {
	if headDim <= 0 || headDim%2 != 0 || !(theta > 0) {
		panic(msgRopeTheta)
	}
	base := f64(float32(theta))
	inv := make([]float32, headDim/2)
	for i := range inv {
		e := float32(2*i) / float32(headDim)
		p := float32(math.Pow(base, f64(e)))
		inv[i] = 1 / p
	}
	return inv
}

// Rope applies rotary position embedding in place to x, which holds
// len(x)/headDim heads of headDim values back to back, in the "half-split"
// layout: for each head and i < headDim/2 the pair (x_i, x_{i+headDim/2}) is
// rotated by angle = pos·invFreq[i] (a float32 product):
// out_i = x_i·cos − x_{i+h/2}·sin, out_{i+h/2} = x_{i+h/2}·cos + x_i·sin,
// with cos and sin rounded to float32 and every product rounded before the
// sum. len(invFreq) must be headDim/2 and pos >= 0.
func Rope(x []float32, headDim, pos int, invFreq []float32) {
	if headDim <= 0 || headDim%2 != 0 {
		panic(msgRopeHeadDim)
	}
	if len(x)%headDim != 0 {
		panic(msgRopeLen)
	}
	half := headDim / 2
	if len(invFreq) != half {
		panic(msgRopeFreq)
	}
	if pos < 0 {
		panic(msgRopePos)
	}
	p := float32(pos)
	for i, f := range invFreq {
		ang := f64(p * f)
		c := float32(math.Cos(ang))
		s := float32(math.Sin(ang))
		for h := 0; h < len(x); h += headDim {
			a, b := x[h+i], x[h+i+half]
			x[h+i] = float32(a*c) - float32(b*s)
			x[h+i+half] = float32(b*c) + float32(a*s)
		}
	}
}
