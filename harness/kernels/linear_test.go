package kernels_test

import (
	"fmt"
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

// linearShapes covers 1, odd sizes, sizes that are not multiples of the
// register or cache blocks (k blocks of 256, column jobs of 128 and row jobs
// of 64 inside the package), m = 1 and an empty input dimension. The m = 1
// shapes also cover the GEMV's 8-row groups: In below, at and off a
// multiple of 8 (and past two conversion segments of 512), Out with and
// without a remainder of four and of one.
var linearShapes = []struct{ m, in, out int }{
	{1, 1, 1}, {1, 7, 5}, {1, 300, 70}, {1, 600, 260}, {1, 513, 3},
	{1, 5, 17}, {1, 8, 8}, {1, 16, 24}, {1, 9, 13}, {1, 1031, 45}, {1, 64, 7},
	{2, 3, 5}, {3, 256, 4}, {4, 257, 129}, {5, 31, 33}, {7, 600, 9},
	{17, 64, 127}, {64, 128, 128}, {65, 255, 131}, {130, 300, 260},
	{3, 0, 5}, {1, 0, 2},
}

func TestLinearMatchesReference(t *testing.T) {
	r := newRand(1)
	for _, sh := range linearShapes {
		for _, dt := range allDTypes {
			for _, tr := range []bool{false, true} {
				for _, withBias := range []bool{false, true} {
					name := fmt.Sprintf("m%d_in%d_out%d_%v_T%v_bias%v", sh.m, sh.in, sh.out, dt, tr, withBias)
					w, logical := testMat(r, dt, sh.out, sh.in, tr)
					x := randVec(r, sh.m*sh.in)
					var bias []float32
					if withBias {
						bias = randVec(r, sh.out)
					}
					want := refLinear(x, sh.m, logical, sh.in, bias)
					x0, f0, h0, b0 := clone32(x), clone32(w.F32), clone16(w.Half), clone32(bias)
					for _, threads := range []int{1, 2, 3, 7} {
						g := newGuarded(sh.m * sh.out)
						kernels.Linear(g.s, x, sh.m, w, bias, threads)
						g.check(t, name)
						if i := bitsEqual(g.s, want); i >= 0 {
							t.Fatalf("%s threads %d: y[%d] = %v, reference %v", name, threads, i, g.s[i], want[i])
						}
					}
					if bitsEqual(x, x0) >= 0 || bitsEqual(bias, b0) >= 0 || !matInputsEqual(w, f0, h0) {
						t.Fatalf("%s: an input was modified", name)
					}
				}
			}
		}
	}
}

// TestLinearRowIndependence checks that a row computed inside a many-row
// product (blocked path) equals the same row computed alone (GEMV path, 8
// rows at a time with assembly where the CPU has it) and the same outputs
// gathered (LinearGather), for In below, at and off a multiple of 8 and Out
// with every kind of remainder.
func TestLinearRowIndependence(t *testing.T) {
	r := newRand(2)
	shapes := []struct{ m, in, out int }{{70, 290, 140}, {9, 5, 19}, {12, 256, 64}, {5, 777, 45}, {3, 1030, 9}}
	for _, sh := range shapes {
		m, in, out := sh.m, sh.in, sh.out
		for _, dt := range allDTypes {
			for _, tr := range []bool{false, true} {
				w, _ := testMat(r, dt, out, in, tr)
				x := randVec(r, m*in)
				bias := randVec(r, out)
				all := make([]float32, m*out)
				kernels.Linear(all, x, m, w, bias, 2)
				one := make([]float32, out)
				idx := pickIdx(out, 2)
				kept := make([]float32, len(idx))
				for _, i := range []int{0, 1, 33, 63, 64, 69} {
					if i >= m {
						continue
					}
					name := fmt.Sprintf("m%d in%d out%d %v T%v row %d", m, in, out, dt, tr, i)
					xi := x[i*in : (i+1)*in]
					kernels.Linear(one, xi, 1, w, bias, 1)
					if j := bitsEqual(one, all[i*out:(i+1)*out]); j >= 0 {
						t.Fatalf("%s: alone y[%d] = %v, in batch %v", name, j, one[j], all[i*out+j])
					}
					kernels.LinearGather(kept, xi, w, bias, idx)
					for rr, j := range idx {
						if math.Float32bits(kept[rr]) != math.Float32bits(all[i*out+int(j)]) {
							t.Fatalf("%s: gathered y[%d] = %v, in batch %v", name, j, kept[rr], all[i*out+int(j)])
						}
					}
				}
			}
		}
	}
}

// TestLinearLayoutsAgree checks that the Out×In and In×Out storage of the
// same logical matrix give identical bits.
func TestLinearLayoutsAgree(t *testing.T) {
	r := newRand(3)
	const in, out = 259, 133
	for _, dt := range allDTypes {
		w, _ := testMat(r, dt, out, in, false)
		wt := &kernels.Mat{DType: dt, Out: out, In: in, Transposed: true}
		if dt == kernels.F32 {
			wt.F32 = make([]float32, out*in)
		} else {
			wt.Half = make([]uint16, out*in)
		}
		for j := 0; j < out; j++ {
			for k := 0; k < in; k++ {
				if dt == kernels.F32 {
					wt.F32[k*out+j] = w.F32[j*in+k]
				} else {
					wt.Half[k*out+j] = w.Half[j*in+k]
				}
			}
		}
		for _, m := range []int{1, 9} {
			x := randVec(r, m*in)
			a, b := make([]float32, m*out), make([]float32, m*out)
			kernels.Linear(a, x, m, w, nil, 3)
			kernels.Linear(b, x, m, wt, nil, 3)
			if i := bitsEqual(a, b); i >= 0 {
				t.Fatalf("%v m %d: layouts differ at %d: %v vs %v", dt, m, i, a[i], b[i])
			}
		}
	}
}

// TestLinearNaNPropagates checks that a NaN in x poisons its output row and
// a NaN weight poisons its output column, and nothing else.
func TestLinearNaNPropagates(t *testing.T) {
	r := newRand(4)
	const in, out = 300, 70
	nan := float32(math.NaN())
	for _, dt := range allDTypes {
		for _, tr := range []bool{false, true} {
			for _, m := range []int{1, 6} {
				w, logical := testMat(r, dt, out, in, tr)
				x := randVec(r, m*in)
				badRow, badK := m-1, in-3
				x[badRow*in+badK] = nan
				y := make([]float32, m*out)
				kernels.Linear(y, x, m, w, nil, 2)
				for i := 0; i < m; i++ {
					for j := 0; j < out; j++ {
						v := y[i*out+j]
						if isNaN := v != v; isNaN != (i == badRow) {
							t.Fatalf("%v T%v m %d: NaN x: y[%d][%d] = %v", dt, tr, m, i, j, v)
						}
					}
				}
				x[badRow*in+badK] = 0.5
				badCol := out / 2
				setElem(w, logical, badCol, 1, nan)
				kernels.Linear(y, x, m, w, nil, 2)
				for i := 0; i < m; i++ {
					for j := 0; j < out; j++ {
						v := y[i*out+j]
						if isNaN := v != v; isNaN != (j == badCol) {
							t.Fatalf("%v T%v m %d: NaN weight: y[%d][%d] = %v", dt, tr, m, i, j, v)
						}
					}
				}
			}
		}
	}
}

func TestGemmMatchesReference(t *testing.T) {
	r := newRand(5)
	shapes := []struct{ m, k, n int }{{1, 1, 1}, {1, 300, 7}, {2, 5, 3}, {9, 257, 130}, {66, 70, 129}, {4, 0, 3}}
	for _, sh := range shapes {
		a := randVec(r, sh.m*sh.k)
		b := randVec(r, sh.k*sh.n)
		want := make([]float32, sh.m*sh.n)
		for i := 0; i < sh.m; i++ {
			for j := 0; j < sh.n; j++ {
				var acc float32
				for p := 0; p < sh.k; p++ {
					acc += float32(a[i*sh.k+p] * b[p*sh.n+j])
				}
				want[i*sh.n+j] = acc
			}
		}
		a0, b0 := clone32(a), clone32(b)
		for _, threads := range []int{1, 2, 3, 7} {
			g := newGuarded(sh.m * sh.n)
			kernels.Gemm(g.s, a, b, sh.m, sh.k, sh.n, threads)
			g.check(t, fmt.Sprint("Gemm ", sh))
			if i := bitsEqual(g.s, want); i >= 0 {
				t.Fatalf("Gemm %v threads %d: c[%d] = %v, reference %v", sh, threads, i, g.s[i], want[i])
			}
		}
		if bitsEqual(a, a0) >= 0 || bitsEqual(b, b0) >= 0 {
			t.Fatalf("Gemm %v: an input was modified", sh)
		}
	}
}

// TestLinearEmptyDims checks the degenerate shapes: nothing to write, and
// the empty sum (In == 0) giving +0 + bias.
func TestLinearEmptyDims(t *testing.T) {
	w := &kernels.Mat{DType: kernels.F32, Out: 0, In: 4}
	kernels.Linear(nil, make([]float32, 8), 2, w, nil, 1)
	w = &kernels.Mat{DType: kernels.F16, Out: 2, In: 0}
	y := []float32{7, 7}
	kernels.Linear(y, nil, 1, w, []float32{float32(math.Copysign(0, -1)), 3}, 1)
	if math.Float32bits(y[0]) != 0 || y[1] != 3 {
		t.Fatalf("In == 0: y = %v (bits %#x), want [+0 3]", y, math.Float32bits(y[0]))
	}
}

func TestMatRow(t *testing.T) {
	r := newRand(6)
	for _, dt := range allDTypes {
		for _, tr := range []bool{false, true} {
			w, logical := testMat(r, dt, 9, 13, tr)
			for i := 0; i < 9; i++ {
				g := newGuarded(13)
				w.Row(g.s, i)
				g.check(t, "Row")
				if j := bitsEqual(g.s, logical[i]); j >= 0 {
					t.Fatalf("%v T%v Row(%d)[%d] = %v, want %v", dt, tr, i, j, g.s[j], logical[i][j])
				}
			}
		}
	}
}

func TestDTypeString(t *testing.T) {
	for dt, want := range map[kernels.DType]string{kernels.F32: "F32", kernels.F16: "F16", kernels.BF16: "BF16", 9: "DType(9)"} {
		if got := dt.String(); got != want {
			t.Errorf("DType(%d).String() = %q, want %q", uint8(dt), got, want)
		}
	}
}
