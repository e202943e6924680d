//go:build amd64 && !noasm

package kernels

import (
	"unsafe"

	"golang.org/x/sys/cpu"
)

// Register blocking of the GEMM micro-kernel on amd64: 4 rows of A by 16
// columns of B, eight 8-wide AVX2 accumulators. The tile shape never changes
// the bits: every output is the same ascending chain whatever the tile.
const (
	mr = 4
	nr = 16
)

// hasAVX2 is fixed at start-up by CPU feature detection.
var hasAVX2 = cpu.X86.HasAVX2

// gemmMicro updates the mr×nr accumulator tile c (row-major, c[i*nr+j])
// with Σ_kk a[kk*mr+i]·b[kk*nr+j] over kk < kc, in ascending kk, each
// product rounded to float32 before it is added. a is a packed A panel
// (kc×mr), b a packed B panel (kc×nr). With AVX2 the assembly twin runs
// (VMULPS then VADDPS per lane: the same bits as the Go loop, no FMA).
func gemmMicro(kc int, a, b []float32, c *[mr * nr]float32) {
	if kc <= 0 {
		return
	}
	a = a[:kc*mr]
	b = b[:kc*nr]
	if hasAVX2 {
		gemmMicroAVX2(kc, &a[0], &b[0], c)
		return
	}
	gemmMicroGo(kc, a, b, c)
}

// gemmMicroFull is gemmMicroFullGo on a whole mr×nr tile (y holds its mr
// rows, ldc apart); with AVX2 the tile stays in place: the assembly loads
// (or zeroes) it, runs the k loop, adds the bias and stores it, the same
// bits without the copies through an accumulator array.
func gemmMicroFull(kc int, a, b, y []float32, ldc int, first bool, bias []float32) {
	if !hasAVX2 || kc <= 0 {
		gemmMicroFullGo(kc, a, b, y, ldc, first, bias)
		return
	}
	a = a[:kc*mr]
	b = b[:kc*nr]
	y = y[:(mr-1)*ldc+nr]
	var bp *float32
	if bias != nil {
		bp = &bias[:nr][0]
	}
	gemmMicroCAVX2(kc, &a[0], &b[0], &y[0], 4*ldc, first, bp)
}

// hasAVX512 is fixed at start-up by CPU feature detection (the CPU and the
// operating system's support for the 512-bit registers).
var hasAVX512 = cpu.X86.HasAVX512F

// gemmMicroFull2 is gemmMicroFull on two horizontally adjacent whole tiles:
// columns [0, nr) from the B panel b0 and [nr, 2·nr) from b1 (bias, when
// not nil, covers all 2·nr). With AVX-512 one assembly pass runs both in
// 512-bit registers, the same bits as two gemmMicroFull calls.
func gemmMicroFull2(kc int, a, b0, b1, y []float32, ldc int, first bool, bias []float32) {
	if !hasAVX512 || kc <= 0 {
		var bb []float32
		if bias != nil {
			bb = bias[nr:]
		}
		gemmMicroFull(kc, a, b0, y, ldc, first, bias)
		gemmMicroFull(kc, a, b1, y[nr:], ldc, first, bb)
		return
	}
	a = a[:kc*mr]
	b0 = b0[:kc*nr]
	b1 = b1[:kc*nr]
	y = y[:(mr-1)*ldc+2*nr]
	var bp *float32
	if bias != nil {
		bp = &bias[:2*nr][0]
	}
	gemmMicro2CAVX512(kc, &a[0], &b0[0], &b1[0], &y[0], 4*ldc, first, bp)
}

// gemmMicro2CAVX512 is gemmMicroFull2 in AVX-512 assembly (micro_amd64.s).
//
//go:noescape
func gemmMicro2CAVX512(kc int, a, b0, b1, c *float32, ldcBytes int, first bool, bias *float32)

// gemmMicroCAVX2 is gemmMicroFull in AVX2 assembly (micro_amd64.s).
//
//go:noescape
func gemmMicroCAVX2(kc int, a, b, c *float32, ldcBytes int, first bool, bias *float32)

// gemmMicroAVX2 is gemmMicro in AVX2 assembly (micro_amd64.s).
//
//go:noescape
func gemmMicroAVX2(kc int, a, b *float32, c *[mr * nr]float32)

// gemmMicroGo is gemmMicro's portable loop, for CPUs without AVX2.
func gemmMicroGo(kc int, a, b []float32, c *[mr * nr]float32) {
	for kk := 0; kk < kc; kk++ {
		ap := a[kk*mr : kk*mr+mr]
		bp := b[kk*nr : kk*nr+nr]
		for i, av := range ap {
			row := c[i*nr : i*nr+nr]
			for j, bv := range bp {
				row[j] += float32(av * bv)
			}
		}
	}
}

// MicroKernel names the GEMM micro-kernel in use (benchmarks print it).
func MicroKernel() string {
	if hasAVX512 {
		return "avx512 4x32 (pairs of 4x16 tiles), avx2 4x16"
	}
	if hasAVX2 {
		return "avx2 4x16"
	}
	return "go 4x16"
}

// hasF16C is fixed at start-up by CPU feature detection.
var hasF16C = cpu.X86.HasF16C && cpu.X86.HasAVX

// f16ToF32Slice converts binary16 bit patterns; len(dst) == len(src). With
// F16C, blocks of eight convert with VCVTPH2PS (exact, like the Go twin;
// only NaN payloads may differ: the instruction quiets signalling NaNs).
func f16ToF32Slice(dst []float32, src []uint16) {
	n := len(src)
	dst = dst[:n]
	if hasF16C && n >= 8 {
		blocks := n &^ 7
		f16ToF32F16C(&dst[0], &src[0], blocks)
		dst, src = dst[blocks:], src[blocks:]
	}
	f16ToF32Go(dst, src)
}

// bf16ToF32Slice converts bfloat16 bit patterns; len(dst) == len(src).
// With AVX2, blocks of eight widen and shift in registers (VPMOVZXWD,
// VPSLLD): the Go twin's bits, NaN payloads included.
func bf16ToF32Slice(dst []float32, src []uint16) {
	n := len(src)
	dst = dst[:n]
	if hasAVX2 && n >= 8 {
		blocks := n &^ 7
		bf16ToF32AVX2(&dst[0], &src[0], blocks)
		dst, src = dst[blocks:], src[blocks:]
	}
	bf16ToF32Go(dst, src)
}

// bf16ToF32AVX2 converts n (a multiple of 8) bfloat16 values at src into
// dst (half_amd64.s).
//
//go:noescape
func bf16ToF32AVX2(dst *float32, src *uint16, n int)

// f16ToF32F16C converts n (a multiple of 8) halves at src into dst (half_amd64.s).
//
//go:noescape
func f16ToF32F16C(dst *float32, src *uint16, n int)

// axpyAcc does y[j] += alpha·x[j] (product rounded, then added) for
// j < len(y); len(x) >= len(y). With AVX2, blocks of eight run as VMULPS
// then VADDPS: the Go twin's bits.
func axpyAcc(alpha float32, x, y []float32) {
	n := len(y)
	x = x[:n]
	if hasAVX2 && n >= 8 {
		blocks := n &^ 7
		axpyAVX2(alpha, &x[0], &y[0], blocks)
		x, y = x[blocks:], y[blocks:]
	}
	axpyGo(alpha, x, y)
}

// axpyF16Acc does y[j] += alpha·float32(x[j]) for the binary16 x (product
// rounded, then added) for j < len(y); len(x) >= len(y). With AVX2 and F16C,
// blocks of eight widen, multiply and add in registers: the bits of
// converting x first and calling axpyAcc.
func axpyF16Acc(alpha float32, x []uint16, y []float32) {
	n := len(y)
	x = x[:n]
	if hasAVX2 && hasF16C && n >= 8 {
		blocks := n &^ 7
		axpyF16AVX2(alpha, &x[0], &y[0], blocks)
		x, y = x[blocks:], y[blocks:]
	}
	axpyF16Go(alpha, x, y)
}

// axpy4F16Acc does, for j < len(y), y[j] += alpha[q]·float32(x[q][j]) for
// q = 0, 1, 2, 3 in that order (products rounded, then added): the bits of
// four axpyF16Acc calls, with the four rows streamed together.
func axpy4F16Acc(alpha *[4]float32, x *[4][]uint16, y []float32) {
	n := len(y)
	if hasAVX2 && hasF16C && n >= 8 {
		blocks := n &^ 7
		p := [4]*uint16{&x[0][:n][0], &x[1][:n][0], &x[2][:n][0], &x[3][:n][0]}
		axpy4F16AVX2(alpha, &p, &y[0], blocks)
		for q := range 4 {
			axpyF16Go(alpha[q], x[q][blocks:n], y[blocks:])
		}
		return
	}
	for q := range 4 {
		axpyF16Go(alpha[q], x[q], y)
	}
}

// axpy4F16AVX2 is axpy4F16Acc on n (a multiple of 8) elements (half_amd64.s).
//
//go:noescape
func axpy4F16AVX2(alpha *[4]float32, x *[4]*uint16, y *float32, n int)

// axpyF16AVX2 is axpyF16Acc on n (a multiple of 8) elements (half_amd64.s).
//
//go:noescape
func axpyF16AVX2(alpha float32, x *uint16, y *float32, n int)

// axpyAVX2 is axpyAcc on n (a multiple of 8) elements (micro_amd64.s).
//
//go:noescape
func axpyAVX2(alpha float32, x, y *float32, n int)

// prefetchLines asks the CPU to bring every 64-byte line of the n bytes at
// p into cache (PREFETCHT0; a hint that never faults, half_amd64.s). The
// scattered-row kernels call it for rows a few steps ahead, whose addresses
// the hardware prefetchers cannot guess.
//
//go:noescape
func prefetchLines(p unsafe.Pointer, n int)

// prefetchHalf prefetches the stored values s (a hint; s may be empty).
func prefetchHalf(s []uint16) {
	if len(s) > 0 {
		prefetchLines(unsafe.Pointer(&s[0]), 2*len(s))
	}
}

// axpyRowsFast runs AxpyRows over the leading lanes of y in blocks of 64,
// then one of 32, in assembly when the CPU has AVX2, and returns how many
// lanes it did (the rest are left to the caller).
func axpyRowsFast(y, alpha, m []float32, stride, off int) int {
	if !hasAVX2 {
		return 0
	}
	i := 0
	for ; i+64 <= len(y); i += 64 {
		axpyRows64AVX2(&y[i], &alpha[0], len(alpha), &m[off+i], 4*stride)
	}
	if i+32 <= len(y) {
		axpyRows32AVX2(&y[i], &alpha[0], len(alpha), &m[off+i], 4*stride)
		i += 32
	}
	return i
}

// axpyRows64AVX2 does y[i] += alpha[j]·m[j·strideBytes/4 + i] for i < 64,
// j < rows ascending, skipping alpha[j] == 0 (VMULPS then VADDPS, with y held
// in eight registers; micro_amd64.s).
//
//go:noescape
func axpyRows64AVX2(y, alpha *float32, rows int, m *float32, strideBytes int)

// axpyRows32AVX2 is axpyRows64AVX2 over 32 lanes.
//
//go:noescape
func axpyRows32AVX2(y, alpha *float32, rows int, m *float32, strideBytes int)
