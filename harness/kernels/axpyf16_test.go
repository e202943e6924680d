package kernels

import (
	"math"
	"testing"
)

// axpyF16Acc gives the bits of widening first and running axpyAcc, for every
// length around the eight-wide blocks, with infinities, NaN, subnormal and
// negative-zero halves among the inputs.
func TestAxpyF16IsConvertThenAxpy(t *testing.T) {
	specials := []uint16{0x7c00, 0xfc00, 0x7e00, 0x0001, 0x8000, 0x3c00, 0xc000, 0x7bff}
	next := uint32(7)
	for n := 0; n <= 41; n++ {
		x := make([]uint16, n)
		for i := range x {
			next = next*1664525 + 1013904223
			x[i] = uint16(next >> 16)
			if i%7 == 3 {
				x[i] = specials[(i/7)%len(specials)]
			}
		}
		y0 := make([]float32, n)
		for i := range y0 {
			y0[i] = float32(i)*0.37 - 3
		}
		for _, alpha := range []float32{1.5, -0.0, float32(math.Inf(1))} {
			got := append([]float32(nil), y0...)
			axpyF16Acc(alpha, x, got)
			want := append([]float32(nil), y0...)
			conv := make([]float32, n)
			f16ToF32Go(conv, x)
			axpyGo(alpha, conv, want)
			for i := range got {
				g, w := got[i], want[i]
				if g != g && w != w {
					continue // any NaN equals any NaN (payloads may differ)
				}
				if math.Float32bits(g) != math.Float32bits(w) {
					t.Fatalf("n %d alpha %v: y[%d] = %v, convert-then-axpy gives %v", n, alpha, i, g, w)
				}
			}
		}
	}
}

// axpy4F16Acc gives the bits of four axpyF16Acc calls in order.
func TestAxpy4F16IsFourAxpys(t *testing.T) {
	next := uint32(3)
	for n := 0; n <= 41; n++ {
		var x [4][]uint16
		for q := range x {
			x[q] = make([]uint16, n)
			for i := range x[q] {
				next = next*1664525 + 1013904223
				x[q][i] = uint16(next >> 16)
				if (i+q)%9 == 4 {
					x[q][i] = 0x7c00 // +Inf
				}
			}
		}
		alpha := [4]float32{1.25, -0.5, 3e-3, 7}
		y0 := make([]float32, n)
		for i := range y0 {
			y0[i] = float32(i)*0.61 - 5
		}
		got := append([]float32(nil), y0...)
		axpy4F16Acc(&alpha, &x, got)
		want := append([]float32(nil), y0...)
		for q := range 4 {
			axpyF16Acc(alpha[q], x[q], want)
		}
		for i := range got {
			if got[i] != got[i] && want[i] != want[i] {
				continue
			}
			if math.Float32bits(got[i]) != math.Float32bits(want[i]) {
				t.Fatalf("n %d: y[%d] = %v, four axpys give %v", n, i, got[i], want[i])
			}
		}
	}
}
