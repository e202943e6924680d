package kernels

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// These tests run under both build tags: with assembly, dot8Rows is the
// AVX2 kernel (where the CPU has it) and is held to the bits of its Go twin
// and of a naive per-row loop; with noasm, the twin itself is held to the
// naive loop.

// naiveRowDot is the determinism contract for one row: acc0 + Σ x[k]·w[k],
// each product rounded to float32, added in ascending k.
func naiveRowDot(acc0 float32, x, w []float32) float32 {
	acc := acc0
	for k := range x {
		acc += float32(x[k] * w[k])
	}
	return acc
}

// sameFloat reports whether a and b have the same bits, or are both NaN
// (NaN payloads are not part of the contract).
func sameFloat(a, b float32) bool {
	return math.Float32bits(a) == math.Float32bits(b) || (a != a && b != b)
}

// randMat returns an out×in Out×In matrix of dtype dt with values of mixed
// magnitude, some exact zeros of either sign and some half subnormals.
func randMat(r *rand.Rand, dt DType, out, in int) *Mat {
	m := &Mat{DType: dt, Out: out, In: in}
	n := out * in
	vals := make([]float32, n)
	for i := range vals {
		switch r.IntN(20) {
		case 0:
			vals[i] = 0
		case 1:
			vals[i] = float32(math.Copysign(0, -1))
		case 2:
			vals[i] = float32(r.NormFloat64() * 1e-6) // subnormal in binary16
		default:
			vals[i] = float32(r.NormFloat64() * math.Exp2(float64(r.IntN(12)-6)))
		}
	}
	if dt == F32 {
		m.F32 = vals
		return m
	}
	m.Half = make([]uint16, n)
	for i, v := range vals {
		if dt == F16 {
			m.Half[i] = F16Bits(v)
		} else {
			m.Half[i] = BF16Bits(v)
		}
	}
	return m
}

// normals returns n standard normal values.
func normals(r *rand.Rand, n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = float32(r.NormFloat64())
	}
	return v
}

// setStored writes v (rounded to the storage dtype) at storage element p, or
// the raw half pattern h when the dtype is F16 or BF16 and h != 0.
func setStored(m *Mat, p int, v float32, h uint16) {
	switch {
	case m.DType == F32:
		m.F32[p] = v
	case h != 0:
		m.Half[p] = h
	case m.DType == F16:
		m.Half[p] = F16Bits(v)
	default:
		m.Half[p] = BF16Bits(v)
	}
}

// matRow returns stored row j of the Out×In m as float32.
func matRow(m *Mat, j int) []float32 {
	row := make([]float32, m.In)
	m.Row(row, j)
	return row
}

// checkDot8 runs dot8Rows and dot8RowsGo on the rows at offs from the same
// starting accumulators and compares both with the naive loop, lane by lane.
func checkDot8(t *testing.T, name string, w *Mat, x []float32, rows [8]int, acc0 [8]float32) {
	t.Helper()
	var offs [8]int
	for q, j := range rows {
		offs[q] = j * w.In
	}
	buf := make([]float32, gemvBuf)
	fast, twin := acc0, acc0
	dot8Rows(&fast, x, w, &offs, buf)
	dot8RowsGo(&twin, x, w, &offs, buf)
	for q, j := range rows {
		want := naiveRowDot(acc0[q], x, matRow(w, j))
		if !sameFloat(fast[q], want) || !sameFloat(twin[q], want) {
			t.Fatalf("%s lane %d (row %d): dot8Rows %v (%08x), twin %v (%08x), naive %v (%08x)",
				name, q, j, fast[q], math.Float32bits(fast[q]), twin[q], math.Float32bits(twin[q]),
				want, math.Float32bits(want))
		}
	}
}

// The 8-row kernel (assembly where available) equals the Go twin and the
// naive per-row loop for every k extent around the 8-wide blocks and the
// gemvKC conversion segments, contiguous and scattered rows (repeats
// allowed), non-zero starting accumulators, and all three dtypes.
func TestDot8RowsMatchesTwinAndNaive(t *testing.T) {
	r := rand.New(rand.NewPCG(81, 82))
	ns := []int{0, 1, 2, 7, 8, 9, 15, 16, 17, 23, 64, 100, 511, 512, 513, 520, 768, 1031}
	for _, dt := range []DType{F32, F16, BF16} {
		for _, n := range ns {
			const out = 21
			w := randMat(r, dt, out, n)
			x := normals(r, n)
			acc0 := [8]float32(normals(r, 8))
			contiguous := [8]int{3, 4, 5, 6, 7, 8, 9, 10}
			checkDot8(t, fmt.Sprintf("%v n%d contiguous", dt, n), w, x, contiguous, [8]float32{})
			var scattered [8]int
			for q := range scattered {
				scattered[q] = r.IntN(out)
			}
			scattered[5] = scattered[2] // a repeated row
			checkDot8(t, fmt.Sprintf("%v n%d scattered %v", dt, n, scattered), w, x, scattered, acc0)
		}
	}
}

// NaN and infinities propagate lane by lane exactly as in the naive loop:
// a NaN or infinite weight poisons only its own row, +Inf and −Inf in one
// row give NaN, Inf·0 gives NaN, a NaN or infinite x poisons every row, and
// signalling binary16 NaNs (which VCVTPH2PS quiets) still give NaN. The
// special values sit both inside the 8-wide blocks and in the tail.
func TestDot8RowsSpecialValues(t *testing.T) {
	r := rand.New(rand.NewPCG(83, 84))
	inf := float32(math.Inf(1))
	nan := float32(math.NaN())
	const n = 43 // five blocks of eight and a tail of three
	rows := [8]int{0, 1, 2, 3, 4, 5, 6, 7}
	for _, dt := range []DType{F32, F16, BF16} {
		w := randMat(r, dt, 8, n)
		x := make([]float32, n)
		for k := range x {
			x[k] = float32(r.NormFloat64())
		}
		x[11] = 0
		x[5], x[9], x[30] = 1.5, 2, 0.75 // fix the signs of the infinite products
		setStored(w, 0*n+3, nan, 0)      // row 0: NaN in a block
		setStored(w, 1*n+41, nan, 0)     // row 1: NaN in the tail
		setStored(w, 2*n+9, inf, 0)      // row 2: +Inf in a block
		setStored(w, 3*n+5, inf, 0)      // row 3: +Inf then −Inf: NaN
		setStored(w, 3*n+30, -inf, 0)    // (row 3)
		setStored(w, 4*n+11, inf, 0)     // row 4: Inf·0 = NaN
		setStored(w, 5*n+42, -inf, 0)    // row 5: −Inf in the tail
		if dt == F16 {
			setStored(w, 6*n+17, 0, 0x7c01) // row 6: signalling NaN
			setStored(w, 6*n+40, 0, 0xfd00) // and a negative quiet one in the tail
		}
		// Row 7 stays finite.
		checkDot8(t, fmt.Sprintf("%v weights", dt), w, x, rows, [8]float32{})
		var offs [8]int
		for q := range offs {
			offs[q] = q * n
		}
		var got [8]float32
		dot8Rows(&got, x, w, &offs, make([]float32, gemvBuf))
		wantNaN := [8]bool{true, true, false, true, true, false, dt == F16, false}
		for q, v := range got {
			if (v != v) != wantNaN[q] {
				t.Fatalf("%v row %d: %v, want NaN %v", dt, q, v, wantNaN[q])
			}
		}
		if !math.IsInf(float64(got[2]), 1) || !math.IsInf(float64(got[5]), 0) {
			t.Fatalf("%v: infinite weights gave %v and %v", dt, got[2], got[5])
		}
		if math.IsInf(float64(got[7]), 0) || got[7] != got[7] {
			t.Fatalf("%v: finite row gave %v", dt, got[7])
		}
		// Special values in x, inside a block and in the tail.
		w = randMat(r, dt, 8, n)
		for _, p := range []struct {
			k int
			v float32
		}{{6, nan}, {40, nan}, {13, inf}, {42, -inf}} {
			x2 := append([]float32(nil), x...)
			x2[p.k] = p.v
			checkDot8(t, fmt.Sprintf("%v x[%d] = %v", dt, p.k, p.v), w, x2, rows, [8]float32{})
		}
	}
}

// rowsDot with gathered indices in any order (descending, repeated) and
// every remainder of eight gives the naive loop's bits plus the bias, and
// writes nothing outside out.
func TestRowsDotGatherAnyOrderGuarded(t *testing.T) {
	r := rand.New(rand.NewPCG(85, 86))
	sentinel := math.Float32frombits(0x7fc0dead)
	const pad = 8
	for _, dt := range []DType{F32, F16, BF16} {
		for _, n := range []int{3, 8, 29, 600} {
			const rowsOut = 40
			w := randMat(r, dt, rowsOut, n)
			x := make([]float32, n)
			for k := range x {
				x[k] = float32(r.NormFloat64())
			}
			bias := make([]float32, rowsOut)
			for j := range bias {
				bias[j] = float32(r.NormFloat64())
			}
			for _, count := range []int{1, 4, 7, 8, 9, 13, 16, 31} {
				idx := make([]int32, count)
				for i := range idx {
					idx[i] = int32(r.IntN(rowsOut))
				}
				if count > 2 {
					idx[1] = idx[0] // a repeat
				}
				for _, b := range [][]float32{nil, bias} {
					store := make([]float32, count+2*pad)
					for i := range store {
						store[i] = sentinel
					}
					out := store[pad : pad+count]
					rowsDot(out, x, w, b, make([]float32, gemvBuf), 0, idx)
					name := fmt.Sprintf("%v n%d idx %v bias %v", dt, n, idx, b != nil)
					for i, v := range store {
						if (i < pad || i >= pad+count) && math.Float32bits(v) != math.Float32bits(sentinel) {
							t.Fatalf("%s: slot %d outside out was written", name, i-pad)
						}
					}
					for i, j := range idx {
						want := naiveRowDot(0, x, matRow(w, int(j)))
						if b != nil {
							want += b[j]
						}
						if !sameFloat(out[i], want) {
							t.Fatalf("%s: out[%d] (row %d) = %v, naive %v", name, i, j, out[i], want)
						}
					}
				}
			}
		}
	}
}

// The kernel name follows the feature detection.
func TestGEMVKernelName(t *testing.T) {
	for _, dt := range []DType{F32, F16, BF16} {
		name := gemvKernel(dt)
		if want := expectedGEMVKernel(dt); name != want {
			t.Fatalf("%v: kernel name %q, want %q", dt, name, want)
		}
	}
}

// checkWide runs the sixteen- or thirty-two-row kernel (len(rows) picks
// which) from acc0 and compares every lane with the naive loop.
func checkWide(t *testing.T, name string, w *Mat, x []float32, rows []int, acc0 []float32) {
	t.Helper()
	buf := make([]float32, gemvBuf)
	got := append([]float32(nil), acc0...)
	switch len(rows) {
	case 16:
		var offs [16]int
		for q, j := range rows {
			offs[q] = j * w.In
		}
		dot16Rows((*[16]float32)(got), x, w, &offs, buf)
	case 32:
		var offs [32]int
		for q, j := range rows {
			offs[q] = j * w.In
		}
		dot32Rows((*[32]float32)(got), x, w, &offs, buf)
	default:
		t.Fatalf("checkWide: %d rows", len(rows))
	}
	for q, j := range rows {
		want := naiveRowDot(acc0[q], x, matRow(w, j))
		if !sameFloat(got[q], want) {
			t.Fatalf("%s lane %d (row %d): %v (%08x), naive %v (%08x)",
				name, q, j, got[q], math.Float32bits(got[q]), want, math.Float32bits(want))
		}
	}
}

// The sixteen- and thirty-two-row kernels (AVX2 and AVX-512 where the CPU
// has them) equal the naive per-row loop lane by lane: every k extent
// around the 8-wide blocks, scattered and repeated rows, non-zero starting
// accumulators, all three dtypes, and NaN and infinities in weights of
// rows in every group and in x. A lane put in the wrong place by the
// transposes, or a group read with the other group's rows, fails it.
func TestDot16And32RowsMatchNaive(t *testing.T) {
	r := rand.New(rand.NewPCG(85, 86))
	ns := []int{0, 1, 7, 8, 9, 16, 23, 64, 511, 512, 520, 768, 1031}
	for _, dt := range []DType{F32, F16, BF16} {
		for _, n := range ns {
			const out = 45
			w := randMat(r, dt, out, n)
			x := normals(r, n)
			for _, width := range []int{16, 32} {
				rows := make([]int, width)
				for q := range rows {
					rows[q] = r.IntN(out)
				}
				acc0 := normals(r, width)
				rows[width-1] = rows[3] // a repeated row
				checkWide(t, fmt.Sprintf("%v n%d width %d", dt, n, width), w, x, rows, acc0)
				for q := range rows {
					rows[q] = 2 + q // contiguous
				}
				checkWide(t, fmt.Sprintf("%v n%d width %d contiguous", dt, n, width), w, x, rows, make([]float32, width))
			}
		}
		// Special values in rows 5, 13, 22 and 30 (one per eight-row group),
		// inside blocks and in the tail of n = 43.
		const n = 43
		w := randMat(r, dt, 32, n)
		x := normals(r, n)
		inf, nan := float32(math.Inf(1)), float32(math.NaN())
		setStored(w, 5*n+3, nan, 0)
		setStored(w, 13*n+41, inf, 0)
		setStored(w, 22*n+9, -inf, 0)
		setStored(w, 30*n+17, nan, 0)
		rows := make([]int, 32)
		for q := range rows {
			rows[q] = q
		}
		checkWide(t, fmt.Sprintf("%v special weights", dt), w, x, rows, make([]float32, 32))
		checkWide(t, fmt.Sprintf("%v special weights, 16", dt), w, x, rows[16:], make([]float32, 16))
		x[20] = nan
		checkWide(t, fmt.Sprintf("%v NaN in x", dt), w, x, rows, make([]float32, 32))
	}
}
