package kernels_test

import (
	"fmt"
	"math"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/kernels"
)

// keptRuns draws a strictly ascending subset of [0, n) made of runs of
// consecutive inputs separated by gaps of 1 to 40: single inputs and short
// runs (scattered neurons) as often as runs of 64 (kept attention heads) and
// of any length up to 70.
func keptRuns(r interface{ IntN(int) int }, n int) []int32 {
	var idx []int32
	for k := r.IntN(5); k < n; {
		run := [...]int{1, 1, 2, 3, 64, 1 + r.IntN(70)}[r.IntN(6)]
		for i := k; i < min(k+run, n); i++ {
			idx = append(idx, int32(i))
		}
		k += run + 1 + r.IntN(40)
	}
	return idx
}

// keptScattered draws each input of [0, n) with probability one half, as
// ReLU leaves a predictor's hidden units: runs average two inputs, so the
// panel scatter takes its indexed kernel where it has one.
func keptScattered(r interface{ IntN(int) int }, n int) []int32 {
	var idx []int32
	for k := range n {
		if r.IntN(2) == 0 {
			idx = append(idx, int32(k))
		}
	}
	return idx
}

// LinearScatterInPanels gives LinearScatterIn's bits (the input-major copy's
// path and the Out×In path alike) for every dtype, stored layout, output
// count (whole panel groups, a short last group, a short last panel) and
// thread count, and writes every output and nothing past them. A summation
// that skipped the carried accumulators between runs, started a run at the
// wrong k, or added the bias before the products would differ in bits.
func TestLinearScatterInPanelsMatchesScatterIn(t *testing.T) {
	r := newRand(91)
	team := kernels.NewTeam(2)
	defer team.Close()
	for _, dt := range []kernels.DType{kernels.F32, kernels.F16, kernels.BF16} {
		for _, tr := range []bool{false, true} {
			for _, c := range []struct {
				out  int
				kept func(interface{ IntN(int) int }, int) []int32
			}{{768, keptRuns}, {100, keptRuns}, {7, keptRuns}, {768, keptScattered}, {100, keptScattered}} {
				out, in := c.out, 384
				name := fmt.Sprintf("%v/transposed=%v/out=%d", dt, tr, out)
				w, logical := testMat(r, dt, out, in, tr)
				w.Panels = kernels.PackPanels(w)
				idx := c.kept(r, in)
				h := randVec(r, len(idx))
				bias := randVec(r, out)
				for _, b := range [][]float32{nil, bias} {
					want := make([]float32, out)
					kernels.LinearScatterIn(want, h, w, b, idx)
					// The scatter itself against a float64 sum of the
					// decoded weights (rounding error only).
					for j := range out {
						var s float64
						for r, k := range idx {
							s += float64(h[r]) * float64(logical[j][k])
						}
						if b != nil {
							s += float64(b[j])
						}
						require.InDelta(t, s, float64(want[j]), 1e-4*(1+math.Abs(s)), "%s: LinearScatterIn output %d", name, j)
					}
					for _, th := range []int{1, 2, 3} {
						g := newGuarded(out)
						s := &kernels.Scratch{Team: team}
						s.LinearScatterInPanels(g.s, h, w, b, idx, th)
						g.check(t, name)
						require.Equal(t, -1, bitsEqual(want, g.s), "%s bias=%v threads=%d: first output whose bits differ from LinearScatterIn", name, b != nil, th)
					}
				}
				// Every input kept is the dense product, bit for bit.
				all := make([]int32, in)
				for i := range all {
					all[i] = int32(i)
				}
				x := randVec(r, in)
				dense, got := make([]float32, out), make([]float32, out)
				kernels.Linear(dense, x, 1, w, bias, 1)
				new(kernels.Scratch).LinearScatterInPanels(got, x, w, bias, all, 1)
				require.Equal(t, -1, bitsEqual(dense, got), "%s: first output where all inputs kept differs from the dense GEMV", name)
			}
		}
	}
}

// A NaN among the kept inputs reaches every output, as in LinearScatterIn
// (checked with IsNaN: NaN payloads are not part of the contract).
func TestLinearScatterInPanelsPropagatesNaN(t *testing.T) {
	r := newRand(17)
	for _, dt := range []kernels.DType{kernels.F32, kernels.F16, kernels.BF16} {
		w, _ := testMat(r, dt, 40, 130, false)
		w.Panels = kernels.PackPanels(w)
		idx := []int32{3, 4, 5, 64, 65, 129}
		h := randVec(r, len(idx))
		h[4] = float32(math.NaN())
		want, got := make([]float32, 40), make([]float32, 40)
		kernels.LinearScatterIn(want, h, w, nil, idx)
		new(kernels.Scratch).LinearScatterInPanels(got, h, w, nil, idx, 1)
		for j := range got {
			require.True(t, math.IsNaN(float64(want[j])) && math.IsNaN(float64(got[j])), "%v: output %d = %v (LinearScatterIn %v), want NaN", dt, j, got[j], want[j])
		}
	}
}

// With no input kept (idx nil or empty) every output is its bias, as in
// LinearScatterIn, not the product over all inputs.
func TestLinearScatterInPanelsNoInputs(t *testing.T) {
	r := newRand(23)
	w, _ := testMat(r, kernels.F16, 40, 64, false)
	w.Panels = kernels.PackPanels(w)
	bias := randVec(r, 40)
	for _, idx := range [][]int32{nil, {}} {
		want, got := make([]float32, 40), make([]float32, 40)
		kernels.LinearScatterIn(want, nil, w, bias, idx)
		new(kernels.Scratch).LinearScatterInPanels(got, nil, w, bias, idx, 1)
		require.Equal(t, bias, want)
		require.Equal(t, want, got, "idx %#v", idx)
	}
}

// A Mat without its panel copy is a programming error.
func TestLinearScatterInPanelsNeedsPanels(t *testing.T) {
	w, _ := testMat(newRand(3), kernels.F32, 16, 8, false)
	mustPanic(t, "LinearScatterInPanels", "kernels: LinearScatterInPanels: w has no panel copy (PackPanels)", func() {
		new(kernels.Scratch).LinearScatterInPanels(make([]float32, 16), []float32{1}, w, nil, []int32{0}, 1)
	})
}
