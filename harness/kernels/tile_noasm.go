//go:build !amd64 || noasm

package kernels

// Register blocking of the GEMM micro-kernel: mr rows of A by nr columns of
// B. In portable Go, 2×4 keeps all eight accumulators, both A values, one B
// value and a product in the sixteen SSE registers without spilling, which
// measured faster than 4×4 (spills) and 3×4. The tile shape never changes
// the bits: every output is the same ascending chain whatever the tile.
const (
	mr = 2
	nr = 4
)

// gemmMicro updates the mr×nr accumulator tile c (row-major, c[i*nr+j])
// with Σ_kk a[kk*mr+i]·b[kk*nr+j] over kk < kc, in ascending kk, each
// product rounded to float32 before it is added. a is a packed A panel
// (kc×mr), b a packed B panel (kc×nr).
func gemmMicro(kc int, a, b []float32, c *[mr * nr]float32) {
	a = a[:kc*mr]
	b = b[:kc*nr]
	c00, c01, c02, c03 := c[0], c[1], c[2], c[3]
	c10, c11, c12, c13 := c[4], c[5], c[6], c[7]
	for kk := 0; kk < kc; kk++ {
		ap := a[kk*mr : kk*mr+mr : kk*mr+mr]
		bp := b[kk*nr : kk*nr+nr : kk*nr+nr]
		a0, a1 := ap[0], ap[1]
		b0 := bp[0]
		c00 += float32(a0 * b0)
		c10 += float32(a1 * b0)
		b1 := bp[1]
		c01 += float32(a0 * b1)
		c11 += float32(a1 * b1)
		b2 := bp[2]
		c02 += float32(a0 * b2)
		c12 += float32(a1 * b2)
		b3 := bp[3]
		c03 += float32(a0 * b3)
		c13 += float32(a1 * b3)
	}
	c[0], c[1], c[2], c[3] = c00, c01, c02, c03
	c[4], c[5], c[6], c[7] = c10, c11, c12, c13
}

// gemmMicroFull is gemmMicroFullGo.
func gemmMicroFull(kc int, a, b, y []float32, ldc int, first bool, bias []float32) {
	gemmMicroFullGo(kc, a, b, y, ldc, first, bias)
}

// gemmMicroFull2 is gemmMicroFull on two horizontally adjacent whole
// tiles: columns [0, nr) from the B panel b0 and [nr, 2·nr) from b1 (bias,
// when not nil, covers all 2·nr).
func gemmMicroFull2(kc int, a, b0, b1, y []float32, ldc int, first bool, bias []float32) {
	var bb []float32
	if bias != nil {
		bb = bias[nr:]
	}
	gemmMicroFull(kc, a, b0, y, ldc, first, bias)
	gemmMicroFull(kc, a, b1, y[nr:], ldc, first, bb)
}

// MicroKernel names the GEMM micro-kernel in use (benchmarks print it).
func MicroKernel() string { return "go 2x4" }

// f16ToF32Slice converts binary16 bit patterns; len(dst) == len(src).
func f16ToF32Slice(dst []float32, src []uint16) { f16ToF32Go(dst, src) }

// bf16ToF32Slice converts bfloat16 bit patterns; len(dst) == len(src).
func bf16ToF32Slice(dst []float32, src []uint16) { bf16ToF32Go(dst, src) }

// axpyAcc does y[j] += alpha·x[j] (product rounded, then added) for
// j < len(y); len(x) >= len(y).
func axpyAcc(alpha float32, x, y []float32) { axpyGo(alpha, x, y) }

// axpyF16Acc does y[j] += alpha·float32(x[j]) for the binary16 x (product
// rounded, then added) for j < len(y); len(x) >= len(y).
func axpyF16Acc(alpha float32, x []uint16, y []float32) { axpyF16Go(alpha, x, y) }

// axpy4F16Acc does, for j < len(y), y[j] += alpha[q]·float32(x[q][j]) for
// q = 0, 1, 2, 3 in that order (products rounded, then added).
func axpy4F16Acc(alpha *[4]float32, x *[4][]uint16, y []float32) {
	for q := range 4 {
		axpyF16Go(alpha[q], x[q], y)
	}
}

// prefetchHalf is a cache hint; the portable build has none.
func prefetchHalf([]uint16) {}

// axpyRowsFast handles no lanes of AxpyRows in the portable build.
func axpyRowsFast(y, alpha, m []float32, stride, off int) int { return 0 }
