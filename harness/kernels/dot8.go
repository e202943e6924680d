package kernels

// gemvBuf is the conversion scratch rowsDot needs: one gemvKC segment for
// each of the eight rows a portable 8-row step converts at once.
const gemvBuf = 8 * gemvKC

// dot8Acc continues eight independent dot-product chains, one per row w[q],
// over the same x (each len(w[q]) >= len(x)), in ascending k: the portable
// twin of the AVX2 8-row kernels, lane q being row q. It runs as two
// four-row passes, which measured about twice as fast in Go as one loop
// with eight accumulators (those spill); the chains are independent, so
// the grouping does not change the bits.
func dot8Acc(acc *[8]float32, x []float32, w *[8][]float32) {
	dot4Acc((*[4]float32)(acc[0:4]), x, w[0], w[1], w[2], w[3])
	dot4Acc((*[4]float32)(acc[4:8]), x, w[4], w[5], w[6], w[7])
}

// dot8RowsGo advances acc[q] by Σ_k x[k]·W[k] over the stored row that
// starts at element offs[q] of w's storage (Out×In layout, len(x) == In),
// in ascending k. Half-precision rows are converted gemvKC values at a time
// into buf (len >= gemvBuf). It is the portable twin of dot8Rows.
func dot8RowsGo(acc *[8]float32, x []float32, w *Mat, offs *[8]int, buf []float32) {
	n := len(x)
	var rows [8][]float32
	if w.DType == F32 {
		for q, off := range offs {
			rows[q] = w.F32[off : off+n : off+n]
		}
		dot8Acc(acc, x, &rows)
		return
	}
	for k0 := 0; k0 < n; k0 += gemvKC {
		kc := min(gemvKC, n-k0)
		for q, off := range offs {
			rows[q] = w.storedRange(buf[q*gemvKC:], off+k0, kc)
		}
		dot8Acc(acc, x[k0:k0+kc], &rows)
	}
}
