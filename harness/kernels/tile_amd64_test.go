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

// F16C conversion equals the Go twin on every binary16 value (NaNs stay
// NaN with the same sign), at every length and offset around a block.
func TestF16CConversionMatchesGoTwin(t *testing.T) {
	if !hasF16C {
		t.Skip("this CPU has no F16C")
	}
	src := make([]uint16, 1<<16)
	for i := range src {
		src[i] = uint16(i)
	}
	want := make([]float32, len(src))
	got := make([]float32, len(src)+1)
	f16ToF32Go(want, src)
	got[len(src)] = 42 // guard
	f16ToF32Slice(got[:len(src)], src)
	require := func(cond bool, format string, args ...any) {
		if !cond {
			t.Fatalf(format, args...)
		}
	}
	require(got[len(src)] == 42, "wrote past the end")
	for i := range src {
		w, g := want[i], got[i]
		if w != w {
			require(g != g && math.Signbit(float64(g)) == math.Signbit(float64(w)), "half %04x: go NaN, f16c %v", i, g)
			continue
		}
		require(math.Float32bits(w) == math.Float32bits(g), "half %04x: go %v, f16c %v", i, w, g)
	}
	for n := 0; n < 20; n++ {
		d := make([]float32, n)
		f16ToF32Slice(d, src[1000:1000+n])
		for i := range d {
			require(d[i] == want[1000+i], "length %d, element %d", n, i)
		}
	}
}

// The AVX2 axpy gives the Go twin's bits at every length, and writes
// nothing past y.
func TestAVX2AxpyMatchesGoTwin(t *testing.T) {
	if !hasAVX2 {
		t.Skip("this CPU has no AVX2")
	}
	r := rand.New(rand.NewPCG(3, 4))
	for n := 0; n < 70; n++ {
		x := make([]float32, n)
		y0 := make([]float32, n+1)
		for i := range x {
			x[i] = float32(r.NormFloat64())
			y0[i] = float32(r.NormFloat64())
		}
		y0[n] = 7
		want := append([]float32(nil), y0...)
		got := append([]float32(nil), y0...)
		alpha := float32(r.NormFloat64())
		axpyGo(alpha, x, want[:n])
		axpyAcc(alpha, x, got[:n])
		for i := range want {
			if math.Float32bits(want[i]) != math.Float32bits(got[i]) {
				t.Fatalf("n %d, element %d: go %v, avx2 %v", n, i, want[i], got[i])
			}
		}
	}
}
