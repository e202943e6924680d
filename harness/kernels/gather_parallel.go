package kernels

// gatherJob is how many kept outputs (or output columns) one job of the
// parallel gathers handles. Jobs split only independent outputs, so results
// equal the single-goroutine kernels bit for bit.
const gatherJob = 64

// LinearGatherParallel is LinearGather with the kept outputs split over up to
// threads goroutines; the result is the same bits.
func LinearGatherParallel(y, x []float32, w *Mat, bias []float32, idx []int32, threads int) {
	(*Scratch)(nil).LinearGatherParallel(y, x, w, bias, idx, threads)
}

// LinearGatherParallel is the package-level LinearGatherParallel, on s's Team.
func (s *Scratch) LinearGatherParallel(y, x []float32, w *Mat, bias []float32, idx []int32, threads int) {
	if len(y) != len(idx) {
		panic(msgGatherY)
	}
	jobs := (len(idx) + gatherJob - 1) / gatherJob
	workers := workerCount(s.team(), threads, jobs, len(idx)*w.In)
	if workers <= 1 {
		LinearGather(y, x, w, bias, idx)
		return
	}
	// One even share per worker, in whole groups of sixteen rows (the row
	// kernel's step): 307 kept rows on two workers are 160 and 147, where
	// jobs of gatherJob rows left one worker 179 and the other 128.
	size := ((len(idx)+workers-1)/workers + 15) &^ 15
	jobs = (len(idx) + size - 1) / size
	runJobs(s.team(), jobs, workers, func() func(int) {
		return func(j int) {
			r0, r1 := j*size, min((j+1)*size, len(idx))
			LinearGather(y[r0:r1], x, w, bias, idx[r0:r1])
		}
	})
}

// LinearScatterInParallel is LinearScatterIn with the outputs split over up
// to threads goroutines; the result is the same bits. It pays off for the
// Transposed (input-major) layout, where each kept input is a contiguous row.
func LinearScatterInParallel(y, h []float32, w *Mat, bias []float32, idx []int32, threads int) {
	(*Scratch)(nil).LinearScatterInParallel(y, h, w, bias, idx, threads)
}

// LinearScatterInParallel is the package-level LinearScatterInParallel, on
// s's Team.
func (s *Scratch) LinearScatterInParallel(y, h []float32, w *Mat, bias []float32, idx []int32, threads int) {
	if !w.Transposed {
		LinearScatterIn(y, h, w, bias, idx)
		return
	}
	checkScatter(y, h, w, bias, idx)
	jobs := (w.Out + gemvColsJob - 1) / gemvColsJob
	workers := workerCount(s.team(), threads, jobs, len(idx)*w.Out)
	if workers <= 1 {
		// In the calling goroutine, without the closures runJobs takes
		// (they escape, and a predictor scores every token this way).
		scatterIn(y, h, w, bias, idx)
		return
	}
	runJobs(s.team(), jobs, workers, func() func(int) {
		var buf []float32 // conversion scratch; binary16 rows need none
		if w.DType != F16 {
			buf = make([]float32, gemvColsJob)
		}
		return func(job int) {
			j0 := job * gemvColsJob
			scatterBlock(y, h, w, bias, idx, j0, min(j0+gemvColsJob, w.Out), buf)
		}
	})
}

// GatherPart is one product of [LinearGatherParts]: Y[r] = Bias[Idx[r]] +
// Σ_k x[k]·W[Idx[r]][k], with LinearGather's arguments and contract.
type GatherPart struct {
	Y    []float32
	W    *Mat
	Bias []float32
	Idx  []int32
}

// LinearGatherParts runs LinearGather for every part over the same input x,
// as one fan-out of jobs of kept outputs across all parts on up to threads
// goroutines (a decode step's query, key and value gathers pay for one
// hand-off instead of three). Each output is the bits LinearGather gives it.
func LinearGatherParts(x []float32, parts []GatherPart, threads int) {
	(*Scratch)(nil).LinearGatherParts(x, parts, threads)
}

// LinearGatherParts is the package-level LinearGatherParts, on s's Team.
func (s *Scratch) LinearGatherParts(x []float32, parts []GatherPart, threads int) {
	type job struct{ part, r0, r1 int }
	var jobs []job
	work := 0
	for i, p := range parts {
		if len(p.Y) != len(p.Idx) {
			panic(msgGatherY)
		}
		for r0 := 0; r0 < len(p.Idx); r0 += gatherJob {
			jobs = append(jobs, job{i, r0, min(r0+gatherJob, len(p.Idx))})
		}
		work += len(p.Idx) * p.W.In
	}
	workers := workerCount(s.team(), threads, len(jobs), work)
	runJobs(s.team(), len(jobs), workers, func() func(int) {
		return func(j int) {
			b := jobs[j]
			p := parts[b.part]
			LinearGather(p.Y[b.r0:b.r1], x, p.W, p.Bias, p.Idx[b.r0:b.r1])
		}
	})
}
