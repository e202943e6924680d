package kernels

import (
	"math"
	"math/rand/v2"
	"testing"
)

// LayerNorm's block passes (assembly where the CPU has it) give the Go
// twins' bits, for every combination of gamma and beta, lengths around the
// blocks of eight, and special values among the inputs.
func TestLayerNormBlocksMatchGoTwin(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	special := []float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Copysign(0, -1)), 1e-42, 3e38}
	for _, n := range []int{8, 16, 24, 128, 768} {
		for trial := range 3 {
			x := make([]float32, n)
			gamma, beta := make([]float32, n), make([]float32, n)
			for i := range x {
				x[i] = float32(r.NormFloat64()*2 + 0.5)
				gamma[i], beta[i] = float32(r.NormFloat64()), float32(r.NormFloat64())
			}
			if trial == 2 {
				x[r.IntN(n)] = special[r.IntN(len(special))]
				beta[r.IntN(n)] = float32(math.Copysign(0, -1))
			}
			var a, b [8]float64
			lnSumBlocks(x, &a)
			lnSumGo(x, &b)
			if !lanesEqual(&a, &b) {
				t.Fatalf("n=%d: sum lanes %v, Go twin %v", n, a, b)
			}
			mean := sum8(&a) / float64(n)
			a, b = [8]float64{}, [8]float64{}
			lnSqBlocks(x, mean, &a)
			lnSqGo(x, mean, &b)
			if !lanesEqual(&a, &b) {
				t.Fatalf("n=%d: square lanes %v, Go twin %v", n, a, b)
			}
			inv := 1 / math.Sqrt(sum8(&a)/float64(n)+1e-5)
			for _, gb := range [][2][]float32{{nil, nil}, {gamma, nil}, {nil, beta}, {gamma, beta}} {
				got, want := make([]float32, n), make([]float32, n)
				lnApplyBlocks(got, x, mean, inv, gb[0], gb[1])
				lnApplyGo(want, x, mean, inv, gb[0], gb[1])
				for i := range got {
					if math.Float32bits(got[i]) != math.Float32bits(want[i]) && !(got[i] != got[i] && want[i] != want[i]) {
						t.Fatalf("n=%d gamma %v beta %v [%d]: %v, Go twin %v", n, gb[0] != nil, gb[1] != nil, i, got[i], want[i])
					}
				}
			}
		}
	}
}

// lanesEqual compares lane sums bit for bit, any NaN equal to any NaN.
func lanesEqual(a, b *[8]float64) bool {
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) && !(a[i] != a[i] && b[i] != b[i]) {
			return false
		}
	}
	return true
}
