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
// kernel call, except where there is an indexed kernel (binary16 with
// AVX-512), which takes runs averaging under eight inputs in one call;
// elsewhere use LinearScatterIn for such inputs. It is the panel GEMV
// (gemvPanels) over the kept inputs: the outputs are split over up to
// threads goroutines in jobs of whole panel groups, so the bits do not
// depend on threads.
func (s *Scratch) LinearScatterInPanels(y, h []float32, w *Mat, bias []float32, idx []int32, threads int) {
	checkScatter(y, h, w, bias, idx)
	if w.Panels == nil {
		panic(msgScatterPanels)
	}
	// A nil idx (no input kept) reaches gemvPanels as "every input", but
	// checkScatter has made h empty, so the sums are zero all the same.
	gemvPanels(s.team(), y, h, w, bias, idx, threads)
}
