//go:build !amd64 || noasm

package kernels

// expSumBlocks is expSumGo over x, len(x) a positive multiple of 8.
func expSumBlocks(dst, x []float32, m float32, acc *[8]float64) { expSumGo(dst, x, m, acc) }

// maxLanes is maxLanesGo.
func maxLanes(x []float32, lanes *[8]float32) bool { return maxLanesGo(x, lanes) }
