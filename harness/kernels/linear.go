package kernels

// Linear computes y[i*Out+j] = bias[j] + Σ_k x[i*In+k]·W[j][k] for i < m and
// j < Out, in the order of the package's determinism contract. x is m×In
// row-major, y is m×Out row-major and is overwritten; bias is nil or has Out
// entries; threads >= 1 bounds the goroutines used. m == 1 takes a streaming
// GEMV path, larger m a packed, blocked GEMM; both give the same bits.
func Linear(y, x []float32, m int, w *Mat, bias []float32, threads int) {
	linear(nil, y, x, m, w, bias, threads)
}

// linear is Linear, with the GEMM path's buffers from s (fresh when nil).
func linear(s *Scratch, y, x []float32, m int, w *Mat, bias []float32, threads int) {
	w.Check()
	if m < 0 {
		panic(msgLinearM)
	}
	if len(x) != m*w.In {
		panic(msgLinearX)
	}
	if len(y) != m*w.Out {
		panic(msgLinearY)
	}
	if bias != nil && len(bias) != w.Out {
		panic(msgLinearBias)
	}
	if threads < 1 {
		panic(msgThreads)
	}
	if m == 0 || w.Out == 0 {
		return
	}
	if w.In == 0 {
		fillBias(y, m, w.Out, bias)
		return
	}
	if m == 1 {
		if w.Panels != nil {
			gemvPanels(s.team(), y, x, w, bias, nil, threads)
		} else if w.Transposed {
			gemvCols(s.team(), y, x, w, bias, threads)
		} else {
			gemvRows(s.team(), y, x, w, bias, threads)
		}
		return
	}
	gemmBlocked(s, y, x, m, w, bias, threads)
}

// Gemm computes the classic product C = A·B with A m×k, B k×n and C m×n,
// all float32 row-major; c is overwritten. It is Linear with B viewed as a
// transposed (In×Out storage) weight matrix, so it follows the same
// determinism contract.
func Gemm(c, a, b []float32, m, k, n, threads int) {
	if m < 0 || k < 0 || n < 0 {
		panic(msgGemmShape)
	}
	if len(a) != m*k || len(b) != k*n || len(c) != m*n {
		panic(msgGemmLen)
	}
	w := Mat{DType: F32, Out: n, In: k, Transposed: true, F32: b}
	Linear(c, a, m, &w, nil, threads)
}

// fillBias sets every row of the m×out matrix y to 0 + bias (the In == 0
// case of the contract: an empty sum, then the bias), or to zero.
func fillBias(y []float32, m, out int, bias []float32) {
	for i := 0; i < m; i++ {
		row := y[i*out : (i+1)*out]
		for j := range row {
			var acc float32
			if bias != nil {
				acc += bias[j]
			}
			row[j] = acc
		}
	}
}
