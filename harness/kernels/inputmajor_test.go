package kernels_test

import (
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

// countingAlloc is a kernels.Allocator that counts the values it hands out.
type countingAlloc struct{ n int }

func (a *countingAlloc) Uint16s(n int) []uint16 { a.n += n; return make([]uint16, n) }

func (a *countingAlloc) Float32s(n int) []float32 { a.n += n; return make([]float32, n) }

// InputMajorIn keeps every logical element (Mat.Row reads the same bits from
// the copy as from the original), for each dtype and for shapes with one
// row, one column and neither, takes its storage from the allocator when
// given one, and refuses a matrix that is already Transposed.
func TestInputMajorInKeepsEveryElement(t *testing.T) {
	r := newRand(71)
	for _, dt := range []kernels.DType{kernels.F32, kernels.F16, kernels.BF16} {
		for _, shape := range [][2]int{{1, 1}, {1, 9}, {7, 1}, {5, 13}, {64, 3}} {
			out, in := shape[0], shape[1]
			w := &kernels.Mat{DType: dt, Out: out, In: in}
			if dt == kernels.F32 {
				w.F32 = randVec(r, out*in)
			} else {
				w.Half = make([]uint16, out*in)
				for i := range w.Half {
					w.Half[i] = uint16(r.Uint32())
				}
			}
			var a countingAlloc
			for _, alloc := range []kernels.Allocator{nil, &a} {
				tm := kernels.InputMajorIn(w, alloc)
				if !tm.Transposed || tm.Out != out || tm.In != in || tm.DType != dt {
					t.Fatalf("%v %dx%d: copy is %v %dx%d Transposed=%v", dt, out, in, tm.DType, tm.Out, tm.In, tm.Transposed)
				}
				want, got := make([]float32, in), make([]float32, in)
				for i := range out {
					w.Row(want, i)
					tm.Row(got, i)
					for k := range want {
						if math.Float32bits(want[k]) != math.Float32bits(got[k]) && !(want[k] != want[k] && got[k] != got[k]) {
							t.Fatalf("%v %dx%d: W[%d][%d] = %v in the copy, %v in the original", dt, out, in, i, k, got[k], want[k])
						}
					}
				}
			}
			if a.n != out*in {
				t.Fatalf("%v %dx%d: the allocator handed out %d values, want %d", dt, out, in, a.n, out*in)
			}
		}
	}
	tw := kernels.InputMajorIn(&kernels.Mat{DType: kernels.F32, Out: 2, In: 3, F32: make([]float32, 6)}, nil)
	mustPanic(t, "InputMajorIn", "already Transposed", func() { kernels.InputMajorIn(tw, nil) })
}
