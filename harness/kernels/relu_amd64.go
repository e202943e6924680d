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
// for NaN, so NaN stays), n a positive multiple of 8 (relu_amd64.s).
//
//go:noescape
func reluAVX2(x *float32, n int)
