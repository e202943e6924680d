package kernels

// PanelRows is the number of logical rows a weight panel holds. It equals the
// width of the AVX2 GEMM micro-tile (nr), so a panel is also the packed form
// the GEMM reads for those sixteen output columns.
const PanelRows = 16

// Panels is a k-major copy of a weight matrix in its stored dtype: the
// logical rows (outputs) are grouped in panels of PanelRows, and panel p
// holds W[PanelRows·p+i][k] at element (p·In+k)·PanelRows+i. Rows past Out
// in the last panel are zero. Reading a panel is one contiguous stream with
// sixteen outputs per k, so the m == 1 path accumulates sixteen rows per
// vector lane group without the transposes the Out×In layout needs, and the
// GEMM packs a panel by converting it in one pass. It costs one more copy of
// the matrix (see PackPanels); results are the same bits with or without it.
type Panels struct {
	F32  []float32 // DType F32
	Half []uint16  // DType F16 or BF16: stored bit patterns
}

// panelCount is the number of panels that hold out rows.
func panelCount(out int) int { return (out + PanelRows - 1) / PanelRows }

// PanelBytes is the size of w's panel copy in bytes.
func PanelBytes(w *Mat) int64 {
	n := int64(panelCount(w.Out)) * int64(w.In) * PanelRows
	if w.DType == F32 {
		return 4 * n
	}
	return 2 * n
}

// Allocator hands out zeroed slices for long-lived weight copies (the
// engine's is a weightmem.Arena, which maps them on huge pages).
type Allocator interface {
	Uint16s(n int) []uint16
	Float32s(n int) []float32
}

// PackPanels returns the k-major panel copy of w, in w's stored dtype (no
// value is converted). w may be stored Out×In or Transposed; w.Panels is
// ignored and left as it is.
func PackPanels(w *Mat) *Panels { return PackPanelsIn(w, nil) }

// PackPanelsIn is PackPanels with the copy's storage from a (the Go heap
// when a is nil).
func PackPanelsIn(w *Mat, a Allocator) *Panels {
	w.Check()
	np, in := panelCount(w.Out), w.In
	n := np * in * PanelRows
	p := new(Panels)
	p.F32, p.Half = storage(w.DType, n, a)
	for j := 0; j < w.Out; j++ {
		base := (j/PanelRows*in)*PanelRows + j%PanelRows
		for k := 0; k < in; k++ {
			src := j*in + k
			if w.Transposed {
				src = k*w.Out + j
			}
			if w.DType == F32 {
				p.F32[base+k*PanelRows] = w.F32[src]
			} else {
				p.Half[base+k*PanelRows] = w.Half[src]
			}
		}
	}
	return p
}

// checkPanels panics unless w.Panels, when set, holds exactly the values
// of w's panel layout in w's dtype.
func (m *Mat) checkPanels() {
	p := m.Panels
	if p == nil {
		return
	}
	n := panelCount(m.Out) * m.In * PanelRows
	if m.DType == F32 {
		if len(p.F32) != n || len(p.Half) != 0 {
			panic(msgPanelsLen)
		}
		return
	}
	if len(p.Half) != n || len(p.F32) != 0 {
		panic(msgPanelsLen)
	}
}

// panelGroup is how many panels one call of the panel kernel advances.
const panelGroup = 4

// panelDot4Go sets acc[PanelRows·q+i] = Σ_k x[k]·P[k][i] for the panel
// P = panels[q] of w, q < panelGroup, k ascending from 0 with each product
// rounded to float32 before it is added: per output the same order and
// rounding as the row-dot path. It is the portable twin of the assembly
// panel kernels.
func panelDot4Go(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int) {
	*acc = [panelGroup * PanelRows]float32{}
	panelDot4AtGo(acc, x, w, panels, 0)
}

// panelDot4AtGo continues acc[PanelRows·q+i] by Σ_j x[j]·P[k0+j][i] for
// the panel P = panels[q] of w, j ascending, each product rounded to
// float32 before it is added (len(x) ≤ w.In−k0): the accumulators go on
// from the values acc holds, so consecutive calls over runs of k give the
// bits of one call over their union.
func panelDot4AtGo(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int, k0 int) {
	in := w.In
	var buf [PanelRows]float32
	for q, p := range panels {
		a := (*[PanelRows]float32)(acc[q*PanelRows : (q+1)*PanelRows])
		off := (p*in + k0) * PanelRows
		for k, xv := range x {
			row := buf[:]
			o := off + k*PanelRows
			switch w.DType {
			case F32:
				row = w.Panels.F32[o : o+PanelRows]
			case F16:
				f16ToF32Go(row, w.Panels.Half[o:o+PanelRows])
			default:
				bf16ToF32Slice(row, w.Panels.Half[o:o+PanelRows])
			}
			for i := range a {
				a[i] += float32(xv * row[i])
			}
		}
	}
}

// panelRows computes out[r] = bias[row] + Σ_k x[k]·W[row][k] for the rows
// of the listed panels, panel list[g] giving out[PanelRows·g : …] (the
// rows of the last panel that lie past w.Out are not written; out is cut
// to the rows that exist); with idx (LinearScatterInPanels), the sum runs
// over the kept inputs only: Σ_r x[r]·W[row][idx[r]] (panelSums). Panels go
// panelGroup at a time; a short last group repeats its final panel, whose
// extra results are dropped.
func panelRows(out, x []float32, w *Mat, bias []float32, idx []int32, indexed bool, list []int) {
	var acc [panelGroup * PanelRows]float32
	for g0 := 0; g0 < len(list); g0 += panelGroup {
		var ps [panelGroup]int
		for q := range ps {
			ps[q] = list[min(g0+q, len(list)-1)]
		}
		panelSums(&acc, x, w, &ps, idx, indexed)
		for q := 0; q < panelGroup && g0+q < len(list); q++ {
			// The rows of panel q that exist and fit out, as whole slices
			// (one bounds check each, not one per row).
			row0, r0 := ps[q]*PanelRows, (g0+q)*PanelRows
			n := min(PanelRows, len(out)-r0, w.Out-row0)
			if n <= 0 {
				continue
			}
			var b []float32
			if bias != nil {
				b = bias[row0 : row0+n]
			}
			putOutputs(out[r0:r0+n], acc[q*PanelRows:q*PanelRows+n], b)
		}
	}
}

// panelSums sets acc to the listed panels' sums over every input (idx
// nil: panelDot4) or over the kept inputs idx, strictly ascending, x[r]
// being input idx[r]'s value: each run of consecutive kept inputs is one
// contiguous stretch of every panel, one panelDot4At call, the
// accumulators carried from run to run, so the sums are the bits of
// LinearScatterIn's ascending order; with indexed, one panelDot4Idx call
// over all of them (the same order and bits).
func panelSums(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int, idx []int32, indexed bool) {
	if idx == nil {
		panelDot4(acc, x, w, panels)
		return
	}
	*acc = [panelGroup * PanelRows]float32{}
	if indexed && panelDot4Idx(acc, x, idx, w, panels) {
		return
	}
	for r := 0; r < len(idx); {
		e := r + 1
		for e < len(idx) && idx[e] == idx[e-1]+1 {
			e++
		}
		panelDot4At(acc, x[r:e], w, panels, int(idx[r]))
		r = e
	}
}

// shortRuns reports whether the kept inputs idx (strictly ascending) come
// in runs of fewer than eight on average: then one indexed kernel call
// (panelDot4Idx) beats a call per run.
func shortRuns(idx []int32) bool {
	runs := 0
	for r := range idx {
		if r == 0 || idx[r] != idx[r-1]+1 {
			runs++
		}
	}
	return 8*runs > len(idx)
}

// gemvPanels is the m == 1 Linear over w's panels (over the kept inputs
// idx only, when idx is not nil): jobs of panelGroup panels, each output
// computed by one job alone, so the bits do not depend on threads.
func gemvPanels(team *Team, y, x []float32, w *Mat, bias []float32, idx []int32, threads int) {
	np := panelCount(w.Out)
	nJobs := (np + panelGroup - 1) / panelGroup
	work := w.Out * w.In
	if idx != nil {
		work = w.Out * len(idx)
	}
	// Kept inputs in short runs go through the indexed kernel where there
	// is one (decided once for all the jobs).
	indexed := idx != nil && panelIndexed(w.DType) && shortRuns(idx)
	workers := workerCount(team, threads, nJobs, work)
	if workers <= 1 {
		// In the calling goroutine, without the closures runJobs takes
		// (they escape, and a predictor scores every token this way).
		var list [panelGroup]int
		for job := range nJobs {
			panelJob(y, x, w, bias, idx, indexed, job, &list)
		}
		return
	}
	runJobs(team, nJobs, workers, func() func(int) {
		var list [panelGroup]int
		return func(job int) { panelJob(y, x, w, bias, idx, indexed, job, &list) }
	})
}

// panelJob computes gemvPanels's job: the outputs of panels
// [job·panelGroup, (job+1)·panelGroup) that exist. list is scratch.
func panelJob(y, x []float32, w *Mat, bias []float32, idx []int32, indexed bool, job int, list *[panelGroup]int) {
	np := panelCount(w.Out)
	p0 := job * panelGroup
	p1 := min(p0+panelGroup, np)
	for q := p0; q < p1; q++ {
		list[q-p0] = q
	}
	j0 := p0 * PanelRows
	panelRows(y[j0:min(p1*PanelRows, w.Out)], x, w, bias, idx, indexed, list[:p1-p0])
}

// putOutputs writes a panel's sums src to dst, each plus its bias when
// bias is not nil (the bias last, as every path adds it), as whole slices:
// one bounds check each, not one per row.
func putOutputs(dst, src, bias []float32) {
	if bias == nil {
		copy(dst, src)
		return
	}
	bias = bias[:len(dst)]
	src = src[:len(dst)]
	for i := range dst {
		dst[i] = src[i] + bias[i]
	}
}

// gatherPanels computes LinearGather's y for the idx entries that cover
// whole panels (sixteen consecutive rows starting at a multiple of
// PanelRows) from w's panels, and returns the positions r of the entries it
// did not cover, for the row-dot path. idx is strictly ascending.
func gatherPanels(y, x []float32, w *Mat, bias []float32, idx []int32, rest []int) []int {
	var list [panelGroup]int
	var at [panelGroup]int // position in idx of each listed panel
	n := 0
	var acc [PanelRows * panelGroup]float32
	flush := func() {
		if n == 0 {
			return
		}
		for q := n; q < panelGroup; q++ {
			list[q] = list[n-1]
		}
		panelDot4(&acc, x, w, &list)
		for q := range n {
			var b []float32
			if bias != nil {
				b = bias[list[q]*PanelRows : (list[q]+1)*PanelRows]
			}
			putOutputs(y[at[q]:at[q]+PanelRows], acc[q*PanelRows:(q+1)*PanelRows], b)
		}
		n = 0
	}
	for r := 0; r < len(idx); {
		j := int(idx[r])
		if j%PanelRows == 0 && r+PanelRows <= len(idx) && int(idx[r+PanelRows-1]) == j+PanelRows-1 {
			list[n], at[n] = j/PanelRows, r
			n++
			if n == panelGroup {
				flush()
			}
			r += PanelRows
			continue
		}
		rest = append(rest, r)
		r++
	}
	flush()
	return rest
}

// hasPanelRun reports whether the strictly ascending idx covers at least
// one whole panel.
func hasPanelRun(idx []int32) bool {
	for r := 0; r+PanelRows <= len(idx); r++ {
		j := idx[r]
		if j%PanelRows == 0 && idx[r+PanelRows-1] == j+PanelRows-1 {
			return true
		}
	}
	return false
}
