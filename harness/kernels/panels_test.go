package kernels

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// These tests run under both build tags: with assembly, panelDot4 is the
// AVX2 kernel and is held to its Go twin and to the naive per-row loop; with
// noasm the twin itself is held to the naive loop. Every Linear path that
// reads panels is held to the same call without them, bit for bit.

var panelDTypes = []DType{F32, F16, BF16}

func newTestRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x9a9e1)) }

// withPanels returns a shallow copy of w that carries its panel copy.
func withPanels(w *Mat) *Mat {
	c := *w
	c.Panels = PackPanels(w)
	return &c
}

// The panel layout puts W[16p+i][k] at (p·In+k)·16+i, from either storage
// layout, and zero-fills the rows of the last panel past Out.
func TestPackPanelsLayout(t *testing.T) {
	r := newTestRand(1)
	for _, dt := range panelDTypes {
		for _, tr := range []bool{false, true} {
			w := randMat(r, dt, 37, 5)
			if tr { // the same logical matrix stored In×Out
				w = transposedCopy(w)
			}
			p := PackPanels(w)
			if got, want := int64(len(p.F32)+len(p.Half))*int64(map[bool]int{true: 4, false: 2}[dt == F32]), PanelBytes(w); got != want {
				t.Fatalf("%v: %d panel bytes, PanelBytes says %d", dt, got, want)
			}
			for j := range 48 {
				for k := range 5 {
					e := (j/16*5+k)*16 + j%16
					var got float32
					if dt == F32 {
						got = p.F32[e]
					} else {
						got = (&Mat{DType: dt, Out: 1, In: 1, Half: p.Half[e : e+1]}).at(0)
					}
					want := float32(0)
					if j < 37 {
						want = matRow(w, j)[k]
					}
					if !sameFloat(got, want) {
						t.Fatalf("%v transposed=%v: panel element for row %d, k %d is %v, want %v", dt, tr, j, k, got, want)
					}
				}
			}
		}
	}
	w := randMat(r, F16, 20, 3)
	w.Panels = &Panels{Half: make([]uint16, 20*3)} // Out×In, not the padded panel length
	func() {
		defer func() {
			if msg, _ := recover().(string); msg != msgPanelsLen {
				t.Fatalf("short panels: recovered %q, want %q", msg, msgPanelsLen)
			}
		}()
		w.Check()
	}()
}

// transposedCopy returns w (Out×In) stored In×Out.
func transposedCopy(w *Mat) *Mat {
	c := &Mat{DType: w.DType, Out: w.Out, In: w.In, Transposed: true}
	if w.DType == F32 {
		c.F32 = make([]float32, len(w.F32))
	} else {
		c.Half = make([]uint16, len(w.Half))
	}
	for j := range w.Out {
		for k := range w.In {
			if w.DType == F32 {
				c.F32[k*w.Out+j] = w.F32[j*w.In+k]
			} else {
				c.Half[k*w.Out+j] = w.Half[j*w.In+k]
			}
		}
	}
	return c
}

// checkPanelDot4 compares panelDot4, its twin and the naive loop on the
// listed panels of wp (which carries panels).
func checkPanelDot4(t *testing.T, name string, wp *Mat, x []float32, list [panelGroup]int) {
	t.Helper()
	var fast, twin [panelGroup * PanelRows]float32
	for i := range fast { // stale values must not leak in
		fast[i], twin[i] = 7, 7
	}
	panelDot4(&fast, x, wp, &list)
	panelDot4Go(&twin, x, wp, &list)
	for q, p := range list {
		for i := range PanelRows {
			j := p*PanelRows + i
			want := float32(0)
			if j < wp.Out {
				want = naiveRowDot(0, x, matRow(wp, j))
			} else {
				want = naiveRowDot(0, x, make([]float32, wp.In))
			}
			got, tw := fast[q*PanelRows+i], twin[q*PanelRows+i]
			if !sameFloat(got, want) || !sameFloat(tw, want) {
				t.Fatalf("%s: panel %d row %d: kernel %v (%08x), twin %v (%08x), naive %v (%08x)", name, p, j,
					got, math.Float32bits(got), tw, math.Float32bits(tw), want, math.Float32bits(want))
			}
		}
	}
}

// The four-panel kernel (assembly where available) equals the twin and the
// naive per-row loop for k extents from 1 up, panel counts that leave a
// short last panel, and repeated or out-of-order panel lists.
func TestPanelDot4MatchesTwinAndNaive(t *testing.T) {
	r := newTestRand(2)
	for _, dt := range panelDTypes {
		for _, in := range []int{1, 2, 7, 8, 9, 31, 64, 129, 768} {
			for _, out := range []int{1, 15, 16, 17, 64, 70} {
				wp := withPanels(randMat(r, dt, out, in))
				x := make([]float32, in)
				for k := range x {
					x[k] = float32(r.NormFloat64())
				}
				np := panelCount(out)
				lists := [][panelGroup]int{{0, 0, 0, 0}, {np - 1, 0, np - 1, 0}}
				if np >= 4 {
					lists = append(lists, [panelGroup]int{0, 1, 2, 3}, [panelGroup]int{3, 1, 4 % np, 2})
				}
				for _, l := range lists {
					checkPanelDot4(t, fmt.Sprintf("%v %dx%d %v", dt, out, in, l), wp, x, l)
				}
			}
		}
	}
}

// NaN and ±Inf in the weights or in x propagate as in the naive loop, and
// signed zeros keep their sign rules, in every lane of every panel.
func TestPanelDot4SpecialValues(t *testing.T) {
	r := newTestRand(3)
	nan := float32(math.NaN())
	inf := float32(math.Inf(1))
	for _, dt := range panelDTypes {
		for _, in := range []int{1, 9, 40} {
			w := randMat(r, dt, 64, in)
			for j := range 64 {
				switch j % 8 {
				case 1:
					setStored(w, j*in+r.IntN(in), nan, 0)
				case 2:
					setStored(w, j*in+r.IntN(in), inf, 0)
				case 3:
					setStored(w, j*in+r.IntN(in), -inf, 0)
				case 4:
					for k := range in {
						setStored(w, j*in+k, float32(math.Copysign(0, -1)), 0)
					}
				}
			}
			wp := withPanels(w)
			x := make([]float32, in)
			for k := range x {
				x[k] = float32(r.NormFloat64())
			}
			checkPanelDot4(t, fmt.Sprintf("%v in=%d weights", dt, in), wp, x, [panelGroup]int{0, 1, 2, 3})
			x[in/2] = nan
			checkPanelDot4(t, fmt.Sprintf("%v in=%d NaN x", dt, in), wp, x, [panelGroup]int{0, 1, 2, 3})
			x[in/2] = -inf
			checkPanelDot4(t, fmt.Sprintf("%v in=%d -Inf x", dt, in), wp, x, [panelGroup]int{3, 2, 1, 0})
		}
	}
}

// Linear reads the panels for m == 1 and in the GEMM's packing, and gives
// the bits it gives without them, for both storage layouts, any thread
// count, shapes below and around a tile and a panel, with a bias or not;
// no element outside y is written.
func TestLinearWithPanelsSameBits(t *testing.T) {
	r := newTestRand(4)
	for _, dt := range panelDTypes {
		for _, sh := range []struct{ out, in int }{{1, 1}, {5, 3}, {16, 16}, {17, 9}, {33, 130}, {130, 33}, {200, 64}} {
			for _, tr := range []bool{false, true} {
				w := randMat(r, dt, sh.out, sh.in)
				if tr {
					w = transposedCopy(w)
				}
				wp := withPanels(w)
				bias := make([]float32, sh.out)
				for j := range bias {
					bias[j] = float32(r.NormFloat64())
				}
				for _, m := range []int{1, 3, 70} {
					x := make([]float32, m*sh.in)
					for i := range x {
						x[i] = float32(r.NormFloat64())
					}
					for _, b := range [][]float32{nil, bias} {
						want := make([]float32, m*sh.out)
						Linear(want, x, m, w, b, 1)
						for _, threads := range []int{1, 3} {
							buf := make([]float32, m*sh.out+32)
							for i := range buf {
								buf[i] = -9
							}
							got := buf[16 : 16+m*sh.out]
							Linear(got, x, m, wp, b, threads)
							name := fmt.Sprintf("%v %dx%d transposed=%v m=%d bias=%v threads=%d", dt, sh.out, sh.in, tr, m, b != nil, threads)
							for i := range got {
								if !sameFloat(got[i], want[i]) {
									t.Fatalf("%s: y[%d] = %v with panels, %v without", name, i, got[i], want[i])
								}
							}
							for i := range 16 {
								if buf[i] != -9 || buf[len(buf)-1-i] != -9 {
									t.Fatalf("%s: wrote outside y", name)
								}
							}
						}
					}
				}
			}
		}
	}
}

// LinearGather and LinearGatherParallel read the panels for index runs that
// cover whole panels (kept heads' rows) and the rows for the rest, with the
// bits of the same gather without panels.
func TestLinearGatherWithPanelsSameBits(t *testing.T) {
	r := newTestRand(5)
	span := func(lo, hi int) []int32 {
		var s []int32
		for j := lo; j < hi; j++ {
			s = append(s, int32(j))
		}
		return s
	}
	for _, dt := range panelDTypes {
		const out, in = 200, 48
		w := randMat(r, dt, out, in)
		wp := withPanels(w)
		bias := make([]float32, out)
		for j := range bias {
			bias[j] = float32(r.NormFloat64())
		}
		x := make([]float32, in)
		for k := range x {
			x[k] = float32(r.NormFloat64())
		}
		var scattered []int32
		for j := 3; j < out; j += 7 {
			scattered = append(scattered, int32(j))
		}
		sets := map[string][]int32{
			"all":        span(0, out),
			"heads":      append(span(16, 48), span(96, 128)...),
			"mixed":      append(append(span(5, 40), span(64, 80)...), 150, 199),
			"unaligned":  span(1, 17),
			"scattered":  scattered,
			"six panels": span(32, 128),
		}
		for name, idx := range sets {
			for _, b := range [][]float32{nil, bias} {
				want := make([]float32, len(idx))
				LinearGather(want, x, w, b, idx)
				got := make([]float32, len(idx))
				LinearGather(got, x, wp, b, idx)
				par := make([]float32, len(idx))
				LinearGatherParallel(par, x, wp, b, idx, 3)
				for i := range want {
					if !sameFloat(got[i], want[i]) || !sameFloat(par[i], want[i]) {
						t.Fatalf("%v %s bias=%v: y[%d] (row %d) = %v, parallel %v, without panels %v", dt, name, b != nil, i, idx[i], got[i], par[i], want[i])
					}
				}
			}
		}
	}
}
