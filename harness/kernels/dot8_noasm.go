//go:build !amd64 || noasm

package kernels

// dot8Rows advances acc[q] by Σ_k x[k]·W[k] over the stored row that starts
// at element offs[q] of w's storage (Out×In layout, len(x) == In), in
// ascending k, each product rounded to float32 before it is added. buf is
// conversion scratch of at least gemvBuf floats.
func dot8Rows(acc *[8]float32, x []float32, w *Mat, offs *[8]int, buf []float32) {
	dot8RowsGo(acc, x, w, offs, buf)
}

// dot16Rows is dot8Rows over sixteen rows (offs[q] for lane q), as two
// eight-row calls.
func dot16Rows(acc *[16]float32, x []float32, w *Mat, offs *[16]int, buf []float32) {
	dot8RowsGo((*[8]float32)(acc[0:8]), x, w, (*[8]int)(offs[0:8]), buf)
	dot8RowsGo((*[8]float32)(acc[8:16]), x, w, (*[8]int)(offs[8:16]), buf)
}

// dot32Rows is dot8Rows over thirty-two rows (offs[q] for lane q), as four
// eight-row calls.
func dot32Rows(acc *[32]float32, x []float32, w *Mat, offs *[32]int, buf []float32) {
	for g := 0; g < 32; g += 8 {
		dot8RowsGo((*[8]float32)(acc[g:g+8]), x, w, (*[8]int)(offs[g:g+8]), buf)
	}
}

// padTail is false in the portable build: its row loops are the twins.
func padTail(DType, int) bool { return false }

// gemvKernel names the row-dot (GEMV) kernel used for w's dtype.
func gemvKernel(DType) string { return "go 8-row" }
