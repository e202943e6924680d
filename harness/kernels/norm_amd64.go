//go:build amd64 && !noasm

package kernels

// LayerNorm's three passes over blocks of eight (len(x) a positive multiple
// of 8): lnSumGo, lnSqGo and lnApplyGo in AVX2 assembly when the CPU has it
// (norm_amd64.s), the same bits: VCVTPS2PD widens exactly, VSUBPD, VMULPD
// and VADDPD round as the Go float64 operations, VCVTPD2PS rounds to
// nearest as float32(·) does, and gamma and beta apply with VMULPS and
// VADDPS.

func lnSumBlocks(x []float32, acc *[8]float64) {
	if !hasAVX2 {
		lnSumGo(x, acc)
		return
	}
	lnSumAVX2(&x[0], len(x), acc)
}

func lnSqBlocks(x []float32, mean float64, acc *[8]float64) {
	if !hasAVX2 {
		lnSqGo(x, mean, acc)
		return
	}
	lnSqAVX2(&x[0], len(x), mean, acc)
}

func lnApplyBlocks(dst, x []float32, mean, inv float64, gamma, beta []float32) {
	if !hasAVX2 {
		lnApplyGo(dst, x, mean, inv, gamma, beta)
		return
	}
	var g, b *float32
	if gamma != nil {
		g = &gamma[:len(x)][0]
	}
	if beta != nil {
		b = &beta[:len(x)][0]
	}
	lnApplyAVX2(&dst[:len(x)][0], &x[0], len(x), mean, inv, g, b)
}

//go:noescape
func lnSumAVX2(x *float32, n int, acc *[8]float64)

//go:noescape
func lnSqAVX2(x *float32, n int, mean float64, acc *[8]float64)

//go:noescape
func lnApplyAVX2(dst, x *float32, n int, mean, inv float64, gamma, beta *float32)
