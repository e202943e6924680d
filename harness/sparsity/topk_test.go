package sparsity

import (
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
		got := topKKeys(nil, make([]uint64, 2*n), vals, k)
		if !slices.Equal(got, want) && !(len(got) == 0 && len(want) == 0) {
			t.Fatalf("trial %d n %d k %d: kept %v, full sort %v", trial, n, k, got, want)
		}
	}
}
