package kernels

import (
	"math"
	"math/rand/v2"
	"testing"
)

// exp32 against math.Exp over its whole domain: every float32 in [−87.3, 0]
// reached by stepping the bit pattern (about 33 million values would take
// too long, so every 97th pattern), within 2 ulp of the correctly rounded
// value. math.Exp is the reference (the Go standard library's double
// precision exponential, far more precise than the float32 result).
func TestExp32Accuracy(t *testing.T) {
	worst := 0.0
	for b := uint32(0x80000000); b <= math.Float32bits(expLo); b += 97 {
		x := math.Float32frombits(b)
		if x < expLo {
			break
		}
		got := float64(exp32(x))
		want := math.Exp(float64(x))
		ulp := float64(math.Nextafter32(float32(want), 2)) - float64(float32(want))
		if e := math.Abs(got-want) / ulp; e > worst {
			worst = e
		}
	}
	if worst > 2 {
		t.Fatalf("exp32 is off by %.2f ulp at worst, want <= 2", worst)
	}
	t.Logf("exp32 worst error %.3f ulp", worst)
	for _, x := range []float32{0, float32(math.Copysign(0, -1))} {
		if got := exp32(x); got != 1 {
			t.Fatalf("exp32(%v) = %v, want 1", x, got)
		}
	}
	for _, x := range []float32{float32(math.Inf(-1)), -math.MaxFloat32, -88, math.Nextafter32(expLo, -100)} {
		if got := exp32(x); got != 0 {
			t.Fatalf("exp32(%v) = %v, want 0 (below the normal range)", x, got)
		}
	}
}

// expSum and maxOrNaN give the Go twins' bits on every length, with and
// without dst, including −Inf entries and entries far below the maximum.
func TestExpSumMatchesGoTwin(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for _, n := range []int{1, 7, 8, 9, 16, 63, 64, 65, 300, 1031} {
		x := make([]float32, n)
		for i := range x {
			x[i] = float32(r.NormFloat64() * 30)
			switch r.IntN(20) {
			case 0:
				x[i] = float32(math.Inf(-1))
			case 1:
				x[i] = -1e30
			}
		}
		m := float32(maxOrNaN(x))
		var lanesWant [8]float32
		if n >= 8 {
			var lanesGot [8]float32
			if maxLanes(x[:n&^7], &lanesGot) || maxLanesGo(x[:n&^7], &lanesWant) {
				t.Fatalf("n=%d: NaN reported without one", n)
			}
			if lanesGot != lanesWant {
				t.Fatalf("n=%d: max lanes %v, Go twin %v", n, lanesGot, lanesWant)
			}
		}
		mw := x[0]
		for _, v := range x {
			mw = max(mw, v)
		}
		if m != mw {
			t.Fatalf("n=%d: maxOrNaN %v, want %v", n, m, mw)
		}
		var acc [8]float64
		want := make([]float32, n)
		expSumGo(want, x, m, &acc)
		sumWant := ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]))
		got := make([]float32, n)
		if s := expSum(got, x, m); s != sumWant {
			t.Fatalf("n=%d: expSum %v, Go twin %v", n, s, sumWant)
		}
		if s := expSum(nil, x, m); s != sumWant {
			t.Fatalf("n=%d: expSum without dst %v, Go twin %v", n, s, sumWant)
		}
		for i := range got {
			if math.Float32bits(got[i]) != math.Float32bits(want[i]) {
				t.Fatalf("n=%d [%d]: exp %v, Go twin %v", n, i, got[i], want[i])
			}
			if w := float32(math.Exp(float64(x[i] - m))); math.Abs(float64(got[i]-w)) > 3e-7*float64(w)+1e-37 {
				t.Fatalf("n=%d [%d]: exp(%v) = %v, math.Exp gives %v", n, i, x[i]-m, got[i], w)
			}
		}
		// In place.
		y := append([]float32(nil), x...)
		if s := expSum(y, y, m); s != sumWant {
			t.Fatalf("n=%d: in-place expSum %v, want %v", n, s, sumWant)
		}
	}
}

// A NaN in any lane or in the tail makes maxOrNaN NaN.
func TestMaxOrNaNSeesEveryNaN(t *testing.T) {
	for _, n := range []int{1, 8, 13, 64} {
		for at := range n {
			x := make([]float32, n)
			x[at] = float32(math.NaN())
			if v := maxOrNaN(x); !math.IsNaN(v) {
				t.Fatalf("n=%d NaN at %d: maxOrNaN = %v", n, at, v)
			}
		}
	}
}
