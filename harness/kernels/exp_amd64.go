//go:build amd64 && !noasm

package kernels

// expSumBlocks is expSumGo over x, len(x) a positive multiple of 8; with
// AVX2 it runs eight lanes at a time in assembly, the same bits.
func expSumBlocks(dst, x []float32, m float32, acc *[8]float64) {
	if !hasAVX2 {
		expSumGo(dst, x, m, acc)
		return
	}
	var d *float32
	if dst != nil {
		d = &dst[:len(x)][0]
	}
	expSumAVX2(d, &x[0], len(x), m, acc)
}

// maxLanes is maxLanesGo; with AVX2 it runs in assembly, the same bits.
func maxLanes(x []float32, lanes *[8]float32) bool {
	if !hasAVX2 {
		return maxLanesGo(x, lanes)
	}
	return maxLanesAVX2(&x[0], len(x), lanes)
}

// expSumAVX2 is expSumGo over x[:n], n a positive multiple of 8, eight
// lanes at a time: lane j of each block adds into acc[j] (exp_amd64.s). dst
// is nil or has room for n values.
//
//go:noescape
func expSumAVX2(dst, x *float32, n int, m float32, acc *[8]float64)

// maxLanesAVX2 is maxLanesGo over x[:n], n a positive multiple of 8
// (VMAXPS keeps the kept lane unless the new value is greater; VCMPPS
// unordered flags NaN).
//
//go:noescape
func maxLanesAVX2(x *float32, n int, lanes *[8]float32) bool
