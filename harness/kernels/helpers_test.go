package kernels_test

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"sparsegate/harness/kernels"
)

// guardPad is the number of sentinel slots on each side of a guarded slice.
const guardPad = 8

// Sentinels: distinct NaN payloads, compared by bits.
var (
	sentinelOutside = math.Float32frombits(0x7fc0dead) // beyond both ends
	sentinelInside  = math.Float32frombits(0x7fc0beef) // pre-filled output, must be overwritten
)

// guarded is an n-element slice carved out of a larger buffer whose extra
// capacity and leading slots hold sentinels.
type guarded struct {
	buf []float32
	s   []float32
}

func newGuarded(n int) guarded {
	buf := make([]float32, n+2*guardPad)
	for i := range buf {
		buf[i] = sentinelOutside
	}
	s := buf[guardPad : guardPad+n]
	for i := range s {
		s[i] = sentinelInside
	}
	return guarded{buf: buf, s: s}
}

// check fails the test if a sentinel outside the slice changed or a
// pre-filled value inside was left in place.
func (g guarded) check(t *testing.T, what string) {
	t.Helper()
	n := len(g.s)
	for i, v := range g.buf {
		inside := i >= guardPad && i < guardPad+n
		bits := math.Float32bits(v)
		if !inside && bits != math.Float32bits(sentinelOutside) {
			t.Fatalf("%s: guard slot %d (outside the output) was written: %#x", what, i-guardPad, bits)
		}
		if inside && bits == math.Float32bits(sentinelInside) {
			t.Fatalf("%s: output element %d was not written", what, i-guardPad)
		}
	}
}

// randVec returns n values uniform in [-1, 1) from a seeded generator.
func randVec(r *rand.Rand, n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = float32(r.Float64()*2 - 1)
	}
	return v
}

func newRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x5eed)) }

// bitsEqual reports the first index where a and b differ bit for bit, or -1.
func bitsEqual(a, b []float32) int {
	if len(a) != len(b) {
		return 0
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return i
		}
	}
	return -1
}

// clone32 and clone16 copy slices so inputs can be checked for changes.
func clone32(s []float32) []float32 { return append([]float32(nil), s...) }
func clone16(s []uint16) []uint16   { return append([]uint16(nil), s...) }

// mustPanic runs f and checks that it panics with a string message that has
// the package prefix and contains want.
func mustPanic(t *testing.T, name, want string, f func()) {
	t.Helper()
	defer func() {
		t.Helper()
		r := recover()
		if r == nil {
			t.Fatalf("%s: no panic", name)
		}
		msg, ok := r.(string)
		if !ok {
			t.Fatalf("%s: panic value %v (%T) is not a string", name, r, r)
		}
		if !strings.HasPrefix(msg, "kernels: ") || !strings.Contains(msg, want) {
			t.Fatalf("%s: panic %q, want prefix \"kernels: \" and %q", name, msg, want)
		}
	}()
	f()
}

// refF16 decodes a binary16 bit pattern from the IEEE 754-2008 definition
// (clause 3.4, binary16: 1 sign bit, w = 5 exponent bits, t = 10 trailing
// significand bits, bias 15; parameters recalled from memory): biased
// exponent E in 1…30 gives (−1)^S·2^(E−15)·(1 + T/2^10), E = 0 gives
// (−1)^S·2^(−14)·(T/2^10), E = 31 gives ±Inf (T = 0) or NaN.
func refF16(h uint16) float64 {
	s, e, m := h>>15, int(h>>10&0x1f), float64(h&0x3ff)
	var v float64
	switch {
	case e == 31 && m == 0:
		v = math.Inf(1)
	case e == 31:
		return math.NaN()
	case e == 0:
		v = math.Ldexp(m/1024, -14)
	default:
		v = math.Ldexp(1+m/1024, e-15)
	}
	if s == 1 {
		v = -v
	}
	return v
}

// refBF16 decodes a bfloat16 bit pattern from its definition: the same
// fields as binary32 with the significand cut to 7 bits (1 sign, 8 exponent
// bits, bias 127, 7 trailing bits; common practice, no source).
func refBF16(h uint16) float64 {
	s, e, m := h>>15, int(h>>7&0xff), float64(h&0x7f)
	var v float64
	switch {
	case e == 255 && m == 0:
		v = math.Inf(1)
	case e == 255:
		return math.NaN()
	case e == 0:
		v = math.Ldexp(m/128, -126)
	default:
		v = math.Ldexp(1+m/128, e-127)
	}
	if s == 1 {
		v = -v
	}
	return v
}

// testMat builds an out×in weight matrix of the given dtype and layout with
// seeded random values, and returns it with its logical values w[j][k]
// decoded by the reference decoders (independent of the package).
func testMat(r *rand.Rand, dt kernels.DType, out, in int, transposed bool) (*kernels.Mat, [][]float32) {
	vals := randVec(r, out*in)
	m := &kernels.Mat{DType: dt, Out: out, In: in, Transposed: transposed}
	if dt == kernels.F32 {
		m.F32 = vals
	} else {
		m.Half = make([]uint16, len(vals))
		for i, v := range vals {
			if dt == kernels.F16 {
				m.Half[i] = kernels.F16Bits(v)
			} else {
				m.Half[i] = kernels.BF16Bits(v)
			}
		}
	}
	logical := make([][]float32, out)
	for j := range logical {
		logical[j] = make([]float32, in)
		for k := range logical[j] {
			p := j*in + k
			if transposed {
				p = k*out + j
			}
			logical[j][k] = refElem(m, p)
		}
	}
	return m, logical
}

// refElem decodes stored element p of m with the reference decoders.
func refElem(m *kernels.Mat, p int) float32 {
	switch m.DType {
	case kernels.F16:
		return float32(refF16(m.Half[p]))
	case kernels.BF16:
		return float32(refBF16(m.Half[p]))
	}
	return m.F32[p]
}

// setElem writes v into logical element (j, k) of m (as the nearest stored
// value) and into logical.
func setElem(m *kernels.Mat, logical [][]float32, j, k int, v float32) {
	p := j*m.In + k
	if m.Transposed {
		p = k*m.Out + j
	}
	switch m.DType {
	case kernels.F16:
		m.Half[p] = kernels.F16Bits(v)
	case kernels.BF16:
		m.Half[p] = kernels.BF16Bits(v)
	default:
		m.F32[p] = v
	}
	logical[j][k] = refElem(m, p)
}

// refLinear is the naive reference of the determinism contract: one float32
// accumulator from 0, products rounded to float32 and added in ascending k,
// bias last.
func refLinear(x []float32, m int, w [][]float32, in int, bias []float32) []float32 {
	out := len(w)
	y := make([]float32, m*out)
	for i := 0; i < m; i++ {
		for j := 0; j < out; j++ {
			var acc float32
			for k := 0; k < in; k++ {
				acc += float32(x[i*in+k] * w[j][k])
			}
			if bias != nil {
				acc += bias[j]
			}
			y[i*out+j] = acc
		}
	}
	return y
}

var allDTypes = []kernels.DType{kernels.F32, kernels.F16, kernels.BF16}

// matInputsEqual reports whether m still holds the given storage.
func matInputsEqual(m *kernels.Mat, f32 []float32, half []uint16) bool {
	if bitsEqual(m.F32, f32) >= 0 {
		return false
	}
	if len(half) != len(m.Half) {
		return false
	}
	for i := range half {
		if half[i] != m.Half[i] {
			return false
		}
	}
	return true
}
