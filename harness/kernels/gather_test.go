package kernels_test

import (
	"fmt"
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

// pickIdx returns a strictly ascending subset of [0, n) with roughly every
// step-th index, always including the first and last when n > 0.
func pickIdx(n, step int) []int32 {
	var idx []int32
	for i := 0; i < n; i += step {
		idx = append(idx, int32(i))
	}
	if n > 0 && idx[len(idx)-1] != int32(n-1) {
		idx = append(idx, int32(n-1))
	}
	return idx
}

func TestLinearGatherMatchesLinear(t *testing.T) {
	r := newRand(10)
	for _, sh := range []struct{ in, out int }{{1, 1}, {7, 9}, {300, 70}, {600, 261}, {5, 40}, {64, 100}, {777, 90}} {
		for _, dt := range allDTypes {
			for _, tr := range []bool{false, true} {
				for _, step := range []int{1, 3, 17} {
					name := fmt.Sprintf("in%d_out%d_%v_T%v_step%d", sh.in, sh.out, dt, tr, step)
					w, logical := testMat(r, dt, sh.out, sh.in, tr)
					x := randVec(r, sh.in)
					bias := randVec(r, sh.out)
					full := refLinear(x, 1, logical, sh.in, bias)
					idx := pickIdx(sh.out, step)
					x0, i0 := clone32(x), append([]int32(nil), idx...)
					g := newGuarded(len(idx))
					kernels.LinearGather(g.s, x, w, bias, idx)
					g.check(t, name)
					for rr, j := range idx {
						if math.Float32bits(g.s[rr]) != math.Float32bits(full[j]) {
							t.Fatalf("%s: y[%d] (row %d) = %v, reference %v", name, rr, j, g.s[rr], full[j])
						}
					}
					if bitsEqual(x, x0) >= 0 || fmt.Sprint(idx) != fmt.Sprint(i0) {
						t.Fatalf("%s: an input was modified", name)
					}
					// Without bias as well.
					noBias := refLinear(x, 1, logical, sh.in, nil)
					kernels.LinearGather(g.s, x, w, nil, idx)
					for rr, j := range idx {
						if math.Float32bits(g.s[rr]) != math.Float32bits(noBias[j]) {
							t.Fatalf("%s no bias: y[%d] = %v, reference %v", name, rr, g.s[rr], noBias[j])
						}
					}
				}
			}
		}
	}
}

// refScatter is the contract of LinearScatterIn: ascending r, bias last.
func refScatter(h []float32, w [][]float32, bias []float32, idx []int32) []float32 {
	y := make([]float32, len(w))
	for j := range y {
		var acc float32
		for r, k := range idx {
			acc += float32(h[r] * w[j][k])
		}
		if bias != nil {
			acc += bias[j]
		}
		y[j] = acc
	}
	return y
}

func TestLinearScatterInMatchesReference(t *testing.T) {
	r := newRand(11)
	for _, sh := range []struct{ in, out int }{{1, 1}, {9, 7}, {300, 70}, {70, 600}} {
		for _, dt := range allDTypes {
			for _, tr := range []bool{false, true} {
				for _, step := range []int{1, 4, 50} {
					name := fmt.Sprintf("in%d_out%d_%v_T%v_step%d", sh.in, sh.out, dt, tr, step)
					w, logical := testMat(r, dt, sh.out, sh.in, tr)
					idx := pickIdx(sh.in, step)
					h := randVec(r, len(idx))
					for _, bias := range [][]float32{nil, randVec(r, sh.out)} {
						want := refScatter(h, logical, bias, idx)
						h0 := clone32(h)
						g := newGuarded(sh.out)
						kernels.LinearScatterIn(g.s, h, w, bias, idx)
						g.check(t, name)
						if i := bitsEqual(g.s, want); i >= 0 {
							t.Fatalf("%s: y[%d] = %v, reference %v", name, i, g.s[i], want[i])
						}
						if bitsEqual(h, h0) >= 0 {
							t.Fatalf("%s: h was modified", name)
						}
					}
				}
			}
		}
	}
}

// TestLinearScatterInAllKeptEqualsLinear: with every input kept, the scatter
// is the full product, in the same order.
func TestLinearScatterInAllKeptEqualsLinear(t *testing.T) {
	r := newRand(12)
	for _, dt := range allDTypes {
		for _, tr := range []bool{false, true} {
			w, _ := testMat(r, dt, 65, 300, tr)
			x := randVec(r, 300)
			bias := randVec(r, 65)
			a, b := make([]float32, 65), make([]float32, 65)
			kernels.Linear(a, x, 1, w, bias, 1)
			kernels.LinearScatterIn(b, x, w, bias, pickIdx(300, 1))
			if i := bitsEqual(a, b); i >= 0 {
				t.Fatalf("%v T%v: scatter %v, linear %v at %d", dt, tr, b[i], a[i], i)
			}
		}
	}
}

func TestGatherScatterNaN(t *testing.T) {
	r := newRand(13)
	w, _ := testMat(r, kernels.F16, 20, 30, false)
	x := randVec(r, 30)
	x[4] = float32(math.NaN())
	y := make([]float32, 3)
	kernels.LinearGather(y, x, w, nil, []int32{0, 5, 19})
	for i, v := range y {
		if v == v {
			t.Fatalf("LinearGather: NaN input gave y[%d] = %v", i, v)
		}
	}
	h := []float32{1, float32(math.NaN())}
	out := make([]float32, 20)
	kernels.LinearScatterIn(out, h, w, nil, []int32{2, 29})
	for i, v := range out {
		if v == v {
			t.Fatalf("LinearScatterIn: NaN input gave y[%d] = %v", i, v)
		}
	}
}

// Dropping the exactly-zero inputs (+0 and −0, as ReLU leaves them) of a
// scattered product keeps its bits when the weights are finite: compared
// with the full product (dense Linear, every input kept) and with the
// scatter over the undropped kept set, for every dtype and layout, with and
// without a bias, on one and on two threads, with panels.
func TestDropZeroInputsKeepsTheBits(t *testing.T) {
	r := newRand(14)
	for _, dt := range allDTypes {
		for _, tr := range []bool{false, true} {
			w, _ := testMat(r, dt, 65, 300, tr)
			if !w.Finite() {
				t.Fatalf("%v: the test matrix is not finite", dt)
			}
			x := randVec(r, 300)
			for i := range x {
				switch i % 3 {
				case 0:
					x[i] = 0
				case 1:
					if i%2 == 0 {
						x[i] = float32(math.Copysign(0, -1))
					}
				}
			}
			for _, bias := range [][]float32{nil, randVec(r, 65)} {
				all := pickIdx(300, 1)
				want := make([]float32, 65)
				kernels.Linear(want, x, 1, w, bias, 1)
				h := append([]float32(nil), x...)
				hk, kept := kernels.DropZeroInputs(h, all, make([]int32, len(all)))
				if len(kept) == len(all) || len(kept) == 0 {
					t.Fatalf("%v: kept %d of %d: nothing was dropped", dt, len(kept), len(all))
				}
				for _, threads := range []int{1, 2} {
					got := make([]float32, 65)
					kernels.LinearScatterInParallel(got, hk, w, bias, kept, threads)
					if i := bitsEqual(want, got); i >= 0 {
						t.Fatalf("%v T%v bias %v threads %d: dropped %v, full %v at %d", dt, tr, bias != nil, threads, got[i], want[i], i)
					}
				}
				// A kept subset with zeros in it, dropped in place (keep = idx).
				sub := pickIdx(300, 2)
				hs := make([]float32, len(sub))
				for q, j := range sub {
					hs[q] = x[j]
				}
				full := make([]float32, 65)
				kernels.LinearScatterIn(full, hs, w, bias, sub)
				subCopy := append([]int32(nil), sub...)
				hd, kd := kernels.DropZeroInputs(hs, subCopy, subCopy)
				got := make([]float32, 65)
				kernels.LinearScatterIn(got, hd, w, bias, kd)
				if i := bitsEqual(full, got); i >= 0 {
					t.Fatalf("%v T%v subset: dropped %v, full %v at %d", dt, tr, got[i], full[i], i)
				}
			}
		}
	}
}

// Finite finds an infinity or a NaN anywhere in the storage, per dtype; a
// zero input meeting one is not dropped (0·Inf is NaN), which the engine's
// test of zero activations checks end to end.
func TestMatFinite(t *testing.T) {
	for _, dt := range allDTypes {
		for _, bad := range []float32{float32(math.Inf(1)), float32(math.Inf(-1)), float32(math.NaN())} {
			r := newRand(15)
			w, _ := testMat(r, dt, 9, 7, false)
			if !w.Finite() {
				t.Fatalf("%v: finite matrix reported not finite", dt)
			}
			switch dt {
			case kernels.F32:
				w.F32[62] = bad
			case kernels.F16:
				w.Half[62] = kernels.F16Bits(bad)
			default:
				w.Half[62] = kernels.BF16Bits(bad)
			}
			if w.Finite() {
				t.Fatalf("%v: %v at the last element not found", dt, bad)
			}
		}
	}
}
