package kernels_test

import (
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

func TestDotAxpyScaleAdd(t *testing.T) {
	r := newRand(30)
	for _, n := range []int{0, 1, 5, 64, 257} {
		a, b := randVec(r, n), randVec(r, n)
		var want float32
		for i := range a {
			want += float32(a[i] * b[i])
		}
		a0, b0 := clone32(a), clone32(b)
		if got := kernels.Dot(a, b); math.Float32bits(got) != math.Float32bits(want) {
			t.Fatalf("Dot n=%d: %v, reference %v", n, got, want)
		}
		if bitsEqual(a, a0) >= 0 || bitsEqual(b, b0) >= 0 {
			t.Fatalf("Dot modified an input")
		}

		y := clone32(b)
		ref := clone32(b)
		for i := range ref {
			ref[i] += float32(0.37 * a[i])
		}
		kernels.Axpy(0.37, a, y)
		if i := bitsEqual(y, ref); i >= 0 {
			t.Fatalf("Axpy n=%d: y[%d] = %v, reference %v", n, i, y[i], ref[i])
		}

		s := clone32(a)
		kernels.Scale(-1.5, s)
		for i := range s {
			if s[i] != -1.5*a[i] {
				t.Fatalf("Scale: s[%d] = %v, want %v", i, s[i], -1.5*a[i])
			}
		}

		g := newGuarded(n)
		kernels.Add(g.s, a, b)
		g.check(t, "Add")
		for i := range g.s {
			if g.s[i] != a[i]+b[i] {
				t.Fatalf("Add: %v, want %v", g.s[i], a[i]+b[i])
			}
		}
		// dst aliasing a.
		c := clone32(a)
		kernels.Add(c, c, b)
		for i := range c {
			if c[i] != a[i]+b[i] {
				t.Fatalf("Add aliased: %v, want %v", c[i], a[i]+b[i])
			}
		}
	}
}

func TestArgmax(t *testing.T) {
	nan := float32(math.NaN())
	inf := float32(math.Inf(1))
	cases := []struct {
		x    []float32
		want int
	}{
		{[]float32{3}, 0},
		{[]float32{1, 5, 2, 5}, 1},     // tie: lowest index
		{[]float32{-2, -1, -1}, 1},     // tie: lowest index
		{[]float32{1, nan, 9, nan}, 1}, // first NaN wins
		{[]float32{-inf, -inf}, 0},
		{[]float32{0, inf, 1}, 1},
		{[]float32{float32(math.Copysign(0, -1)), 0}, 0}, // -0 == +0: a tie
	}
	for _, c := range cases {
		if got := kernels.Argmax(c.x); got != c.want {
			t.Errorf("Argmax(%v) = %d, want %d", c.x, got, c.want)
		}
	}
}

func TestReLU(t *testing.T) {
	x := []float32{-1, 0, 2.5, float32(math.Copysign(0, -1)), float32(math.NaN()), float32(math.Inf(-1))}
	kernels.ReLU(x)
	want := []float32{0, 0, 2.5, 0}
	for i, w := range want {
		if math.Float32bits(x[i]) != math.Float32bits(w) {
			t.Fatalf("ReLU: x[%d] = %v, want %v", i, x[i], w)
		}
	}
	if x[4] == x[4] {
		t.Fatalf("ReLU(NaN) = %v, want NaN", x[4])
	}
	if x[5] != 0 {
		t.Fatalf("ReLU(-Inf) = %v, want 0", x[5])
	}
	// The same values at every place of a vector with blocks of eight and a
	// tail, so both the assembly blocks and the Go tail see each of them.
	special := []float32{-1, 0, 2.5, float32(math.Copysign(0, -1)), float32(math.NaN()), float32(math.Inf(-1)), float32(math.Inf(1)), 1e-45, -1e-45}
	for at := range 19 {
		for _, v := range special {
			y := make([]float32, 19)
			for i := range y {
				y[i] = float32(i%5) - 2
			}
			y[at] = v
			kernels.ReLU(y)
			for i, got := range y {
				in := float32(i%5) - 2
				if i == at {
					in = v
				}
				want := in
				if in <= 0 {
					want = 0
				}
				if math.Float32bits(got) != math.Float32bits(want) && !(in != in && got != got) {
					t.Fatalf("ReLU(%v) at %d of 19 = %v, want %v", in, i, got, want)
				}
			}
		}
	}
}

// DotStrided is Dot over equally spaced rows, bit for bit, for row counts
// around the eight-row blocks, any head width, and with no write outside dst.
func TestDotStridedIsDot(t *testing.T) {
	next := uint32(1)
	rnd := func() float32 {
		next = next*1664525 + 1013904223
		return float32(int32(next>>8)-1<<23) / float32(1<<23)
	}
	for _, rows := range []int{0, 1, 7, 8, 9, 16, 23, 40} {
		for _, n := range []int{1, 5, 8, 17, 32, 64} {
			stride, off := 3*n+2, n+1
			m := make([]float32, max(rows, 1)*stride+off+n)
			for i := range m {
				m[i] = rnd()
			}
			x := make([]float32, n)
			for i := range x {
				x[i] = rnd()
			}
			buf := make([]float32, rows+2)
			buf[0], buf[rows+1] = 12345, -6789 // sentinels
			dst := buf[1 : rows+1]
			kernels.DotStrided(dst, x, m, stride, off)
			if buf[0] != 12345 || buf[rows+1] != -6789 {
				t.Fatalf("rows %d n %d: wrote outside dst", rows, n)
			}
			for j := range dst {
				want := kernels.Dot(x, m[j*stride+off:j*stride+off+n])
				if math.Float32bits(dst[j]) != math.Float32bits(want) {
					t.Fatalf("rows %d n %d row %d: %v, Dot gives %v", rows, n, j, dst[j], want)
				}
			}
		}
	}
	x := []float32{1, float32(math.NaN()), 0, 0, 0, 0, 0, 0, 0}
	m := make([]float32, 9*9)
	dst := make([]float32, 9)
	kernels.DotStrided(dst, x, m, 9, 0)
	for j, v := range dst {
		if v == v {
			t.Fatalf("row %d: NaN in x must give NaN, got %v", j, v)
		}
	}
}

// AxpyRows gives the bits of the Axpy loop it replaces, over lane counts
// around the 64- and 32-lane assembly blocks, strides wider than a row,
// alpha with exact zeros of either sign (skipped, so an Inf in a skipped row
// does not turn into NaN, and -0 in y survives), NaN and Inf alpha, and
// Inf or NaN in the rows; nothing outside y is written.
func TestAxpyRowsIsAxpyLoop(t *testing.T) {
	r := newRand(33)
	for _, n := range []int{1, 7, 31, 32, 33, 63, 64, 65, 96, 100, 128, 130} {
		for _, rows := range []int{1, 2, 9, 40} {
			stride, off := n+3+r.IntN(40), r.IntN(5)
			m := randVec(r, (rows-1)*stride+off+n+r.IntN(3))
			alpha := randVec(r, rows)
			for j := range alpha {
				switch r.IntN(6) {
				case 0:
					alpha[j] = 0
					m[j*stride+off+r.IntN(n)] = float32(math.Inf(1)) // skipped: must not reach y
				case 1:
					alpha[j] = float32(math.Copysign(0, -1))
				}
			}
			if rows > 2 && n%2 == 1 {
				alpha[1] = float32(math.NaN())
				m[2*stride+off] = float32(math.Inf(-1))
			}
			y0 := randVec(r, n)
			y0[0] = float32(math.Copysign(0, -1))
			want := clone32(y0)
			for j, a := range alpha {
				if a != 0 {
					kernels.Axpy(a, m[j*stride+off:j*stride+off+n], want)
				}
			}
			g := newGuarded(n)
			copy(g.s, y0)
			kernels.AxpyRows(g.s, alpha, m, stride, off)
			for i := range want {
				gb, wb := math.Float32bits(g.s[i]), math.Float32bits(want[i])
				if gb != wb && !(g.s[i] != g.s[i] && want[i] != want[i]) {
					t.Fatalf("n=%d rows=%d: y[%d] = %v (%08x), Axpy loop %v (%08x)", n, rows, i, g.s[i], gb, want[i], wb)
				}
			}
			for i, v := range g.buf {
				if (i < guardPad || i >= guardPad+n) && math.Float32bits(v) != math.Float32bits(sentinelOutside) {
					t.Fatalf("n=%d rows=%d: guard slot %d written", n, rows, i-guardPad)
				}
			}
		}
	}
	mustPanic(t, "AxpyRows past m", "length", func() {
		kernels.AxpyRows(make([]float32, 4), make([]float32, 2), make([]float32, 7), 4, 0)
	})
}

// Scale is one rounded float32 product per element, bit for bit, on every
// length around the eight-lane blocks and with special values among them.
func TestScale(t *testing.T) {
	special := []float32{0, float32(math.Copysign(0, -1)), float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), 1e-45, math.MaxFloat32, -3.5}
	for _, n := range []int{0, 1, 7, 8, 9, 16, 19, 300} {
		for _, alpha := range []float32{0.125, -3, 1e-30, float32(math.Inf(1))} {
			x := make([]float32, n)
			for i := range x {
				x[i] = special[i%len(special)] * float32(i+1)
			}
			want := make([]float32, n)
			for i, v := range x {
				want[i] = alpha * v
			}
			kernels.Scale(alpha, x)
			for i := range x {
				if math.Float32bits(x[i]) != math.Float32bits(want[i]) && !(x[i] != x[i] && want[i] != want[i]) {
					t.Fatalf("Scale(%v) n=%d [%d] = %v, want %v", alpha, n, i, x[i], want[i])
				}
			}
		}
	}
}
