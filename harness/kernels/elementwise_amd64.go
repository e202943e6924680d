//go:build amd64 && !noasm

package kernels

// reluBlocks is reluGo over x, len(x) a positive multiple of 8, in AVX2
// assembly when the CPU has it.
func reluBlocks(x []float32) {
	if !hasAVX2 {
		reluGo(x)
		return
	}
	reluAVX2(&x[0], len(x))
}

// reluAVX2 clears every lane of x[:n] that compares ≤ 0 (VCMPPS LE is false
// for NaN, so NaN stays), n a positive multiple of 8 (elementwise_amd64.s).
//
//go:noescape
func reluAVX2(x *float32, n int)

// scaleBlocks is scaleGo over x, len(x) a positive multiple of 8, in AVX2
// assembly when the CPU has it.
func scaleBlocks(alpha float32, x []float32) {
	if !hasAVX2 {
		scaleGo(alpha, x)
		return
	}
	scaleAVX2(alpha, &x[0], len(x))
}

// scaleAVX2 multiplies x[:n] by alpha (VMULPS), n a positive multiple of 8
// (elementwise_amd64.s).
//
//go:noescape
func scaleAVX2(alpha float32, x *float32, n int)
