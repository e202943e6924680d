package engine

import (
	"sparsegate/harness/kernels"
	"sparsegate/harness/weightmem"
)

// neuronRows is a layer's MLP weights copied neuron by neuron
// (Options.NeuronMajor): for neuron j, its gate row (SwiGLU only), its up
// row and its down column, Hidden values each, stored one after another.
// A sparse MLP reads its kept neurons' weights as one contiguous run each
// instead of two or three runs in separate matrices: from memory that
// measured 1.4-1.5x faster for the gather and scatter together
// (BenchmarkSparseMLPFromMemory's layouts; PERF_NOTES.md).
//
// The copy is two views of one storage: rows, an Out×In matrix with
// parts·FFN rows of Hidden values (neuron j's up row is row parts·j+up),
// for the gathered up and gate products, and cols, the same storage seen
// Transposed with parts·FFN inputs (neuron j's down column is input
// parts·j+down), for the scattered down product. The kernels compute each
// output in the same order whatever the layout, so the results are the bits
// of the separate matrices.
type neuronRows struct {
	parts          int          // 2 (up, down) or 3 (gate, up, down)
	gate, up, down int32        // each one's place within a neuron's run (gate -1 without one)
	rows, cols     *kernels.Mat // the two views
}

// newNeuronRows copies up, gate (nil without one) and down into a
// neuronRows held in mem, in their stored dtype. It returns nil when the three do not
// share a dtype, which the sparse path then handles with the matrices as
// stored.
func newNeuronRows(mem *weightmem.Arena, up, gate, down *kernels.Mat) *neuronRows {
	if up == nil || down == nil || up.DType != down.DType || gate != nil && gate.DType != up.DType {
		return nil
	}
	n := &neuronRows{parts: 2, gate: -1, up: 0, down: 1}
	mats := []*kernels.Mat{up, down}
	if gate != nil {
		n.parts, n.gate, n.up, n.down = 3, 0, 1, 2
		mats = []*kernels.Mat{gate, up, down}
	}
	ffn, d := up.Out, up.In
	rows := n.parts * ffn
	n.rows = &kernels.Mat{DType: up.DType, Out: rows, In: d}
	if up.DType == kernels.F32 {
		n.rows.F32 = mem.Float32s(rows * d)
	} else {
		n.rows.Half = mem.Uint16s(rows * d)
	}
	for p, w := range mats {
		neuronMajorInto(n.rows, w, p, n.parts, w == down)
	}
	cols := *n.rows
	cols.Out, cols.In, cols.Transposed = d, rows, true
	n.cols = &cols
	return n
}

// neuronMajorInto writes, for each neuron j, w's row j (column j when
// column is set: down's weights from neuron j) into row parts·j+p of dst,
// reading w in whichever layout it is stored.
func neuronMajorInto(dst, w *kernels.Mat, p, parts int, column bool) {
	d := dst.In
	ffn := dst.Out / parts
	for j := 0; j < ffn; j++ {
		base := (parts*j + p) * d
		if column == w.Transposed { // the run is stored contiguously: copy it
			if w.DType == kernels.F32 {
				copy(dst.F32[base:base+d], w.F32[j*d:(j+1)*d])
			} else {
				copy(dst.Half[base:base+d], w.Half[j*d:(j+1)*d])
			}
			continue
		}
		for k := 0; k < d; k++ {
			out, in := j, k // the logical element W[out][in]
			if column {
				out, in = k, j
			}
			src := out*w.In + in
			if w.Transposed {
				src = in*w.Out + out
			}
			if w.DType == kernels.F32 {
				dst.F32[base+k] = w.F32[src]
			} else {
				dst.Half[base+k] = w.Half[src]
			}
		}
	}
}

// index returns idx mapped to the rows of part (n.up, n.gate or n.down):
// parts·j+part for each neuron j, ascending as idx is. It writes into
// *buf (grown when short, and kept there) or, when buf is nil, a fresh
// slice.
func (n *neuronRows) index(buf *[]int32, idx []int32, part int32) []int32 {
	out := int32s(buf, len(idx))
	for r, j := range idx {
		out[r] = int32(n.parts)*j + part
	}
	return out
}
