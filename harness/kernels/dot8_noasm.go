//go:build !amd64 || noasm

package kernels

// dot8Rows advances acc[q] by Σ_k x[k]·W[k] over the stored row that starts
// at element offs[q] of w's storage (Out×In layout, len(x) == In), in
// ascending k, each product rounded to float32 before it is added. buf is
// conversion scratch of at least gemvBuf floats.
func dot8Rows(acc *[8]float32, x []float32, w *Mat, offs *[8]int, buf []float32) {
	dot8RowsGo(acc, x, w, offs, buf)
}

// gemvKernel names the row-dot (GEMV) kernel used for w's dtype.
func gemvKernel(DType) string { return "go 8-row" }
