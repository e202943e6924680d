package sparsity

import (
	"fmt"
	"math"

	"sparsegate/harness/kernels"
)

// A Predictor is a layer's low-rank two-layer scorer: for an input x of width
// In it computes scores = W2·relu(W1·x + B1) + B2, one score per unit (Out
// MLP neurons or attention heads); the units with the k highest scores run.
// W1 is Rank×In and W2 is Out×Rank, row-major.
type Predictor struct {
	In, Rank, Out int
	W1, B1        []float32
	W2, B2        []float32
}

// NewPredictor allocates a zero predictor of the given shape.
func NewPredictor(in, rank, out int) *Predictor {
	return &Predictor{In: in, Rank: rank, Out: out,
		W1: make([]float32, rank*in), B1: make([]float32, rank),
		W2: make([]float32, out*rank), B2: make([]float32, out)}
}

// Check reports a shape mismatch or a non-finite weight.
func (p *Predictor) Check() error {
	if p.In <= 0 || p.Rank <= 0 || p.Out <= 0 {
		return fmt.Errorf("predictor shape %d→%d→%d must be positive", p.In, p.Rank, p.Out)
	}
	for _, c := range []struct {
		name string
		v    []float32
		n    int
	}{{"w1", p.W1, p.Rank * p.In}, {"b1", p.B1, p.Rank}, {"w2", p.W2, p.Out * p.Rank}, {"b2", p.B2, p.Out}} {
		if len(c.v) != c.n {
			return fmt.Errorf("predictor %s has %d values, want %d for shape %d→%d→%d", c.name, len(c.v), c.n, p.In, p.Rank, p.Out)
		}
		for i, x := range c.v {
			if math.IsNaN(float64(x)) || math.IsInf(float64(x), 0) {
				return fmt.Errorf("predictor %s holds a non-finite value at element %d", c.name, i)
			}
		}
	}
	return nil
}

// Scores computes the unit scores for x into dst (len Out); hidden is scratch
// of len Rank. The arithmetic is the engine's deterministic Linear.
func (p *Predictor) Scores(dst, hidden, x []float32) {
	w1, w2 := p.mats()
	kernels.Linear(hidden, x, 1, w1, p.B1, 1)
	kernels.ReLU(hidden)
	kernels.Linear(dst, hidden, 1, w2, p.B2, 1)
}

// TopK returns, in ascending order, the indices of the k largest scores (ties
// go to the lower index, NaN ranks last), appended to dst[:0].
func TopK(dst []int32, scores []float32, k int) []int32 {
	if k < 0 || k > len(scores) {
		panic("sparsity: TopK k out of range")
	}
	return topKKeys(dst, make([]uint64, 2*len(scores)), scores, k)
}

// halfExact returns v's binary16 patterns when every value is exactly a
// binary16 number (so the half copy widens back to the same bits), and
// false otherwise.
func halfExact(v []float32) ([]uint16, bool) {
	h := make([]uint16, len(v))
	for i, x := range v {
		h[i] = kernels.F16Bits(x)
		if math.Float32bits(kernels.F16Value(h[i])) != math.Float32bits(x) {
			return nil, false
		}
	}
	return h, true
}

// RoundToHalf rounds the two weight matrices to the nearest binary16 values
// (the biases stay float32), so that a build stores them in half the bytes
// and a decode step reads half as much. It reports false, leaving p
// unchanged, when a weight would overflow binary16.
func (p *Predictor) RoundToHalf() bool {
	for _, w := range [][]float32{p.W1, p.W2} {
		for _, x := range w {
			if math.IsInf(float64(kernels.F16Value(kernels.F16Bits(x))), 0) {
				return false
			}
		}
	}
	for _, w := range [][]float32{p.W1, p.W2} {
		for i, x := range w {
			w[i] = kernels.F16Value(kernels.F16Bits(x))
		}
	}
	return true
}

// scoringMats returns the predictor's two matrices as the hooks score with
// them: in binary16 when every weight is a binary16 value (the same bits as
// the float32 matrices of mats, half the bytes to stream), each with its
// panel copy, which the batched products of a prefill read. The second is
// stored input by input (Transposed: hidden unit r's Out weights one
// contiguous run), so that a single token's scores read only the runs of
// the hidden units ReLU left non-zero, each as one stream (scorer.scores).
func (p *Predictor) scoringMats() [2]kernels.Mat {
	w1, w2 := p.mats()
	var out [2]kernels.Mat
	for i, w := range []*kernels.Mat{w1, w2} {
		if h, ok := halfExact(w.F32); ok {
			w = &kernels.Mat{DType: kernels.F16, Out: w.Out, In: w.In, Half: h}
		}
		if i == 1 {
			w = kernels.InputMajorIn(w, nil)
		}
		w.Panels = kernels.PackPanels(w)
		out[i] = *w
	}
	return out
}

// mats views the predictor's two layers as weight matrices: W1 Rank×In and
// W2 Out×Rank.
func (p *Predictor) mats() (w1, w2 *kernels.Mat) {
	return &kernels.Mat{DType: kernels.F32, Out: p.Rank, In: p.In, F32: p.W1},
		&kernels.Mat{DType: kernels.F32, Out: p.Out, In: p.Rank, F32: p.W2}
}
