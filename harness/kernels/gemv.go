package kernels

// Chunking of the m == 1 (GEMV) path; fixed, independent of threads.
const (
	gemvRowsJob = 64  // output rows per job, Out×In layout
	gemvColsJob = 384 // output columns per job, In×Out layout: a 768-wide projection splits into two even jobs
	gemvKC      = 512 // k extent converted at once for half-precision rows
)

// gemvRows computes y[j] = bias[j] + Σ_k x[k]·W[j][k] for an Out×In W by
// streaming its rows: eight rows at a time (then four, then one), each with
// its own single accumulator running in ascending k.
func gemvRows(team *Team, y, x []float32, w *Mat, bias []float32, threads int) {
	nJobs := (w.Out + gemvRowsJob - 1) / gemvRowsJob
	workers := workerCount(team, threads, nJobs, w.Out*w.In)
	runJobs(team, nJobs, workers, func() func(int) {
		var buf []float32
		if w.DType != F32 {
			buf = make([]float32, gemvBuf)
		}
		return func(job int) {
			j0 := job * gemvRowsJob
			j1 := min(j0+gemvRowsJob, w.Out)
			rowsDot(y[j0:j1], x, w, bias, buf, j0, nil)
		}
	})
}

// rowsDot sets out[r] = bias[row] + Σ_k x[k]·W[row][k] for the Out×In W,
// where row = idx[r] when idx is non-nil and row0+r otherwise. buf is
// conversion scratch of gemvBuf floats (unused for F32 weights). Groups of
// thirty-two rows go through dot32Rows, then of sixteen through dot16Rows
// and of eight through dot8Rows (assembly where the CPU has it); the last
// few rows go through one padded dot8Rows call where the assembly runs, or
// four and then one at a time otherwise; every path runs each row's
// single accumulator in ascending k, so all give the same bits.
func rowsDot(out, x []float32, w *Mat, bias, buf []float32, row0 int, idx []int32) {
	in := w.In
	rowOf := func(r int) int {
		if idx != nil {
			return int(idx[r])
		}
		return row0 + r
	}
	// group runs one row-group kernel over rows r … r+n-1, lane q on row
	// rowOf(r+min(q, last)) (a short last group repeats its last row in
	// the spare lanes: each lane is its own chain, so the others' bits do
	// not change), and writes the first min(n, last+1) lanes out.
	group := func(r, n, last int, dot func(acc []float32, offs []int)) {
		var offsA [32]int
		var accA [32]float32
		offs, acc := offsA[:n], accA[:n]
		for q := range offs {
			offs[q] = rowOf(r+min(q, last)) * in
		}
		dot(acc, offs)
		for q := range min(n, last+1) {
			if bias != nil {
				acc[q] += bias[rowOf(r+q)]
			}
			out[r+q] = acc[q]
		}
	}
	dot32 := func(acc []float32, offs []int) { dot32Rows((*[32]float32)(acc), x, w, (*[32]int)(offs), buf) }
	dot16 := func(acc []float32, offs []int) { dot16Rows((*[16]float32)(acc), x, w, (*[16]int)(offs), buf) }
	dot8 := func(acc []float32, offs []int) { dot8Rows((*[8]float32)(acc), x, w, (*[8]int)(offs), buf) }
	r := 0
	for ; r+32 <= len(out); r += 32 {
		group(r, 32, 31, dot32)
	}
	for ; r+16 <= len(out); r += 16 {
		group(r, 16, 15, dot16)
	}
	for ; r+8 <= len(out); r += 8 {
		group(r, 8, 7, dot8)
	}
	if rest := len(out) - r; rest > 0 && padTail(w.DType, in) {
		// Fewer than eight rows left: one padded eight-row call instead of
		// the scalar loops below.
		group(r, 8, rest-1, dot8)
		return
	}
	for ; r+4 <= len(out); r += 4 {
		j0, j1, j2, j3 := rowOf(r), rowOf(r+1), rowOf(r+2), rowOf(r+3)
		var acc [4]float32
		if w.DType == F32 {
			dot4Acc(&acc, x, w.F32[j0*in:], w.F32[j1*in:], w.F32[j2*in:], w.F32[j3*in:])
		} else {
			for k0 := 0; k0 < in; k0 += gemvKC {
				kc := min(gemvKC, in-k0)
				s0 := w.storedRange(buf[0*gemvKC:], j0*in+k0, kc)
				s1 := w.storedRange(buf[1*gemvKC:], j1*in+k0, kc)
				s2 := w.storedRange(buf[2*gemvKC:], j2*in+k0, kc)
				s3 := w.storedRange(buf[3*gemvKC:], j3*in+k0, kc)
				dot4Acc(&acc, x[k0:k0+kc], s0, s1, s2, s3)
			}
		}
		for q := range 4 {
			if bias != nil {
				acc[q] += bias[rowOf(r+q)]
			}
			out[r+q] = acc[q]
		}
	}
	for ; r < len(out); r++ {
		j := rowOf(r)
		var acc float32
		for k0 := 0; k0 < in; k0 += gemvKC {
			kc := min(gemvKC, in-k0)
			acc = dotAcc(acc, x[k0:k0+kc], w.storedRange(buf, j*in+k0, kc))
		}
		if bias != nil {
			acc += bias[j]
		}
		out[r] = acc
	}
}

// gemvCols computes y[j] = bias[j] + Σ_k x[k]·W[j][k] for a W stored In×Out
// by streaming its storage rows: for each k in ascending order, y += x[k]·row.
func gemvCols(team *Team, y, x []float32, w *Mat, bias []float32, threads int) {
	nJobs := (w.Out + gemvColsJob - 1) / gemvColsJob
	workers := workerCount(team, threads, nJobs, w.Out*w.In)
	runJobs(team, nJobs, workers, func() func(int) {
		var buf []float32
		if w.DType != F32 {
			buf = make([]float32, gemvColsJob)
		}
		return func(job int) {
			j0 := job * gemvColsJob
			j1 := min(j0+gemvColsJob, w.Out)
			acc := y[j0:j1]
			clear(acc)
			for k, xv := range x {
				axpyAcc(xv, w.storedRange(buf, k*w.Out+j0, j1-j0), acc)
			}
			if bias != nil {
				for j := range acc {
					acc[j] += bias[j0+j]
				}
			}
		}
	})
}
