package kernels

// Blocking of the packed GEMM path. One job is an mcJob×ncJob tile of the
// output; inside it the k dimension is walked in ascending blocks of kcBlock,
// each block continuing the accumulators the previous one stored in y.
// The sizes are fixed, so the tiling never depends on the thread count.
const (
	kcBlock = 256 // k extent of a packed block
	mcJob   = 64  // output rows per job (multiple of mr)
	ncJob   = 128 // output columns per job (multiple of nr)
)

// gemmScratch holds one worker's packing buffers.
type gemmScratch struct {
	pa   []float32 // packed A: mcJob/mr panels of kc×mr
	pb   []float32 // packed B: ncJob/nr panels of kc×nr
	conv []float32 // one converted row segment of W
}

func newGemmScratch() *gemmScratch {
	return &gemmScratch{
		pa:   make([]float32, mcJob*kcBlock),
		pb:   make([]float32, ncJob*kcBlock),
		conv: make([]float32, max(kcBlock, ncJob)),
	}
}

// gemmBlocked computes y = x·Wᵀ (+ bias) for m×In x by packing panels of x
// and W and running the register-blocked micro-kernel.
// Packing buffers come from sc (fresh ones when sc is nil) and go back to it.
func gemmBlocked(sc *Scratch, y, x []float32, m int, w *Mat, bias []float32, threads int) {
	n, k := w.Out, w.In
	rowJobs := (m + mcJob - 1) / mcJob
	colJobs := (n + ncJob - 1) / ncJob
	nJobs := rowJobs * colJobs
	workers := workerCount(threads, nJobs, m*n*k)
	ws := &workerScratch{s: sc, sets: make([]*gemmScratch, max(workers, 1))}
	defer sc.put(ws.sets)
	runJobs(nJobs, workers, func() func(int) {
		s := ws.take()
		return func(job int) {
			i0 := (job / colJobs) * mcJob
			j0 := (job % colJobs) * ncJob
			gemmTile(y, x, w, bias, s, i0, min(i0+mcJob, m), j0, min(j0+ncJob, n))
		}
	})
}

// gemmTile computes output rows [i0, i1) × columns [j0, j1).
func gemmTile(y, x []float32, w *Mat, bias []float32, s *gemmScratch, i0, i1, j0, j1 int) {
	n, k := w.Out, w.In
	rowPanels := (i1 - i0 + mr - 1) / mr
	colPanels := (j1 - j0 + nr - 1) / nr
	for k0 := 0; k0 < k; k0 += kcBlock {
		kc := min(kcBlock, k-k0)
		first, last := k0 == 0, k0+kc == k
		packB(s.pb, s.conv, w, k0, kc, j0, j1)
		packA(s.pa, x, k, k0, kc, i0, i1)
		for ip := 0; ip < rowPanels; ip++ {
			i := i0 + ip*mr
			rows := min(mr, i1-i)
			pa := s.pa[ip*mr*kc : (ip+1)*mr*kc]
			for jp := 0; jp < colPanels; jp++ {
				j := j0 + jp*nr
				cols := min(nr, j1-j)
				var acc [mr * nr]float32
				if !first {
					for ii := 0; ii < rows; ii++ {
						copy(acc[ii*nr:ii*nr+cols], y[(i+ii)*n+j:(i+ii)*n+j+cols])
					}
				}
				gemmMicro(kc, pa, s.pb[jp*nr*kc:(jp+1)*nr*kc], &acc)
				for ii := 0; ii < rows; ii++ {
					out := y[(i+ii)*n+j : (i+ii)*n+j+cols]
					tile := acc[ii*nr : ii*nr+cols]
					if last && bias != nil {
						for jj := range out {
							out[jj] = tile[jj] + bias[j+jj]
						}
					} else {
						copy(out, tile)
					}
				}
			}
		}
	}
}

// packA packs rows [i0, i1) × columns [k0, k0+kc) of the row-major x
// (row stride k) into panels of mr rows: pa[(p*kc+kk)*mr+ii]. Rows past i1
// are zero.
func packA(pa, x []float32, k, k0, kc, i0, i1 int) {
	panels := (i1 - i0 + mr - 1) / mr
	for p := 0; p < panels; p++ {
		dst := pa[p*mr*kc : (p+1)*mr*kc]
		for ii := 0; ii < mr; ii++ {
			i := i0 + p*mr + ii
			if i >= i1 {
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
