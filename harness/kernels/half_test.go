package kernels_test

import (
	"math"
	"slices"
	"sort"
	"testing"

	"sparsegate/harness/kernels"
)

// allPatterns returns the 65536 16-bit patterns in order.
func allPatterns() []uint16 {
	p := make([]uint16, 1<<16)
	for i := range p {
		p[i] = uint16(i)
	}
	return p
}

// checkDecode compares a decoded float32 with the reference value: equal
// bits for numbers (so the sign of zero counts), and for NaN a float32 NaN
// with the same sign.
func checkDecode(t *testing.T, kind string, h uint16, got float32, ref float64) {
	t.Helper()
	if math.IsNaN(ref) {
		if got == got || math.Signbit(float64(got)) != (h&0x8000 != 0) {
			t.Fatalf("%s %#04x: got %v, want NaN with sign %d", kind, h, got, h>>15)
		}
		return
	}
	if math.Float32bits(got) != math.Float32bits(float32(ref)) {
		t.Fatalf("%s %#04x: got %v (%#x), reference %v", kind, h, got, math.Float32bits(got), ref)
	}
	if float64(got) != ref {
		t.Fatalf("%s %#04x: reference %v is not exact in float32", kind, h, ref)
	}
}

func TestF16ToF32Exhaustive(t *testing.T) {
	src := allPatterns()
	dst := make([]float32, len(src))
	kernels.F16ToF32(dst, src)
	for i, h := range src {
		ref := refF16(h)
		checkDecode(t, "F16ToF32", h, dst[i], ref)
		checkDecode(t, "F16Value", h, kernels.F16Value(h), ref)
		if math.IsNaN(ref) {
			// The payload moves to the top of the float32 mantissa (common
			// practice, no source); the F16C instruction also sets the quiet
			// bit of a signalling NaN (IEEE 754 conversion semantics), so
			// that bit may differ between kernel paths.
			want := uint32(h&0x8000)<<16 | 0x7f800000 | uint32(h&0x3ff)<<13
			if got := math.Float32bits(dst[i]); got != want && got != want|0x400000 {
				t.Fatalf("F16ToF32 %#04x: NaN bits %#x, want %#x", h, got, want)
			}
			if got := math.Float32bits(kernels.F16Value(h)); got != want {
				t.Fatalf("F16Value %#04x: NaN bits %#x, want %#x", h, got, want)
			}
		}
	}
}

func TestBF16ToF32Exhaustive(t *testing.T) {
	src := allPatterns()
	dst := make([]float32, len(src))
	kernels.BF16ToF32(dst, src)
	for i, h := range src {
		ref := refBF16(h)
		checkDecode(t, "BF16ToF32", h, dst[i], ref)
		checkDecode(t, "BF16Value", h, kernels.BF16Value(h), ref)
	}
}

// Known binary16 encodings (IEEE 754 binary16; values recalled from memory).
func TestF16KnownValues(t *testing.T) {
	cases := []struct {
		h uint16
		v float64
	}{
		{0x3c00, 1}, {0xbc00, -1}, {0x4000, 2}, {0xc000, -2}, {0x3800, 0.5},
		{0x7bff, 65504}, {0x0400, math.Ldexp(1, -14)}, {0x03ff, math.Ldexp(1023, -24)},
		{0x0001, math.Ldexp(1, -24)}, {0x0000, 0}, {0x3555, 0.333251953125},
		{0x7c00, math.Inf(1)}, {0xfc00, math.Inf(-1)},
	}
	for _, c := range cases {
		if got := kernels.F16Value(c.h); float64(got) != c.v {
			t.Errorf("F16Value(%#04x) = %v, want %v", c.h, got, c.v)
		}
		if got := kernels.F16Bits(float32(c.v)); got != c.h {
			t.Errorf("F16Bits(%v) = %#04x, want %#04x", c.v, got, c.h)
		}
	}
	if b := kernels.F16Bits(float32(math.Copysign(0, -1))); b != 0x8000 {
		t.Errorf("F16Bits(-0) = %#04x, want 0x8000", b)
	}
}

func TestF16RoundTrip(t *testing.T) {
	src := allPatterns()
	f := make([]float32, len(src))
	back := make([]uint16, len(src))
	kernels.F16ToF32(f, src)
	kernels.F32ToF16(back, f)
	for i, h := range src {
		if h&0x7c00 == 0x7c00 && h&0x3ff != 0 {
			if back[i]&0x7c00 != 0x7c00 || back[i]&0x3ff == 0 || back[i]&0x8000 != h&0x8000 {
				t.Fatalf("NaN %#04x came back as %#04x", h, back[i])
			}
			continue
		}
		if back[i] != h {
			t.Fatalf("round trip %#04x -> %v -> %#04x", h, f[i], back[i])
		}
		if kernels.F16Bits(f[i]) != h {
			t.Fatalf("F16Bits round trip %#04x", h)
		}
	}
}

func TestBF16RoundTrip(t *testing.T) {
	src := allPatterns()
	f := make([]float32, len(src))
	back := make([]uint16, len(src))
	kernels.BF16ToF32(f, src)
	kernels.F32ToBF16(back, f)
	for i, h := range src {
		if h&0x7f80 == 0x7f80 && h&0x7f != 0 {
			if back[i]&0x7f80 != 0x7f80 || back[i]&0x7f == 0 || back[i]&0x8000 != h&0x8000 {
				t.Fatalf("NaN %#04x came back as %#04x", h, back[i])
			}
			continue
		}
		if back[i] != h {
			t.Fatalf("round trip %#04x -> %v -> %#04x", h, f[i], back[i])
		}
	}
}

// TestF16TiesToEven walks every pair of adjacent finite binary16 values of
// one sign: their exact midpoint (representable in float32) must round to
// the one with an even pattern, and the float32 neighbours of the midpoint
// to the nearer one (round to nearest, ties to even: IEEE 754-2008 4.3.1).
func TestF16TiesToEven(t *testing.T) {
	for lo := uint16(0); lo < 0x7bff; lo++ {
		for _, sign := range []uint16{0, 0x8000} {
			a, b := lo|sign, (lo+1)|sign
			va, vb := refF16(a), refF16(b)
			mid := float32((va + vb) / 2)
			if float64(mid) != (va+vb)/2 {
				t.Fatalf("midpoint of %#04x,%#04x not exact in float32", a, b)
			}
			even := a
			if a&1 == 1 {
				even = b
			}
			if got := kernels.F16Bits(mid); got != even {
				t.Fatalf("tie %v between %#04x and %#04x rounded to %#04x, want %#04x", mid, a, b, got, even)
			}
			// Towards a (smaller magnitude) and towards b.
			below := math.Nextafter32(mid, float32(va))
			above := math.Nextafter32(mid, float32(vb))
			if got := kernels.F16Bits(below); got != a {
				t.Fatalf("%v just below the tie rounded to %#04x, want %#04x", below, got, a)
			}
			if got := kernels.F16Bits(above); got != b {
				t.Fatalf("%v just above the tie rounded to %#04x, want %#04x", above, got, b)
			}
		}
	}
}

// TestF16RangeEdges covers overflow and underflow. 65520 is the midpoint
// between the largest finite value 65504 (odd pattern 0x7bff) and 2^16, so
// it and everything above round to Inf; 2^-25 is half the smallest
// subnormal and ties to zero (IEEE 754-2008 4.3.1 and 7.4; from memory).
func TestF16RangeEdges(t *testing.T) {
	cases := []struct {
		f float32
		h uint16
	}{
		{65504, 0x7bff},
		{math.Nextafter32(65520, 0), 0x7bff},
		{65520, 0x7c00},
		{-65520, 0xfc00},
		{1e10, 0x7c00},
		{float32(math.Inf(-1)), 0xfc00},
		{math.MaxFloat32, 0x7c00},
		{float32(math.Ldexp(1, -25)), 0x0000},
		{math.Nextafter32(float32(math.Ldexp(1, -25)), 1), 0x0001},
		{float32(-math.Ldexp(1, -25)), 0x8000},
		{float32(math.Ldexp(3, -25)), 0x0002}, // 1.5 ulp: tie between 1 and 2, even is 2
		{float32(math.Ldexp(1, -26)), 0x0000},
		{math.SmallestNonzeroFloat32, 0x0000},
		{-math.SmallestNonzeroFloat32, 0x8000},
		{float32(math.Ldexp(1023.5, -24)), 0x0400}, // top subnormal tie carries into the smallest normal
	}
	for _, c := range cases {
		if got := kernels.F16Bits(c.f); got != c.h {
			t.Errorf("F16Bits(%v) = %#04x, want %#04x", c.f, got, c.h)
		}
	}
}

func TestF16NaNStaysNaN(t *testing.T) {
	for _, b := range []uint32{0x7fc00000, 0xffc00000, 0x7f800001, 0x7fbfffff, 0xff800001, 0x7f802000} {
		f := math.Float32frombits(b)
		h := kernels.F16Bits(f)
		if h&0x7c00 != 0x7c00 || h&0x3ff == 0 || (h&0x8000 != 0) != (b>>31 == 1) {
			t.Errorf("F16Bits(NaN %#x) = %#04x, not a NaN of the same sign", b, h)
		}
		hb := kernels.BF16Bits(f)
		if hb&0x7f80 != 0x7f80 || hb&0x7f == 0 || (hb&0x8000 != 0) != (b>>31 == 1) {
			t.Errorf("BF16Bits(NaN %#x) = %#04x, not a NaN of the same sign", b, hb)
		}
	}
}

// refToF16 rounds f to binary16 by search over all finite positive values
// (round to nearest, ties to even; IEEE 754-2008 4.3.1), with |f| >= 65520
// going to Inf (the overflow rule, see TestF16RangeEdges).
func refToF16(f float32, finite []float64) uint16 {
	v := float64(f)
	var sign uint16
	if math.Signbit(v) {
		sign, v = 0x8000, -v
	}
	if v >= 65520 {
		return sign | 0x7c00
	}
	i := sort.SearchFloat64s(finite, v) // first value >= v
	if i < len(finite) && finite[i] == v {
		return sign | uint16(i)
	}
	lo, hi := i-1, i
	dl, dh := v-finite[lo], finite[hi]-v
	switch {
	case dl < dh:
		return sign | uint16(lo)
	case dh < dl:
		return sign | uint16(hi)
	case lo%2 == 0:
		return sign | uint16(lo)
	}
	return sign | uint16(hi)
}

func TestF32ToF16RandomAgainstSearch(t *testing.T) {
	// Positive finite values in pattern order, then 2^16 standing in for Inf.
	finite := make([]float64, 0x7c01)
	for i := range finite {
		finite[i] = refF16(uint16(i))
	}
	finite[0x7c00] = 65536
	r := newRand(20)
	src := make([]float32, 200000)
	for i := range src {
		// Exponents from 2^-30 to 2^17 cover underflow, subnormals, normals and overflow.
		e := 97 + r.IntN(48)
		b := uint32(r.IntN(2))<<31 | uint32(e)<<23 | uint32(r.IntN(1<<23))
		src[i] = math.Float32frombits(b)
	}
	dst := make([]uint16, len(src))
	kernels.F32ToF16(dst, src)
	for i, f := range src {
		if want := refToF16(f, finite); dst[i] != want {
			t.Fatalf("F32ToF16(%v) = %#04x, reference %#04x", f, dst[i], want)
		}
	}
}

// refToBF16 rounds by comparing the two bfloat16 neighbours in float64
// (exact), ties to even; finite values past the largest bfloat16 by half an
// ulp or more go to Inf.
func refToBF16(f float32) uint16 {
	b := math.Float32bits(f)
	lo := uint16(b >> 16)
	if b&0xffff == 0 {
		return lo
	}
	hi := lo + 1
	v := math.Abs(float64(f))
	vl := math.Abs(refBF16(lo))
	var vh float64
	if hi&0x7fff == 0x7f80 {
		vh = math.Ldexp(1, 128) // the value Inf stands in for when rounding
	} else {
		vh = math.Abs(refBF16(hi))
	}
	switch dl, dh := v-vl, vh-v; {
	case dl < dh:
		return lo
	case dh < dl:
		return hi
	case lo%2 == 0:
		return lo
	}
	return hi
}

func TestF32ToBF16(t *testing.T) {
	// Ties between 0x3f80 and 0x3f81 (to even 0x3f80) and between 0x3f81
	// and 0x3f82 (to 0x3f82); just above a tie rounds up; the largest
	// float32 rounds to Inf (worked from the definition).
	cases := []struct {
		b uint32
		h uint16
	}{
		{0x3f808000, 0x3f80}, {0x3f818000, 0x3f82}, {0x3f808001, 0x3f81}, {0x3f807fff, 0x3f80},
		{0x7f7fffff, 0x7f80}, {0xff7fffff, 0xff80}, {0x7f7f7fff, 0x7f7f}, {0x00000001, 0x0000},
		{0x80000000, 0x8000}, {0x7f800000, 0x7f80},
	}
	for _, c := range cases {
		if got := kernels.BF16Bits(math.Float32frombits(c.b)); got != c.h {
			t.Errorf("BF16Bits(%#08x) = %#04x, want %#04x", c.b, got, c.h)
		}
	}
	r := newRand(21)
	src := make([]float32, 200000)
	for i := range src {
		b := r.Uint32()
		if b&0x7f800000 == 0x7f800000 {
			b &^= 0x00800000 // keep it finite
		}
		src[i] = math.Float32frombits(b)
	}
	dst := make([]uint16, len(src))
	kernels.F32ToBF16(dst, src)
	for i, f := range src {
		if want := refToBF16(f); dst[i] != want {
			t.Fatalf("F32ToBF16(%#08x) = %#04x, reference %#04x", math.Float32bits(f), dst[i], want)
		}
	}
}

// Both slice conversions give, at every length from 0 to 40 (whole blocks
// of eight for the assembly paths, and tails), each element's own
// conversion, write nothing past the end (guard values), and leave their
// input as it was.
func TestHalfSliceConversionsLengthsAndGuards(t *testing.T) {
	const guard = float32(-12345.5)
	for _, c := range []struct {
		name  string
		slice func(dst []float32, src []uint16)
		one   func(uint16) float32
	}{
		{"F16ToF32", kernels.F16ToF32, kernels.F16Value},
		{"BF16ToF32", kernels.BF16ToF32, kernels.BF16Value},
	} {
		for n := 0; n <= 40; n++ {
			src := make([]uint16, n)
			for i := range src {
				// Finite patterns of both signs, subnormals included (the
				// exhaustive tests cover NaN).
				src[i] = uint16((i*7919 + n*104729) % 0x7c00)
				if i%3 == 1 {
					src[i] |= 0x8000
				}
			}
			orig := append([]uint16(nil), src...)
			buf := make([]float32, n+8)
			for i := range buf {
				buf[i] = guard
			}
			c.slice(buf[4:4+n], src)
			for i := 0; i < 4; i++ {
				if buf[i] != guard || buf[4+n+i] != guard {
					t.Fatalf("%s n=%d: a guard value was overwritten", c.name, n)
				}
			}
			for i, h := range src {
				if got, want := math.Float32bits(buf[4+i]), math.Float32bits(c.one(h)); got != want {
					t.Fatalf("%s n=%d i=%d (%#04x): %#x, the element's own conversion %#x", c.name, n, i, h, got, want)
				}
			}
			if !slices.Equal(src, orig) {
				t.Fatalf("%s n=%d: the input was modified", c.name, n)
			}
		}
	}
}

// BenchmarkHalfToF32 converts one 3072×768 weight matrix (the OPT-125M MLP's
// fc1) from each half-precision format; compare with -tags noasm for the
// pure-Go twins.
func BenchmarkHalfToF32(b *testing.B) {
	src := make([]uint16, 3072*768)
	for i := range src {
		src[i] = uint16(i*40503) & 0x7bff
	}
	dst := make([]float32, len(src))
	for _, c := range []struct {
		name string
		f    func(dst []float32, src []uint16)
	}{{"f16", kernels.F16ToF32}, {"bf16", kernels.BF16ToF32}} {
		b.Run(c.name, func(b *testing.B) {
			b.SetBytes(int64(2 * len(src)))
			for range b.N {
				c.f(dst, src)
			}
		})
	}
}
