package kernels_test

import (
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/kernels"
)

// The parallel gathers split only independent outputs: any thread count
// gives the single-goroutine kernels' bits.
func TestParallelGathersMatchSequential(t *testing.T) {
	r := newRand(34)
	for _, dt := range []kernels.DType{kernels.F32, kernels.F16, kernels.BF16} {
		for _, tr := range []bool{false, true} {
			out, in := 1400, 700 // enough work for several workers
			w, _ := testMat(r, dt, out, in, tr)
			x := make([]float32, in)
			for i := range x {
				x[i] = float32(r.NormFloat64())
			}
			var idx []int32
			for i := 0; i < out; i++ {
				if r.IntN(3) == 0 {
					idx = append(idx, int32(i))
				}
			}
			bias := make([]float32, out)
			want := make([]float32, len(idx))
			kernels.LinearGather(want, x, w, bias, idx)
			wt := &kernels.Mat{DType: dt, Out: in, In: out, Transposed: !tr, F32: w.F32, Half: w.Half}
			h := want // the kept outputs feed the scatter
			var inIdx = idx
			wantS := make([]float32, in)
			kernels.LinearScatterIn(wantS, h, wt, nil, inIdx)
			for _, th := range []int{1, 2, 3, 8} {
				got := make([]float32, len(idx))
				kernels.LinearGatherParallel(got, x, w, bias, idx, th)
				for i := range got {
					if got[i] != want[i] {
						t.Fatalf("%v transposed=%v threads=%d: gather[%d] = %v, want %v", dt, tr, th, i, got[i], want[i])
					}
				}
				// The same gather as two parts of one fan-out, beside a
				// part over every output.
				half := len(idx) / 2
				all := make([]int32, out)
				for i := range all {
					all[i] = int32(i)
				}
				wantAll := make([]float32, out)
				kernels.LinearGather(wantAll, x, w, nil, all)
				p0, p1, pAll := make([]float32, half), make([]float32, len(idx)-half), make([]float32, out)
				kernels.LinearGatherParts(x, []kernels.GatherPart{
					{Y: p0, W: w, Bias: bias, Idx: idx[:half]},
					{Y: pAll, W: w, Idx: all},
					{Y: p1, W: w, Bias: bias, Idx: idx[half:]},
				}, th)
				require.Equal(t, want, append(p0, p1...), "%v transposed=%v threads=%d: parts", dt, tr, th)
				require.Equal(t, wantAll, pAll, "%v transposed=%v threads=%d: part over every output", dt, tr, th)
				gotS := make([]float32, in)
				kernels.LinearScatterInParallel(gotS, h, wt, nil, inIdx, th)
				for i := range gotS {
					if gotS[i] != wantS[i] {
						t.Fatalf("%v transposed=%v threads=%d: scatter[%d] = %v, want %v", dt, !tr, th, i, gotS[i], wantS[i])
					}
				}
			}
		}
	}
}
