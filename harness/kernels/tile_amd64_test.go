//go:build amd64 && !noasm

package kernels

import (
	"math"
	"math/rand/v2"
	"testing"
)

// The AVX2 micro-kernel gives exactly the bits of its Go twin, including
// NaN and infinity propagation and signed zeros, for every k extent the
// blocking produces; and it writes nothing outside the tile.
func TestAVX2MicroKernelMatchesGoTwin(t *testing.T) {
	if !hasAVX2 {
		t.Skip("this CPU has no AVX2")
	}
	r := rand.New(rand.NewPCG(1, 2))
	for _, kc := range []int{1, 2, 3, 7, 16, 100, kcBlock} {
		a := make([]float32, kc*mr+8)
		b := make([]float32, kc*nr+8)
		for i := range a {
			a[i] = float32(r.NormFloat64())
		}
		for i := range b {
			b[i] = float32(r.NormFloat64() * 1e3)
		}
		if kc > 2 {
			a[1] = float32(math.NaN())
			b[5] = float32(math.Inf(1))
			a[mr+2] = float32(math.Copysign(0, -1))
		}
		var want, got [mr * nr]float32
		for i := range want {
			want[i] = float32(r.NormFloat64())
			got[i] = want[i]
		}
		gemmMicroGo(kc, a[:kc*mr], b[:kc*nr], &want)
		gemmMicroAVX2(kc, &a[0], &b[0], &got)
		for i := range want {
			if math.Float32bits(want[i]) != math.Float32bits(got[i]) && !(want[i] != want[i] && got[i] != got[i]) {
				t.Fatalf("kc %d, element %d: go %v (%08x), avx2 %v (%08x)", kc, i, want[i], math.Float32bits(want[i]), got[i], math.Float32bits(got[i]))
			}
		}
	}
}
