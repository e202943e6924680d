package kernels_test

import (
	"testing"

	"sparsegate/harness/kernels"
)

func TestBadArgumentsPanic(t *testing.T) {
	f32 := func(out, in int) *kernels.Mat {
		return &kernels.Mat{DType: kernels.F32, Out: out, In: in, F32: make([]float32, out*in)}
	}
	f16 := func(out, in int) *kernels.Mat {
		return &kernels.Mat{DType: kernels.F16, Out: out, In: in, Half: make([]uint16, out*in)}
	}
	cases := []struct {
		name, want string
		f          func()
	}{
		{"Mat short F32", "Mat", func() { (&kernels.Mat{DType: kernels.F32, Out: 2, In: 3, F32: make([]float32, 5)}).Check() }},
		{"Mat F32 with Half", "Mat", func() {
			(&kernels.Mat{DType: kernels.F32, Out: 1, In: 1, F32: []float32{1}, Half: []uint16{1}}).Check()
		}},
		{"Mat short Half", "Mat", func() { (&kernels.Mat{DType: kernels.BF16, Out: 2, In: 2, Half: make([]uint16, 3)}).Check() }},
		{"Mat bad dtype", "DType", func() { (&kernels.Mat{DType: 7}).Check() }},
		{"Mat negative", "negative", func() { (&kernels.Mat{DType: kernels.F32, Out: -1, In: -1, F32: []float32{0}}).Check() }},
		{"Row index", "Row", func() { f32(2, 3).Row(make([]float32, 3), 2) }},
		{"DropZeroInputs idx", "DropZeroInputs", func() { kernels.DropZeroInputs(make([]float32, 3), make([]int32, 2), make([]int32, 3)) }},
		{"DropZeroInputs keep", "DropZeroInputs", func() { kernels.DropZeroInputs(make([]float32, 3), make([]int32, 3), make([]int32, 2)) }},
		{"Row len", "Row", func() { f32(2, 3).Row(make([]float32, 2), 0) }},
		{"Linear x", "len(x)", func() { kernels.Linear(make([]float32, 4), make([]float32, 5), 2, f32(2, 3), nil, 1) }},
		{"Linear y", "len(y)", func() { kernels.Linear(make([]float32, 5), make([]float32, 6), 2, f32(2, 3), nil, 1) }},
		{"Linear bias", "bias", func() {
			kernels.Linear(make([]float32, 4), make([]float32, 6), 2, f32(2, 3), make([]float32, 3), 1)
		}},
		{"Linear threads", "threads", func() { kernels.Linear(make([]float32, 4), make([]float32, 6), 2, f32(2, 3), nil, 0) }},
		{"Linear bad mat", "Mat", func() {
			kernels.Linear(make([]float32, 2), make([]float32, 3), 1, &kernels.Mat{DType: kernels.F16, Out: 2, In: 3}, nil, 1)
		}},
		{"Gemm len", "Gemm", func() { kernels.Gemm(make([]float32, 4), make([]float32, 4), make([]float32, 4), 2, 2, 3, 1) }},
		{"Gemm negative", "Gemm", func() { kernels.Gemm(nil, nil, nil, -1, 0, 0, 1) }},
		{"Gather not ascending", "LinearGather", func() {
			kernels.LinearGather(make([]float32, 2), make([]float32, 3), f16(4, 3), nil, []int32{2, 1})
		}},
		{"Gather duplicate", "LinearGather", func() {
			kernels.LinearGather(make([]float32, 2), make([]float32, 3), f16(4, 3), nil, []int32{1, 1})
		}},
		{"Gather out of range", "LinearGather", func() {
			kernels.LinearGather(make([]float32, 1), make([]float32, 3), f16(4, 3), nil, []int32{4})
		}},
		{"Gather negative", "LinearGather", func() {
			kernels.LinearGather(make([]float32, 1), make([]float32, 3), f16(4, 3), nil, []int32{-1})
		}},
		{"Gather y", "LinearGather", func() {
			kernels.LinearGather(make([]float32, 1), make([]float32, 3), f16(4, 3), nil, []int32{0, 1})
		}},
		{"Gather x", "LinearGather", func() {
			kernels.LinearGather(make([]float32, 1), make([]float32, 4), f16(4, 3), nil, []int32{0})
		}},
		{"Scatter idx", "LinearScatterIn", func() {
			kernels.LinearScatterIn(make([]float32, 4), make([]float32, 1), f16(4, 3), nil, []int32{3})
		}},
		{"Scatter h", "LinearScatterIn", func() {
			kernels.LinearScatterIn(make([]float32, 4), make([]float32, 2), f16(4, 3), nil, []int32{0})
		}},
		{"Scatter y", "LinearScatterIn", func() {
			kernels.LinearScatterIn(make([]float32, 3), make([]float32, 1), f16(4, 3), nil, []int32{0})
		}},
		{"Scatter bias", "LinearScatterIn", func() {
			kernels.LinearScatterIn(make([]float32, 4), make([]float32, 1), f16(4, 3), make([]float32, 3), []int32{0})
		}},
		{"F16ToF32", "conversion", func() { kernels.F16ToF32(make([]float32, 2), make([]uint16, 3)) }},
		{"BF16ToF32", "conversion", func() { kernels.BF16ToF32(make([]float32, 2), make([]uint16, 1)) }},
		{"F32ToF16", "conversion", func() { kernels.F32ToF16(make([]uint16, 2), make([]float32, 3)) }},
		{"F32ToBF16", "conversion", func() { kernels.F32ToBF16(make([]uint16, 2), make([]float32, 3)) }},
		{"Dot", "lengths", func() { kernels.Dot(make([]float32, 2), make([]float32, 3)) }},
		{"Axpy", "lengths", func() { kernels.Axpy(1, make([]float32, 2), make([]float32, 3)) }},
		{"Add", "lengths", func() { kernels.Add(make([]float32, 2), make([]float32, 2), make([]float32, 3)) }},
		{"Argmax", "Argmax", func() { kernels.Argmax(nil) }},
		{"LayerNorm", "norm", func() { kernels.LayerNorm(make([]float32, 3), make([]float32, 3), make([]float32, 2), nil, 1e-5) }},
		{"RMSNorm", "norm", func() { kernels.RMSNorm(make([]float32, 2), make([]float32, 3), nil, 1e-5) }},
		{"SiLUMul", "SiLUMul", func() { kernels.SiLUMul(make([]float32, 2), make([]float32, 3)) }},
		{"RopeInvFreq odd", "RopeInvFreq", func() { kernels.RopeInvFreq(7, 10000) }},
		{"RopeInvFreq theta", "RopeInvFreq", func() { kernels.RopeInvFreq(8, 0) }},
		{"Rope len", "Rope", func() { kernels.Rope(make([]float32, 6), 4, 0, make([]float32, 2)) }},
		{"Rope freq", "Rope", func() { kernels.Rope(make([]float32, 8), 4, 0, make([]float32, 3)) }},
		{"Rope headDim", "Rope", func() { kernels.Rope(make([]float32, 8), 0, 0, nil) }},
		{"Rope pos", "Rope", func() { kernels.Rope(make([]float32, 8), 4, -1, make([]float32, 2)) }},
	}
	for _, c := range cases {
		mustPanic(t, c.name, c.want, c.f)
	}
}
