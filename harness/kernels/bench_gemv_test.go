package kernels_test

import (
	"fmt"
	"slices"
	"testing"

	"sparsegate/harness/kernels"
)

// reportWeightGBs records the weight bytes read per iteration as GB/s.
func reportWeightGBs(b *testing.B, bytes int) {
	b.Helper()
	b.ReportMetric(float64(bytes)*float64(b.N)/b.Elapsed().Seconds()/1e9, "GB/s")
}

// weightBytes is the stored size of rows×in weights of dtype dt.
func weightBytes(dt kernels.DType, rows, in int) int {
	if dt == kernels.F32 {
		return 4 * rows * in
	}
	return 2 * rows * in
}

// logGEMVKernel prints which row-dot kernel weights of dtype dt run on.
func logGEMVKernel(b *testing.B, dt kernels.DType) {
	b.Helper()
	b.Logf("%v weights: %s", dt, kernels.GEMVKernel(dt))
}

// gemvShapes are the Out×In projections of a 125M-parameter decoder with
// width 768 and MLP width 3072: fc1, fc2 and the attention projections.
var gemvShapes = []struct{ in, out int }{{768, 3072}, {3072, 768}, {768, 768}}

// BenchmarkGEMVRows times the m == 1 row-dot path (Out×In storage) in one
// goroutine, so that it measures the kernel rather than the scheduler.
func BenchmarkGEMVRows(b *testing.B) { benchGEMV(b, false) }

// BenchmarkGEMVPanels times the m == 1 path the engine runs on its weights
// (the k-major panel copy) in one goroutine, on the same shapes and dtypes.
// The 768-wide matrices stay in cache here, so it measures the kernel's
// arithmetic; a decode step streams them from memory.
func BenchmarkGEMVPanels(b *testing.B) { benchGEMV(b, true) }

// benchGEMV runs Linear with m == 1 over gemvShapes and every dtype, with or
// without the panel copy, and reports GB/s of weights read.
func benchGEMV(b *testing.B, panels bool) {
	for _, sh := range gemvShapes {
		for _, dt := range allDTypes {
			b.Run(fmt.Sprintf("%dto%d_%v", sh.in, sh.out, dt), func(b *testing.B) {
				w := benchMat(dt, sh.out, sh.in, false)
				if panels {
					w.Panels = kernels.PackPanels(w)
				} else {
					logGEMVKernel(b, dt)
				}
				x := randVec(newRand(5), sh.in)
				y := make([]float32, sh.out)
				b.ResetTimer()
				for range b.N {
					kernels.Linear(y, x, 1, w, nil, 1)
				}
				reportWeightGBs(b, weightBytes(dt, sh.out, sh.in))
			})
		}
	}
}

// BenchmarkGEMVGather times LinearGather over a 3072×768 up-projection with
// every tenth row kept (307 rows, the sparse MLP's typical density).
func BenchmarkGEMVGather(b *testing.B) {
	const in, out = 768, 3072
	idx := everyTenth(out)
	for _, dt := range allDTypes {
		b.Run(fmt.Sprintf("%dof%d_%v", len(idx), out, dt), func(b *testing.B) {
			logGEMVKernel(b, dt)
			w := benchMat(dt, out, in, false)
			x := randVec(newRand(6), in)
			y := make([]float32, len(idx))
			b.ResetTimer()
			for range b.N {
				kernels.LinearGather(y, x, w, nil, idx)
			}
			reportWeightGBs(b, weightBytes(dt, len(idx), in))
		})
	}
}

// BenchmarkGEMVScatterIn times LinearScatterIn over the neuron-major copy of
// a 768×3072 down projection with every tenth input kept (307 rows of 768,
// the sparse MLP's second product), in one goroutine.
func BenchmarkGEMVScatterIn(b *testing.B) {
	const in, out = 3072, 768
	idx := everyTenth(in)
	for _, dt := range allDTypes {
		b.Run(fmt.Sprintf("%dof%d_%v", len(idx), in, dt), func(b *testing.B) {
			w := benchMat(dt, out, in, true)
			h := randVec(newRand(7), len(idx))
			y := make([]float32, out)
			b.ResetTimer()
			for range b.N {
				kernels.LinearScatterIn(y, h, w, nil, idx)
			}
			reportWeightGBs(b, weightBytes(dt, len(idx), out))
		})
	}
}

// everyTenth returns 0, 10, 20, … below n: the kept rows of the sparse
// benchmarks (the sparse MLP's typical 10%).
func everyTenth(n int) []int32 {
	var idx []int32
	for j := 0; j < n; j += 10 {
		idx = append(idx, int32(j))
	}
	return idx
}

// BenchmarkSparseMLPFromMemory times the sparse MLP's two products on
// weights that come from main memory, as in a real decode step (the other
// gather benchmarks keep their one matrix in cache): 40 layers' f16 up
// projections (3072×768) and neuron-major down projections (3072 rows of
// 768), 377 MB in all, visited in turn, each with its own 307 kept
// neurons drawn at random. Compare its GB/s with BenchmarkGEMVPanels' dense
// stream from memory (.ci/bench's decode row).
func BenchmarkSparseMLPFromMemory(b *testing.B) {
	const d, ffn, layers, keep = 768, 3072, 40, 307
	r := newRand(11)
	ups, downs := make([]*kernels.Mat, layers), make([]*kernels.Mat, layers)
	idxs := make([][]int32, layers)
	for l := range layers {
		up := make([]uint16, ffn*d)
		for i := range up {
			up[i] = 0x3000 + uint16((i*7+l)%1024)
		}
		down := make([]uint16, ffn*d)
		copy(down, up)
		ups[l] = &kernels.Mat{DType: kernels.F16, Out: ffn, In: d, Half: up}
		downs[l] = &kernels.Mat{DType: kernels.F16, Out: d, In: ffn, Transposed: true, Half: down}
		perm := r.Perm(ffn)[:keep]
		slices.Sort(perm)
		for _, p := range perm {
			idxs[l] = append(idxs[l], int32(p))
		}
	}
	x := randVec(r, d)
	hid, y := make([]float32, keep), make([]float32, d)
	b.Run("gather", func(b *testing.B) {
		for i := range b.N {
			kernels.LinearGather(hid, x, ups[i%layers], nil, idxs[i%layers])
		}
		reportWeightGBs(b, weightBytes(kernels.F16, keep, d))
	})
	b.Run("scatter", func(b *testing.B) {
		for i := range b.N {
			kernels.LinearScatterIn(y, hid, downs[i%layers], nil, idxs[i%layers])
		}
		reportWeightGBs(b, weightBytes(kernels.F16, keep, d))
	})
}
