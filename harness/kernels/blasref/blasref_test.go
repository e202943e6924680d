//go:build openblas && cgo

package blasref

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"sparsegate/harness/kernels"
)

// threads is the thread count of both sides, ours and OpenBLAS's, as in
// every comparison .ci/bench prints.
const threads = 2

func randMat(r *rand.Rand, n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = 2*r.Float32() - 1
	}
	return v
}

// The project's GEMM agrees with OpenBLAS's cblas_sgemm (Debian
// libopenblas-dev 0.3.21, the reference) on the benchmark shapes and on
// ragged ones. The two sum in different orders (OpenBLAS with fused
// multiply-adds), so they are compared with the textbook forward error bound
// of a float32 dot product of length k, |fl(x·y) − x·y| ≤ γ_k Σ|x_i·y_i| with
// γ_k = k·u/(1−k·u), u = 2⁻²⁴ (common practice, no source; recalled from
// memory): each side is within it of the exact value, so they are within
// twice it of each other.
func TestAgreesWithOpenBLAS(t *testing.T) {
	SetThreads(threads)
	r := rand.New(rand.NewPCG(1, 2))
	shapes := append(slices.Clone(benchShapes), [3]int{1, 768, 3072}, [3]int{37, 129, 65}, [3]int{5, 1, 3}, [3]int{64, 300, 17})
	for _, sh := range shapes {
		m, k, n := sh[0], sh[1], sh[2]
		a, b := randMat(r, m*k), randMat(r, k*n)
		ours, ref := make([]float32, m*n), make([]float32, m*n)
		kernels.Gemm(ours, a, b, m, k, n, threads)
		Sgemm(ref, a, b, m, k, n)
		const u = 1.0 / (1 << 24)
		gamma := float64(k) * u / (1 - float64(k)*u)
		worst := 0.0 // largest |Δ| / bound
		for i := range m {
			for j := range n {
				abs := 0.0
				for p := range k {
					abs += math.Abs(float64(a[i*k+p]) * float64(b[p*n+j]))
				}
				d := math.Abs(float64(ours[i*n+j]) - float64(ref[i*n+j]))
				bound := 2 * gamma * abs
				if d > bound {
					t.Fatalf("%dx%dx%d: C[%d][%d] = %v, OpenBLAS %v: |Δ| %.3g exceeds the bound %.3g", m, k, n, i, j, ours[i*n+j], ref[i*n+j], d, bound)
				}
				if bound > 0 {
					worst = max(worst, d/bound)
				}
			}
		}
		t.Logf("%dx%dx%d: largest |Δ| is %.3f of the bound", m, k, n, worst)
	}
}

// The bound above is tight enough to catch a wrong product: with one element
// of B off by 1, every row whose A has a non-negligible entry there lands
// outside it.
func TestBoundCatchesAWrongProduct(t *testing.T) {
	SetThreads(threads)
	r := rand.New(rand.NewPCG(3, 4))
	const m, k, n = 8, 64, 8
	a, b := randMat(r, m*k), randMat(r, k*n)
	ref := make([]float32, m*n)
	Sgemm(ref, a, b, m, k, n)
	b[5*n+2]++
	ours := make([]float32, m*n)
	kernels.Gemm(ours, a, b, m, k, n, threads)
	gamma := float64(k) / (1 << 24)
	caught := 0
	for i := range m {
		if math.Abs(float64(a[i*k+5])) < 1e-2 {
			continue
		}
		abs := 0.0
		for p := range k {
			abs += math.Abs(float64(a[i*k+p]) * float64(b[p*n+2]))
		}
		if d := math.Abs(float64(ours[i*n+2]) - float64(ref[i*n+2])); d <= 2*gamma*abs {
			t.Fatalf("row %d: the changed B went unnoticed (|Δ| %.3g, bound %.3g)", i, d, 2*gamma*abs)
		}
		caught++
	}
	if caught == 0 {
		t.Fatal("no row had a usable entry; change the seed")
	}
}

// benchShapes are M×K×N: OPT-125M's MLP and attention products over 512
// rows, then the demo model's (width 128, MLP 512, vocabulary 2048; see
// suites/demo/model/config.json) over a 256-token window.
var benchShapes = [][3]int{
	{512, 768, 3072}, {512, 3072, 768}, {512, 768, 768},
	{256, 128, 128}, {256, 128, 512}, {256, 512, 128}, {256, 128, 2048},
}

// BenchmarkGemmVsOpenBLAS runs the project's GEMM (B packed on every call)
// and OpenBLAS's cblas_sgemm on the same inputs, both on 2 threads, and
// reports each side's GFLOPS from the median of its calls' times and their
// ratio (ours/OpenBLAS). It also times the product the engine runs on its
// weights: the same B as a kernels.Mat carrying its panel copy
// (kernels.PackPanels, made once as the engine does at load, outside the
// timing), reported as prepacked-GFLOPS and prepacked-ratio. Read it with
// -benchtime Nx: N rounds.
//
// Each side runs as it does in use, its thread pool warm: ours through a
// kernels.Scratch with a Team of threads-1 helper goroutines (as
// engine.Load sets one up), OpenBLAS through its own pool. A round gives
// each side a phase of back-to-back calls, the sides in an order that
// swaps every round: phaseWarm of untimed calls first (the other side's
// idle threads stop polling for work and sleep, this side's wake up), then
// phaseTimed of calls, each timed. Timing single calls alternately instead
// made every call pay for waking its side's threads, which at the demo
// model's small shapes timed thread start-up more than arithmetic.
// .ci/bench runs it with OPENBLAS_THREAD_TIMEOUT=24 (OpenBLAS's threads
// then poll about 2²⁴ cycles, a few milliseconds, after each call: warm
// through a phase, asleep well within the next phase's warm-up; the
// variable's meaning is recalled from memory, not looked up).
func BenchmarkGemmVsOpenBLAS(b *testing.B) {
	SetThreads(threads)
	if got := Threads(); got != threads {
		b.Fatalf("OpenBLAS runs %d threads, want %d", got, threads)
	}
	b.Logf("OpenBLAS: %s", Config())
	for _, sh := range benchShapes {
		m, k, n := sh[0], sh[1], sh[2]
		b.Run(fmt.Sprintf("%dx%dx%d", m, k, n), func(b *testing.B) {
			r := rand.New(rand.NewPCG(5, 6))
			a, bb := randMat(r, m*k), randMat(r, k*n)
			c1, c2, c3 := make([]float32, m*n), make([]float32, m*n), make([]float32, m*n)
			s := kernels.Scratch{Team: kernels.NewTeam(threads - 1)}
			sc := kernels.Scratch{Team: kernels.NewTeam(threads - 1)}
			defer s.Team.Close()
			defer sc.Team.Close()
			plain := &kernels.Mat{DType: kernels.F32, Out: n, In: k, Transposed: true, F32: bb}
			ours := func() { sc.Linear(c1, a, m, plain, nil, threads) }
			ref := func() { Sgemm(c2, a, bb, m, k, n) }
			w := &kernels.Mat{DType: kernels.F32, Out: n, In: k, Transposed: true, F32: bb}
			w.Panels = kernels.PackPanels(w)
			packed := func() { s.Linear(c3, a, m, w, nil, threads) }
			ours() // warm-up: caches, OpenBLAS's thread pool
			ref()
			packed()
			c4 := make([]float32, m*n)
			kernels.Gemm(c4, a, bb, m, k, n, threads)
			if !slices.Equal(c1, c3) || !slices.Equal(c1, c4) {
				b.Fatal("the pre-packed, per-call and kernels.Gemm products differ")
			}
			var to, tr, tp []time.Duration
			phase := func(f func(), into *[]time.Duration) {
				for t0 := time.Now(); time.Since(t0) < phaseWarm; {
					f()
				}
				for t0 := time.Now(); time.Since(t0) < phaseTimed; {
					c0 := time.Now()
					f()
					*into = append(*into, time.Since(c0))
				}
			}
			b.ResetTimer()
			for i := range b.N {
				if i%2 == 0 {
					phase(ours, &to)
					phase(ref, &tr)
					phase(packed, &tp)
				} else {
					phase(packed, &tp)
					phase(ref, &tr)
					phase(ours, &to)
				}
			}
			b.StopTimer()
			flop := 2 * float64(m) * float64(k) * float64(n)
			go1, gr := flop/median(to).Seconds()/1e9, flop/median(tr).Seconds()/1e9
			gp := flop / median(tp).Seconds() / 1e9
			b.ReportMetric(go1, "ours-GFLOPS")
			b.ReportMetric(gr, "openblas-GFLOPS")
			b.ReportMetric(go1/gr, "ratio")
			b.ReportMetric(gp, "prepacked-GFLOPS")
			b.ReportMetric(gp/gr, "prepacked-ratio")
		})
	}
}

// The phases of BenchmarkGemmVsOpenBLAS: untimed calls, then timed ones.
const (
	phaseWarm  = 50 * time.Millisecond
	phaseTimed = 150 * time.Millisecond
)

func median(d []time.Duration) time.Duration {
	s := slices.Clone(d)
	slices.Sort(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}
