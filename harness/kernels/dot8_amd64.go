//go:build amd64 && !noasm

package kernels

// dot8Rows advances acc[q] by Σ_k x[k]·W[k] over the stored row that starts
// at element offs[q] of w's storage (Out×In layout, len(x) == In), in
// ascending k, each product rounded to float32 before it is added. buf is
// conversion scratch of at least gemvBuf floats. With AVX2 (and F16C for
// binary16 weights) the blocks of eight k run in assembly, which converts
// half-precision rows in registers; the last len(x) mod 8 k run in Go.
// Every path gives dot8RowsGo's bits.
func dot8Rows(acc *[8]float32, x []float32, w *Mat, offs *[8]int, buf []float32) {
	n := len(x)
	blocks := n &^ 7
	if blocks == 0 || !gemvAsm(w.DType) {
		dot8RowsGo(acc, x, w, offs, buf)
		return
	}
	if w.DType == F32 {
		var p [8]*float32
		for q, off := range offs {
			p[q] = &w.F32[off : off+n][0]
		}
		dot8F32AVX2(&p, &x[0], blocks, acc)
		if blocks < n {
			for q, off := range offs {
				acc[q] = dotAcc(acc[q], x[blocks:], w.F32[off+blocks:off+n])
			}
		}
		return
	}
	var p [8]*uint16
	halfRowPtrs(p[:], w, offs[:], n)
	if w.DType == F16 {
		dot8F16AVX2(&p, &x[0], blocks, acc)
	} else {
		dot8BF16AVX2(&p, &x[0], blocks, acc)
	}
	halfTail(acc[:], x, w, offs[:], blocks)
}

// dot16Rows is dot8Rows over sixteen rows (offs[q] for lane q). For
// binary16 and bfloat16 weights on CPUs with the assembly kernels the two
// groups of eight run interleaved in one kernel, whose two independent
// addition chains take about half the time of two eight-row calls; every
// path gives two dot8RowsGo calls' bits (the chains are independent).
func dot16Rows(acc *[16]float32, x []float32, w *Mat, offs *[16]int, buf []float32) {
	n := len(x)
	blocks := n &^ 7
	if blocks == 0 || w.DType == F32 || !gemvAsm(w.DType) {
		dot8Rows((*[8]float32)(acc[0:8]), x, w, (*[8]int)(offs[0:8]), buf)
		dot8Rows((*[8]float32)(acc[8:16]), x, w, (*[8]int)(offs[8:16]), buf)
		return
	}
	var p [16]*uint16
	halfRowPtrs(p[:], w, offs[:], n)
	if w.DType == F16 {
		dot16F16AVX2(&p, &x[0], blocks, acc)
	} else {
		dot16BF16AVX2(&p, &x[0], blocks, acc)
	}
	halfTail(acc[:], x, w, offs[:], blocks)
}

// dot32Rows is dot8Rows over thirty-two rows (offs[q] for lane q). For
// binary16 weights on CPUs with AVX-512 the rows run as two sixteen-lane
// groups in one kernel that transposes the half-precision values before
// widening them (half the bytes to shuffle); otherwise as two dot16Rows
// calls. Every path gives four dot8RowsGo calls' bits.
func dot32Rows(acc *[32]float32, x []float32, w *Mat, offs *[32]int, buf []float32) {
	n := len(x)
	blocks := n &^ 7
	if blocks == 0 || w.DType != F16 || !hasAVX512 || !gemvAsm(w.DType) {
		dot16Rows((*[16]float32)(acc[0:16]), x, w, (*[16]int)(offs[0:16]), buf)
		dot16Rows((*[16]float32)(acc[16:32]), x, w, (*[16]int)(offs[16:32]), buf)
		return
	}
	var p [32]*uint16
	halfRowPtrs(p[:], w, offs[:], n)
	dot32F16AVX512(&p, &x[0], blocks, acc)
	halfTail(acc[:], x, w, offs[:], blocks)
}

// dot32F16AVX512 is the thirty-two-row binary16 kernel (dot8_amd64.s): n
// a positive multiple of 8.
//
//go:noescape
func dot32F16AVX512(rows *[32]*uint16, x *float32, n int, acc *[32]float32)

// halfRowPtrs points p[q] at the first of the n stored half-precision
// values of the row that starts at element offs[q] of w's storage.
func halfRowPtrs(p []*uint16, w *Mat, offs []int, n int) {
	for q, off := range offs {
		p[q] = &w.Half[off : off+n][0]
	}
}

// halfTail finishes the row dots after the assembly's blocks of eight:
// acc[q] continues over the last len(x)-blocks values of the row at
// offs[q], converted in Go, in ascending k.
func halfTail(acc, x []float32, w *Mat, offs []int, blocks int) {
	n := len(x)
	if blocks == n {
		return
	}
	var t [8]float32
	tail := t[:n-blocks]
	for q, off := range offs {
		w.convertRange(tail, off+blocks)
		acc[q] = dotAcc(acc[q], x[blocks:], tail)
	}
}

// gemvAsm reports whether this CPU runs the assembly 8-row kernel for
// weights of dtype dt.
func gemvAsm(dt DType) bool {
	switch dt {
	case F32, BF16:
		return hasAVX2
	case F16:
		return hasAVX2 && hasF16C
	}
	return false
}

// padTail reports whether rowsDot should finish its last few rows with one
// padded eight-row call: where the assembly kernel runs (at least one block
// of eight k), that is cheaper than the scalar loops.
func padTail(dt DType, n int) bool { return gemvAsm(dt) && n >= 8 }

// gemvKernel names the row-dot (GEMV) kernel used for w's dtype.
func gemvKernel(dt DType) string {
	if gemvAsm(dt) {
		if dt == F16 && hasAVX512 {
			return "avx2 8-row, avx-512 32-row groups"
		}
		return "avx2 8-row"
	}
	return "go 8-row"
}

// dot8F32AVX2 advances acc[q] by Σ_{k<n} x[k]·rows[q][k] in ascending k
// (VMULPS then VADDPS per lane), n a positive multiple of 8 (dot8_amd64.s).
//
//go:noescape
func dot8F32AVX2(rows *[8]*float32, x *float32, n int, acc *[8]float32)

// dot8F16AVX2 is dot8F32AVX2 over binary16 rows, widened with VCVTPH2PS.
//
//go:noescape
func dot8F16AVX2(rows *[8]*uint16, x *float32, n int, acc *[8]float32)

// dot8BF16AVX2 is dot8F32AVX2 over bfloat16 rows, widened by a shift.
//
//go:noescape
func dot8BF16AVX2(rows *[8]*uint16, x *float32, n int, acc *[8]float32)

// dot16F16AVX2 is dot8F16AVX2 over sixteen rows, as two interleaved groups
// of eight with their own accumulators (dot8_amd64.s).
//
//go:noescape
func dot16F16AVX2(rows *[16]*uint16, x *float32, n int, acc *[16]float32)

// dot16BF16AVX2 is dot16F16AVX2 over bfloat16 rows.
//
//go:noescape
func dot16BF16AVX2(rows *[16]*uint16, x *float32, n int, acc *[16]float32)
