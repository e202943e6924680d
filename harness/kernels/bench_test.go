package kernels_test

import (
	"fmt"
	"runtime"
	"testing"

	"sparsegate/harness/kernels"
)

// reportGFLOPS records 2·m·k·n floating-point operations per iteration.
func reportGFLOPS(b *testing.B, m, k, n int) {
	b.Helper()
	flops := 2 * float64(m) * float64(k) * float64(n) * float64(b.N)
	b.ReportMetric(flops/b.Elapsed().Seconds()/1e9, "GFLOPS")
}

// benchMat returns an n×k (Out×In) matrix of the given dtype.
func benchMat(dt kernels.DType, out, in int, transposed bool) *kernels.Mat {
	w, _ := testMat(newRand(99), dt, out, in, transposed)
	return w
}

var gemmBenchShapes = []struct{ m, k, n int }{{512, 768, 3072}, {512, 3072, 768}}

func BenchmarkGemm(b *testing.B) {
	threads := runtime.GOMAXPROCS(0)
	for _, sh := range gemmBenchShapes {
		b.Run(fmt.Sprintf("%dx%dx%d", sh.m, sh.k, sh.n), func(b *testing.B) {
			r := newRand(1)
			a, bb := randVec(r, sh.m*sh.k), randVec(r, sh.k*sh.n)
			c := make([]float32, sh.m*sh.n)
			b.ResetTimer()
			for range b.N {
				kernels.Gemm(c, a, bb, sh.m, sh.k, sh.n, threads)
			}
			reportGFLOPS(b, sh.m, sh.k, sh.n)
		})
	}
}

func BenchmarkLinearF16(b *testing.B) {
	threads := runtime.GOMAXPROCS(0)
	for _, sh := range gemmBenchShapes {
		for _, tr := range []bool{false, true} {
			b.Run(fmt.Sprintf("%dx%dx%d_T%v", sh.m, sh.k, sh.n, tr), func(b *testing.B) {
				w := benchMat(kernels.F16, sh.n, sh.k, tr)
				x := randVec(newRand(2), sh.m*sh.k)
				y := make([]float32, sh.m*sh.n)
				b.ResetTimer()
				for range b.N {
					kernels.Linear(y, x, sh.m, w, nil, threads)
				}
				reportGFLOPS(b, sh.m, sh.k, sh.n)
			})
		}
	}
}

func BenchmarkGEMV(b *testing.B) {
	const in, out = 768, 3072
	threads := runtime.GOMAXPROCS(0)
	for _, dt := range []kernels.DType{kernels.F32, kernels.F16} {
		for _, tr := range []bool{false, true} {
			b.Run(fmt.Sprintf("%v_T%v", dt, tr), func(b *testing.B) {
				w := benchMat(dt, out, in, tr)
				x := randVec(newRand(3), in)
				y := make([]float32, out)
				b.ResetTimer()
				for range b.N {
					kernels.Linear(y, x, 1, w, nil, threads)
				}
				reportGFLOPS(b, 1, in, out)
			})
		}
	}
}

// BenchmarkNaive is the triple-loop twin of the benchmarks above, at a
// smaller size so that it finishes quickly.
func BenchmarkNaive(b *testing.B) {
	for _, sh := range []struct{ m, k, n int }{{64, 768, 768}, {1, 768, 3072}} {
		b.Run(fmt.Sprintf("%dx%dx%d", sh.m, sh.k, sh.n), func(b *testing.B) {
			r := newRand(4)
			a, bb := randVec(r, sh.m*sh.k), randVec(r, sh.k*sh.n)
			c := make([]float32, sh.m*sh.n)
			b.ResetTimer()
			for range b.N {
				for i := 0; i < sh.m; i++ {
					for j := 0; j < sh.n; j++ {
						var acc float32
						for p := 0; p < sh.k; p++ {
							acc += float32(a[i*sh.k+p] * bb[p*sh.n+j])
						}
						c[i*sh.n+j] = acc
					}
				}
			}
			reportGFLOPS(b, sh.m, sh.k, sh.n)
		})
	}
}
