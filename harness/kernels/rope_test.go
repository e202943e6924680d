package kernels_test

import (
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

func TestRopeInvFreq(t *testing.T) {
	for _, c := range []struct {
		d     int
		theta float64
	}{{64, 10000}, {128, 500000}, {2, 10000}} {
		inv := kernels.RopeInvFreq(c.d, c.theta)
		if len(inv) != c.d/2 {
			t.Fatalf("len = %d, want %d", len(inv), c.d/2)
		}
		if inv[0] != 1 {
			t.Fatalf("inv_freq[0] = %v, want 1", inv[0])
		}
		for i, v := range inv {
			// Definition 1/θ^(2i/d) (common practice, no source).
			want := 1 / math.Pow(c.theta, float64(2*i)/float64(c.d))
			if math.Abs(float64(v)-want) > 4e-7*want {
				t.Fatalf("d=%d θ=%v inv_freq[%d] = %v, want %v", c.d, c.theta, i, v, want)
			}
			if i > 0 && !(v < inv[i-1]) {
				t.Fatalf("inv_freq not decreasing at %d", i)
			}
		}
	}
}

func TestRope(t *testing.T) {
	r := newRand(60)
	const headDim, heads = 16, 3
	inv := kernels.RopeInvFreq(headDim, 10000)
	for _, pos := range []int{0, 1, 7, 1000} {
		x := randVec(r, headDim*heads)
		x0 := clone32(x)
		kernels.Rope(x, headDim, pos, inv)
		half := headDim / 2
		for h := 0; h < heads; h++ {
			for i := 0; i < half; i++ {
				a, b := float64(x0[h*headDim+i]), float64(x0[h*headDim+i+half])
				ang := float64(pos) * float64(inv[i])
				// Rotation of (a, b) by ang in the half-split layout (common practice, no source).
				wa := a*math.Cos(ang) - b*math.Sin(ang)
				wb := b*math.Cos(ang) + a*math.Sin(ang)
				ga, gb := float64(x[h*headDim+i]), float64(x[h*headDim+i+half])
				// The angle is a float32 product, so allow for its rounding at large pos.
				tol := 1e-6 + 1e-7*float64(pos)
				if math.Abs(ga-wa) > tol || math.Abs(gb-wb) > tol {
					t.Fatalf("pos %d head %d pair %d: (%v, %v), want (%v, %v)", pos, h, i, ga, gb, wa, wb)
				}
				// A rotation keeps the pair's length.
				if d := math.Hypot(ga, gb) - math.Hypot(a, b); math.Abs(d) > 1e-6 {
					t.Fatalf("pos %d: length changed by %v", pos, d)
				}
			}
		}
		if pos == 0 && bitsEqual(x, x0) >= 0 {
			t.Fatalf("pos 0 must leave x unchanged")
		}
	}
}
