//go:build !amd64 || noasm

package kernels

// lnSumBlocks is lnSumGo.
func lnSumBlocks(x []float32, acc *[8]float64) { lnSumGo(x, acc) }

// lnSqBlocks is lnSqGo.
func lnSqBlocks(x []float32, mean float64, acc *[8]float64) { lnSqGo(x, mean, acc) }

// lnApplyBlocks is lnApplyGo.
func lnApplyBlocks(dst, x []float32, mean, inv float64, gamma, beta []float32) {
	lnApplyGo(dst, x, mean, inv, gamma, beta)
}
