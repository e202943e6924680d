package sparsity

import (
	"fmt"
	"math"
	"slices"
	"testing"
)

// topKKeys keeps exactly the set a full sort by ranksBefore keeps, for sizes
// from 1 to 3072 (the OPT-125M MLP width), many ties, ±0, ±Inf and NaN.
func TestTopKKeysMatchesFullSort(t *testing.T) {
	r := testRand(41)
	for trial := 0; trial < 400; trial++ {
		n := 1 + r.IntN(100)
		if trial%50 == 0 {
			n = 3072
		}
		vals := make([]float32, n)
		levels := 1 + r.IntN(8)
		for i := range vals {
			switch r.IntN(20) {
			case 0:
				vals[i] = float32(math.NaN())
			case 1:
				vals[i] = float32(math.Copysign(0, -1))
			case 2:
				vals[i] = float32(math.Inf(1 - 2*r.IntN(2)))
			default:
				if trial%2 == 0 {
					vals[i] = float32(r.IntN(levels)) - 3
				} else {
					vals[i] = float32(r.NormFloat64())
				}
			}
		}
		k := r.IntN(n + 1)
		checkTopK(t, fmt.Sprintf("trial %d", trial), vals, k)
	}
}

// checkTopK fails t unless topKKeys keeps exactly the first k of a full
// sort of vals by ranksBefore.
func checkTopK(t *testing.T, name string, vals []float32, k int) {
	t.Helper()
	n := len(vals)
	order := make([]int32, n)
	for i := range order {
		order[i] = int32(i)
	}
	slices.SortFunc(order, func(a, b int32) int {
		if ranksBefore(vals, a, b) {
			return -1
		}
		if ranksBefore(vals, b, a) {
			return 1
		}
		return 0
	})
	want := slices.Sorted(slices.Values(order[:k]))
	// Both collections: appending (no room) and branch-free (room for n).
	for _, dst := range [][]int32{nil, make([]int32, 0, n)} {
		got := topKKeys(dst, make([]uint64, 2*n), vals, k)
		if !slices.Equal(got, want) && !(len(got) == 0 && len(want) == 0) {
			t.Fatalf("%s: n %d k %d (dst room %d): kept %v, full sort %v", name, n, k, cap(dst), got, want)
		}
	}
}

// On inputs large enough for topKSampled's threshold, the kept set is
// still exactly the full sort's, on layouts that drive each of its paths:
// random scores (the threshold lets about 1.5·k keys through), the largest
// values all on sampled places (fewer than k pass, so it selects among all
// keys), all off them (many pass), sorted runs, ties and signed zeros.
func TestTopKKeysSampledThreshold(t *testing.T) {
	r := testRand(43)
	// A slice, not a map: the layouts draw from one generator in a fixed
	// order, so every run tests the same inputs.
	layouts := []struct {
		name string
		f    func(i, n int) float32
	}{
		{"normal", func(i, n int) float32 { return float32(r.NormFloat64()) }},
		{"on-samples", func(i, n int) float32 { return float32(keep(i%sampleStride == 0))*100 + float32(r.NormFloat64()) }},
		{"off-samples", func(i, n int) float32 { return float32(keep(i%sampleStride != 0))*100 + float32(r.NormFloat64()) }},
		{"ascending", func(i, n int) float32 { return float32(i) }},
		{"descending", func(i, n int) float32 { return float32(n - i) }},
		{"ties", func(i, n int) float32 { return float32(r.IntN(3)) - 1 }},
		{"zeros", func(i, n int) float32 { return float32(math.Copysign(0, float64(r.IntN(2))-0.5)) }},
		{"one-sign", func(i, n int) float32 { return -float32(math.Abs(r.NormFloat64())) }},
	}
	for _, l := range layouts {
		for _, n := range []int{sampleMin, 1000, 3072, 4096} {
			vals := make([]float32, n)
			for i := range vals {
				vals[i] = l.f(i, n)
			}
			for _, k := range []int{1, 2, sampleStride, n / 10, n/2 - 1, n / 2, n/2 + 1, 1 + r.IntN(n/2)} {
				checkTopK(t, l.name, vals, k)
			}
		}
	}
}

// BenchmarkTopKKeys selects a decode step's kept neurons: 307 of 3072
// predictor scores (the OPT-125M MLP at 10%), and 154 of 3072 (5%). Each
// call gets other scores (64 vectors in turn): on one repeated vector the
// branch predictor learns the quickselect's branches, which real scores
// never allow.
func BenchmarkTopKKeys(b *testing.B) {
	r := testRand(5)
	vecs := make([][]float32, 64)
	for v := range vecs {
		vecs[v] = make([]float32, 3072)
		for i := range vecs[v] {
			vecs[v][i] = float32(r.NormFloat64())
		}
	}
	scratch := make([]uint64, 2*3072)
	dst := make([]int32, 0, 3072)
	for _, k := range []int{307, 154} {
		b.Run(fmt.Sprint(k), func(b *testing.B) {
			for i := range b.N {
				dst = topKKeys(dst, scratch, vecs[i%len(vecs)], k)
			}
		})
	}
}

// kthLargestSpare finds the k-th largest of distinct keys for every k, on
// sizes around its hand-over to kthLargest and above, with keys drawn at
// random, sorted either way, and crowded into a narrow range.
func TestKthLargestSpareMatchesSort(t *testing.T) {
	r := testRand(47)
	for _, n := range []int{1, 2, selectSmall, selectSmall + 1, 100, 777} {
		for _, layout := range []string{"random", "ascending", "descending", "narrow"} {
			keys := make([]uint64, n)
			for i := range keys {
				switch layout {
				case "random":
					keys[i] = r.Uint64()
				case "ascending":
					keys[i] = uint64(i)
				case "descending":
					keys[i] = uint64(n - i)
				case "narrow":
					keys[i] = 1<<40 + uint64(r.IntN(4))<<32 + uint64(i)
				}
			}
			sorted := slices.Clone(keys)
			slices.Sort(sorted)
			for k := 1; k <= n; k++ {
				a := slices.Clone(keys)
				got := kthLargestSpare(a, make([]uint64, n), k)
				if want := sorted[n-k]; got != want {
					t.Fatalf("%s n %d k %d: got %#x, want %#x", layout, n, k, got, want)
				}
			}
		}
	}
}
