package kernels

// Blocking of the packed GEMM path. x is packed once per call into panels of
// mr rows for every k block of kcBlock (shared, read-only, by all workers).
// One job is a block of ncJob output columns over a range of rows: for each
// ascending k block it packs (or, for f32 weight panels, reads in place) the
// columns' B block once and sweeps its row panels, each block continuing the
// accumulators the previous one stored in y. Every output keeps one
// ascending-k chain whatever the tiling, so neither the job shapes nor the
// thread count change a bit.
const (
	kcBlock = 256 // k extent of a packed block
	ncJob   = 128 // output columns per job (multiple of nr)
	mcSplit = 64  // rows per job at the finest row split (multiple of mr)
	// jobsPerWorker is how many jobs per worker the row split aims for
	// when the column blocks alone are too few to balance the workers.
	jobsPerWorker = 4
	// packAlone bounds the m·k below which x is packed by the caller alone.
	packAlone = 1 << 16
)

// gemmScratch holds one worker's packing buffers.
type gemmScratch struct {
	pb   []float32 // packed B: ncJob/nr panels of kc×nr
	conv []float32 // one converted row segment of W
}

func newGemmScratch() *gemmScratch {
	return &gemmScratch{
		pb:   make([]float32, ncJob*kcBlock),
		conv: make([]float32, max(kcBlock, ncJob)),
	}
}

// gemmBlocked computes y = x·Wᵀ (+ bias) for m×In x by packing panels of x
// and W and running the register-blocked micro-kernel.
// Packing buffers come from sc (fresh ones when sc is nil) and go back to it.
func gemmBlocked(sc *Scratch, y, x []float32, m int, w *Mat, bias []float32, threads int) {
	n, k := w.Out, w.In
	rowPanels := (m + mr - 1) / mr
	colJobs := (n + ncJob - 1) / ncJob
	workers := workerCount(sc.team(), threads, colJobs*rowPanels, m*n*k)
	// Split the rows when the column blocks alone leave workers idle.
	split := 1
	if colJobs < jobsPerWorker*workers {
		split = min((jobsPerWorker*workers+colJobs-1)/colJobs, (m+mcSplit-1)/mcSplit)
	}
	panelsPerSplit := (rowPanels + split - 1) / split
	split = (rowPanels + panelsPerSplit - 1) / panelsPerSplit

	pa := sc.floats(usePackedX, rowPanels*mr*k)
	defer sc.putFloats(usePackedX, pa)
	if m*k <= packAlone || workers == 1 {
		packA(pa, x, m, k, 0, rowPanels)
	} else {
		const group = mcSplit / mr
		runJobs(sc.team(), (rowPanels+group-1)/group, workers, func() func(int) {
			return func(job int) {
				packA(pa, x, m, k, job*group, min((job+1)*group, rowPanels))
			}
		})
	}

	// When the rows are split, several jobs sweep each column block: pack
	// B's blocks once for the call, shared read-only, instead of once per
	// job (weights read in place need no packing at all).
	var shared []float32
	if split > 1 && !readsPanelsInPlace(w, 0) {
		shared = sc.floats(usePackedB, colJobs*ncJob*k)
		defer sc.putFloats(usePackedB, shared)
		kBlocks := (k + kcBlock - 1) / kcBlock
		runJobs(sc.team(), colJobs*kBlocks, min(workers, colJobs*kBlocks), func() func(int) {
			conv := make([]float32, max(kcBlock, ncJob))
			return func(job int) {
				j0, k0 := (job/kBlocks)*ncJob, (job%kBlocks)*kcBlock
				kc := min(kcBlock, k-k0)
				packB(sharedBlock(shared, k, j0, k0, kc), conv, w, k0, kc, j0, min(j0+ncJob, n))
			}
		})
	}

	ws := &workerScratch{s: sc, sets: make([]*gemmScratch, max(workers, 1))}
	defer sc.put(ws.sets)
	runJobs(sc.team(), colJobs*split, workers, func() func(int) {
		s := ws.take()
		return func(job int) {
			j0 := (job / split) * ncJob
			p0 := (job % split) * panelsPerSplit
			gemmJob(y, pa, m, w, bias, s, shared, p0, min(p0+panelsPerSplit, rowPanels), j0, min(j0+ncJob, n))
		}
	})
}

// readsPanelsInPlace reports whether the GEMM reads w's B blocks for the
// column block starting at j0 straight from its f32 panel copy (no
// packing).
func readsPanelsInPlace(w *Mat, j0 int) bool {
	return w.Panels != nil && w.DType == F32 && nr == PanelRows && j0%PanelRows == 0
}

// sharedBlock is the part of a call's shared packed B (colJobs·ncJob·k
// floats) that holds the column block starting at j0 over the k block
// [k0, k0+kc), in packB's layout.
func sharedBlock(shared []float32, k, j0, k0, kc int) []float32 {
	base := j0*k + k0*ncJob
	return shared[base : base+ncJob*kc]
}

// gemmJob computes output columns [j0, j1) for the rows of row panels
// [p0, p1) of the packed x pa (rows past m are skipped). B's blocks come
// from w's f32 panels in place, from the call's shared packed B when
// shared is not nil, or are packed into s.
func gemmJob(y, pa []float32, m int, w *Mat, bias []float32, s *gemmScratch, shared []float32, p0, p1, j0, j1 int) {
	n, k := w.Out, w.In
	mPad := (m + mr - 1) / mr * mr
	colPanels := (j1 - j0 + nr - 1) / nr
	// f32 weight panels are the packed B layout already: read them in place.
	direct := readsPanelsInPlace(w, j0)
	for k0 := 0; k0 < k; k0 += kcBlock {
		kc := min(kcBlock, k-k0)
		first, last := k0 == 0, k0+kc == k
		pb := s.pb
		switch {
		case direct:
		case shared != nil:
			pb = sharedBlock(shared, k, j0, k0, kc)
		default:
			packB(pb, s.conv, w, k0, kc, j0, j1)
		}
		// panel is column panel jp's B block at this k block.
		panel := func(jp int) []float32 {
			if direct {
				src := (((j0+jp*nr)/PanelRows)*k + k0) * PanelRows
				return w.Panels.F32[src : src+kc*PanelRows]
			}
			return pb[jp*nr*kc : (jp+1)*nr*kc]
		}
		for ip := p0; ip < p1; ip++ {
			i := ip * mr
			rows := min(mr, m-i)
			a := pa[k0*mPad+ip*mr*kc : k0*mPad+(ip+1)*mr*kc]
			for jp := 0; jp < colPanels; jp++ {
				j := j0 + jp*nr
				cols := min(nr, j1-j)
				b := panel(jp)
				var bb []float32
				if last && bias != nil {
					bb = bias[j:]
				}
				if rows == mr && cols == nr && jp+1 < colPanels && j+2*nr <= j1 {
					// Two whole tiles side by side: one pass where the
					// CPU has wider registers, the same bits.
					gemmMicroFull2(kc, a, b, panel(jp+1), y[i*n+j:], n, first, bb)
					jp++
					continue
				}
				if rows == mr && cols == nr {
					gemmMicroFull(kc, a, b, y[i*n+j:], n, first, bb)
					continue
				}
				gemmMicroEdge(kc, a, b, y[i*n+j:], n, rows, cols, first, bb)
			}
		}
	}
}

// gemmMicroEdge runs gemmMicro on the rows × cols corner of an mr×nr tile
// of y (row stride ldc): the accumulators start at zero when first is set
// and from y otherwise; bias (nil, or the tile's column biases) is added
// after the k loop, and the corner is stored back.
func gemmMicroEdge(kc int, a, b, y []float32, ldc, rows, cols int, first bool, bias []float32) {
	var acc [mr * nr]float32
	if !first {
		for ii := 0; ii < rows; ii++ {
			copy(acc[ii*nr:ii*nr+cols], y[ii*ldc:ii*ldc+cols])
		}
	}
	gemmMicro(kc, a, b, &acc)
	for ii := 0; ii < rows; ii++ {
		out := y[ii*ldc : ii*ldc+cols]
		tile := acc[ii*nr : ii*nr+cols]
		if bias != nil {
			for jj := range out {
				out[jj] = tile[jj] + bias[jj]
			}
		} else {
			copy(out, tile)
		}
	}
}

// gemmMicroFullGo is gemmMicroEdge on a whole mr×nr tile: the portable body
// of gemmMicroFull.
func gemmMicroFullGo(kc int, a, b, y []float32, ldc int, first bool, bias []float32) {
	gemmMicroEdge(kc, a, b, y, ldc, mr, nr, first, bias)
}

// packA packs row panels [p0, p1) of the row-major m×k x into pa, for every
// k block: panel p of the block at k0 (extent kc) is
// pa[k0·mPad + p·mr·kc + kk·mr + ii] = x[(p·mr+ii)·k + k0+kk], mPad being m
// rounded up to mr. Rows past m are zero.
func packA(pa, x []float32, m, k, p0, p1 int) {
	mPad := (m + mr - 1) / mr * mr
	for k0 := 0; k0 < k; k0 += kcBlock {
		kc := min(kcBlock, k-k0)
		for p := p0; p < p1; p++ {
			dst := pa[k0*mPad+p*mr*kc : k0*mPad+(p+1)*mr*kc]
			if mr == 4 && (p+1)*mr <= m {
				// A whole panel of four rows: one contiguous group of
				// four stores per k instead of four strided passes.
				i := p * mr
				r0 := x[i*k+k0 : i*k+k0+kc]
				r1 := x[(i+1)*k+k0 : (i+1)*k+k0+kc]
				r2 := x[(i+2)*k+k0 : (i+2)*k+k0+kc]
				r3 := x[(i+3)*k+k0 : (i+3)*k+k0+kc]
				for kk := range r0 {
					d := dst[kk*4 : kk*4+4 : kk*4+4]
					d[0], d[1], d[2], d[3] = r0[kk], r1[kk], r2[kk], r3[kk]
				}
				continue
			}
			for ii := 0; ii < mr; ii++ {
				i := p*mr + ii
				if i >= m {
					for kk := 0; kk < kc; kk++ {
						dst[kk*mr+ii] = 0
					}
					continue
				}
				src := x[i*k+k0 : i*k+k0+kc]
				for kk, v := range src {
					dst[kk*mr+ii] = v
				}
			}
		}
	}
}

// packB packs B[k0:k0+kc, j0:j1], where B[kk][j] = W[j][kk], into panels of
// nr columns: pb[(p*kc+kk)*nr+jj], converting half-precision weights on the
// way. Columns past j1 are zero. conv is scratch of at least max(kc, j1-j0).
func packB(pb, conv []float32, w *Mat, k0, kc, j0, j1 int) {
	panels := (j1 - j0 + nr - 1) / nr
	if w.Panels != nil && nr == PanelRows && j0%PanelRows == 0 {
		// Each GEMM panel is the k range of one weight panel, contiguous.
		for p := 0; p < panels; p++ {
			src := ((j0/PanelRows+p)*w.In + k0) * PanelRows
			dst := pb[p*nr*kc : (p+1)*nr*kc]
			switch w.DType {
			case F32:
				copy(dst, w.Panels.F32[src:src+kc*PanelRows])
			case F16:
				f16ToF32Slice(dst, w.Panels.Half[src:src+kc*PanelRows])
			default:
				bf16ToF32Slice(dst, w.Panels.Half[src:src+kc*PanelRows])
			}
		}
		return
	}
	if !w.Transposed {
		// W is Out×In: each output column j is a contiguous run of W's row j.
		for p := 0; p < panels; p++ {
			dst := pb[p*nr*kc : (p+1)*nr*kc]
			for jj := 0; jj < nr; jj++ {
				j := j0 + p*nr + jj
				if j >= j1 {
					for kk := 0; kk < kc; kk++ {
						dst[kk*nr+jj] = 0
					}
					continue
				}
				src := w.storedRange(conv, j*w.In+k0, kc)
				for kk, v := range src {
					dst[kk*nr+jj] = v
				}
			}
		}
		return
	}
	// W is stored In×Out: row k of the storage holds B[k][·] contiguously.
	width := j1 - j0
	for kk := 0; kk < kc; kk++ {
		src := w.storedRange(conv, (k0+kk)*w.Out+j0, width)
		for p := 0; p < panels; p++ {
			dst := pb[(p*kc+kk)*nr : (p*kc+kk+1)*nr]
			lo := p * nr
			c := copy(dst, src[lo:min(lo+nr, width)])
			clear(dst[c:])
		}
	}
}
