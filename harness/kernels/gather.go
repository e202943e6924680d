package kernels

// LinearGather computes, for one input vector, only the outputs listed in
// idx: y[r] = bias[idx[r]] + Σ_k x[k]·W[idx[r]][k] for r < len(idx), in the
// order of the package's determinism contract (so y[r] equals element idx[r]
// of the full Linear). It serves sparse MLP up-projections and per-head
// query projections. idx must be strictly ascending and within [0, Out);
// len(x) == In, len(y) == len(idx), bias nil or of length Out. It runs in
// the calling goroutine.
func LinearGather(y, x []float32, w *Mat, bias []float32, idx []int32) {
	w.Check()
	if len(x) != w.In {
		panic(msgGatherX)
	}
	if len(y) != len(idx) {
		panic(msgGatherY)
	}
	if bias != nil && len(bias) != w.Out {
		panic(msgGatherBias)
	}
	if !ascendingIn(idx, w.Out) {
		panic(msgGatherIdx)
	}
	if len(idx) == 0 {
		return
	}
	if w.Panels != nil && hasPanelRun(idx) {
		// Whole panels (a kept head's rows) come from the panels; any other
		// rows go through the stored layout as a smaller gather.
		rest := gatherPanels(y, x, w, bias, idx, nil)
		if len(rest) == 0 {
			return
		}
		sub := make([]int32, len(rest))
		for i, r := range rest {
			sub[i] = idx[r]
		}
		part := make([]float32, len(rest))
		w2 := *w
		w2.Panels = nil
		LinearGather(part, x, &w2, bias, sub)
		for i, r := range rest {
			y[r] = part[i]
		}
		return
	}
	if !w.Transposed {
		var buf [gemvBuf]float32
		rowsDot(y, x, w, bias, buf[:], 0, idx)
		return
	}
	// Stored In×Out: output idx[r] is column idx[r] of every storage row.
	clear(y)
	for k, xv := range x {
		base := k * w.Out
		for r, j := range idx {
			y[r] += float32(xv * w.at(base+int(j)))
		}
	}
	if bias != nil {
		for r, j := range idx {
			y[r] += bias[j]
		}
	}
}

// LinearScatterIn computes, for one input vector of which only the entries
// listed in idx are non-zero, y[j] = bias[j] + Σ_r h[r]·W[j][idx[r]] for
// j < Out, with r ascending and the bias last; y is overwritten. h holds the
// kept inputs (len(h) == len(idx)); idx must be strictly ascending and
// within [0, In); len(y) == Out, bias nil or of length Out. It serves sparse
// MLP down-projections and attention output projections with heads skipped.
// It runs in the calling goroutine.
func LinearScatterIn(y, h []float32, w *Mat, bias []float32, idx []int32) {
	checkScatter(y, h, w, bias, idx)
	scatterIn(y, h, w, bias, idx)
}

// scatterIn is LinearScatterIn on arguments its caller has checked.
func scatterIn(y, h []float32, w *Mat, bias []float32, idx []int32) {
	if !w.Transposed {
		// Out×In: output j gathers W[j][idx[r]] along its row.
		for j := range y {
			base := j * w.In
			var acc float32
			for r, k := range idx {
				acc += float32(h[r] * w.at(base+int(k)))
			}
			if bias != nil {
				acc += bias[j]
			}
			y[j] = acc
		}
		return
	}
	// Stored In×Out: input idx[r] selects a contiguous storage row.
	// Binary16 rows go in one pass over their whole width: each kept row
	// is then one stream, which memory serves faster than two half-rows
	// read in separate passes (the outputs' order is the same either way).
	if w.DType == F16 {
		scatterBlock(y, h, w, bias, idx, 0, w.Out, nil)
		return
	}
	var buf [gemvColsJob]float32
	for j0 := 0; j0 < w.Out; j0 += gemvColsJob {
		scatterBlock(y, h, w, bias, idx, j0, min(j0+gemvColsJob, w.Out), buf[:])
	}
}

// checkScatter panics on LinearScatterIn arguments that break its contract.
func checkScatter(y, h []float32, w *Mat, bias []float32, idx []int32) {
	w.Check()
	if len(h) != len(idx) {
		panic(msgScatterH)
	}
	if len(y) != w.Out {
		panic(msgScatterY)
	}
	if bias != nil && len(bias) != w.Out {
		panic(msgScatterBias)
	}
	if !ascendingIn(idx, w.In) {
		panic(msgScatterIdx)
	}
}

// scatterBlock computes outputs [j0, j1) of LinearScatterIn for the
// Transposed layout: each kept input is a contiguous storage row, added in
// ascending order, the bias last. buf is scratch of at least j1-j0.
func scatterBlock(y, h []float32, w *Mat, bias []float32, idx []int32, j0, j1 int, buf []float32) {
	acc := y[j0:j1]
	clear(acc)
	if w.DType == F16 {
		width := j1 - j0
		row := func(r int) []uint16 {
			off := int(idx[r])*w.Out + j0
			return w.Half[off : off+width]
		}
		for q := range min(8, len(idx)) {
			prefetchHalf(row(q))
		}
		r := 0
		for ; r+4 <= len(idx); r += 4 { // four rows at a time, same order
			// The kept rows are scattered: fetch the ones two groups on.
			for q := r + 8; q < min(r+12, len(idx)); q++ {
				prefetchHalf(row(q))
			}
			alpha := [4]float32{h[r], h[r+1], h[r+2], h[r+3]}
			x := [4][]uint16{row(r), row(r + 1), row(r + 2), row(r + 3)}
			axpy4F16Acc(&alpha, &x, acc)
		}
		for ; r < len(idx); r++ {
			axpyF16Acc(h[r], row(r), acc)
		}
	} else {
		for r, k := range idx {
			axpyAcc(h[r], w.storedRange(buf, int(k)*w.Out+j0, j1-j0), acc)
		}
	}
	if bias != nil {
		for j := range acc {
			acc[j] += bias[j0+j]
		}
	}
}

// ascendingIn reports whether idx is strictly ascending within [0, n).
func ascendingIn(idx []int32, n int) bool {
	prev := -1
	for _, v := range idx {
		if int(v) <= prev || int(v) >= n {
			return false
		}
		prev = int(v)
	}
	return true
}

// DropZeroInputs removes the inputs of a scattered product (LinearScatterIn
// and its parallel and panel forms) whose value is exactly zero: it moves
// the non-zero entries of h to its front in order, writes their indices
// into keep (len(keep) >= len(h); keep may be idx itself), and returns both
// shortened. The product over what is left has the bits of the product over
// everything when the weights are finite (Mat.Finite): its accumulators
// start at +0 and add in ascending order, a zero input adds a product of
// ±0, and a sum that starts at +0 is never −0 in round-to-nearest, so
// adding ±0 leaves it unchanged. With a non-finite weight it would not
// (0·Inf is NaN): check Finite first.
func DropZeroInputs(h []float32, idx, keep []int32) ([]float32, []int32) {
	if len(idx) != len(h) || len(keep) < len(h) {
		panic(msgDropZeroLen)
	}
	n := 0
	for r, v := range h {
		if v != 0 {
			h[n] = v
			keep[n] = idx[r]
			n++
		}
	}
	return h[:n], keep[:n]
}
