package kernels

// msgScatterPanels is the panic of LinearScatterInPanels on a Mat without
// its panel copy.
const msgScatterPanels = "kernels: LinearScatterInPanels: w has no panel copy (PackPanels)"

// LinearScatterInPanels computes LinearScatterIn's y, the same bits, from
// w's k-major panel copy instead of an input-major one: y[j] = bias[j] +
// Σ_r h[r]·W[j][idx[r]], each product rounded to float32 and added in
// ascending r, the bias last (LinearScatterIn's order and rounding, output
// by output). idx must be strictly ascending within [0, In), len(h) ==
// len(idx), len(y) == Out, bias nil or of length Out, and w.Panels set.
//
// Each run of consecutive kept inputs is one contiguous stretch of every
// panel, read by the panel kernel at the dense GEMV's speed; the
// accumulators carry over from run to run. It suits inputs kept in long
// runs (an attention head's hd consecutive inputs: a decode step's output
// projection with heads skipped), where the input-major copy's rows, one
// 2·Out-byte row per kept input, stream at about half that speed. For
// inputs scattered one at a time (a sparse MLP's neurons) every run costs a
// kernel call: use LinearScatterIn there. The outputs are split over up to
// threads goroutines in jobs of whole panel groups, so the bits do not
// depend on threads.
func (s *Scratch) LinearScatterInPanels(y, h []float32, w *Mat, bias []float32, idx []int32, threads int) {
	checkScatter(y, h, w, bias, idx)
	if w.Panels == nil {
		panic(msgScatterPanels)
	}
	np := panelCount(w.Out)
	nJobs := (np + panelGroup - 1) / panelGroup
	workers := workerCount(s.team(), threads, nJobs, len(idx)*w.Out)
	if workers <= 1 {
		for job := range nJobs {
			panelRunsJob(y, h, w, bias, idx, job)
		}
		return
	}
	runJobs(s.team(), nJobs, workers, func() func(int) {
		return func(job int) { panelRunsJob(y, h, w, bias, idx, job) }
	})
}

// panelRunsJob computes LinearScatterInPanels's outputs of the panels
// [job·panelGroup, (job+1)·panelGroup) that exist: the accumulators start
// at zero, each run of consecutive idx entries advances them with one
// panel-kernel call, and the sums (plus bias) are written out. A short last
// group repeats its final panel, whose extra results are dropped.
func panelRunsJob(y, h []float32, w *Mat, bias []float32, idx []int32, job int) {
	np := panelCount(w.Out)
	p0 := job * panelGroup
	p1 := min(p0+panelGroup, np)
	var list [panelGroup]int
	for q := range list {
		list[q] = min(p0+q, p1-1)
	}
	var acc [panelGroup * PanelRows]float32
	for r := 0; r < len(idx); {
		e := r + 1
		for e < len(idx) && idx[e] == idx[e-1]+1 {
			e++
		}
		panelDot4At(&acc, h[r:e], w, &list, int(idx[r]))
		r = e
	}
	for q := range p1 - p0 {
		j0 := (p0 + q) * PanelRows
		n := min(PanelRows, w.Out-j0)
		var b []float32
		if bias != nil {
			b = bias[j0 : j0+n]
		}
		putOutputs(y[j0:j0+n], acc[q*PanelRows:q*PanelRows+n], b)
	}
}
