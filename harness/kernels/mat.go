package kernels

// Mat is a read-only weight matrix of a linear map y = W·x with logical shape
// Out×In, kept in its stored dtype (weights are memory-mapped from disk and
// never converted as a whole).
//
// Storage is row-major Out×In, or row-major In×Out when Transposed is true
// (the fused/Conv1D layout some checkpoints use). Exactly one of F32 (DType
// F32) or Half (raw IEEE binary16 or bfloat16 bit patterns, DType F16 or
// BF16) holds Out*In values; the other is empty. Panels, when set, is the
// same matrix re-laid k-major by PackPanels; the m == 1 path, the gathers
// over whole panels and the GEMM's packing read it instead, with the same
// bits.
type Mat struct {
	DType      DType
	Out, In    int
	Transposed bool
	F32        []float32
	Half       []uint16
	Panels     *Panels
}

// Check panics with a constant "kernels: " message if the dtype is unknown,
// a dimension is negative, the storage length disagrees with Out*In, or
// Panels is set but not of the panel layout's length and dtype.
func (m *Mat) Check() {
	if m.Out < 0 || m.In < 0 {
		panic(msgMatShape)
	}
	n := m.Out * m.In
	switch m.DType {
	case F32:
		if len(m.F32) != n || len(m.Half) != 0 {
			panic(msgMatF32Len)
		}
	case F16, BF16:
		if len(m.Half) != n || len(m.F32) != 0 {
			panic(msgMatHalfLen)
		}
	default:
		panic(msgMatDType)
	}
	m.checkPanels()
}

// InputMajorIn copies the output-major (not Transposed) matrix w into In×Out
// storage, the Transposed layout, keeping its dtype, with the storage from a
// (the Go heap when a is nil): input k's Out weights become one contiguous
// run, which a scattered product over a few kept inputs reads as one stream
// each (LinearScatterIn). w's panel copy is not carried over.
func InputMajorIn(w *Mat, a Allocator) *Mat {
	w.Check()
	if w.Transposed {
		panic(msgInputMajor)
	}
	t := &Mat{DType: w.DType, Out: w.Out, In: w.In, Transposed: true}
	t.F32, t.Half = storage(w.DType, w.Out*w.In, a)
	if w.DType == F32 {
		transposeInto(t.F32, w.F32, w.Out, w.In)
	} else {
		transposeInto(t.Half, w.Half, w.Out, w.In)
	}
	return t
}

// storage returns zeroed storage for n values of dtype dt from a (the Go
// heap when a is nil): the float32 slice for F32, the half slice otherwise.
func storage(dt DType, n int, a Allocator) ([]float32, []uint16) {
	switch {
	case dt == F32 && a != nil:
		return a.Float32s(n), nil
	case dt == F32:
		return make([]float32, n), nil
	case a != nil:
		return nil, a.Uint16s(n)
	}
	return nil, make([]uint16, n)
}

// transposeInto writes the rows×cols row-major src into dst as cols×rows.
func transposeInto[T float32 | uint16](dst, src []T, rows, cols int) {
	for j := 0; j < rows; j++ {
		for k := 0; k < cols; k++ {
			dst[k*rows+j] = src[j*cols+k]
		}
	}
}

// Row sets dst[k] = W[i][k], the logical row i converted to float32, for
// k < In. len(dst) must equal In and 0 <= i < Out.
func (m *Mat) Row(dst []float32, i int) {
	m.Check()
	if i < 0 || i >= m.Out {
		panic(msgRowIndex)
	}
	if len(dst) != m.In {
		panic(msgRowLen)
	}
	if !m.Transposed {
		m.convertRange(dst, i*m.In)
		return
	}
	for k := range dst {
		dst[k] = m.at(k*m.Out + i)
	}
}

// convertRange converts the len(dst) stored values starting at offset off.
func (m *Mat) convertRange(dst []float32, off int) {
	switch m.DType {
	case F32:
		copy(dst, m.F32[off:off+len(dst)])
	case F16:
		f16ToF32Slice(dst, m.Half[off:off+len(dst)])
	case BF16:
		bf16ToF32Slice(dst, m.Half[off:off+len(dst)])
	}
}

// storedRange returns the stored values [off, off+n) as float32: the backing
// slice itself for F32, or a conversion into buf (len(buf) >= n) otherwise.
func (m *Mat) storedRange(buf []float32, off, n int) []float32 {
	if m.DType == F32 {
		return m.F32[off : off+n : off+n]
	}
	buf = buf[:n]
	m.convertRange(buf, off)
	return buf
}

// at returns stored element p converted to float32.
func (m *Mat) at(p int) float32 {
	switch m.DType {
	case F16:
		return F16Value(m.Half[p])
	case BF16:
		return BF16Value(m.Half[p])
	}
	return m.F32[p]
}

// Finite reports whether every stored value is finite (no infinity, no
// NaN). A sparse product may skip an input whose value is exactly zero only
// when the weights it would meet are finite: 0·Inf and 0·NaN are NaN.
func (m *Mat) Finite() bool {
	m.Check()
	switch m.DType {
	case F32:
		for _, v := range m.F32 {
			if v-v != 0 { // Inf - Inf and NaN - NaN are NaN
				return false
			}
		}
	case F16:
		for _, h := range m.Half {
			if h&0x7c00 == 0x7c00 {
				return false
			}
		}
	case BF16:
		for _, h := range m.Half {
			if h&0x7f80 == 0x7f80 {
				return false
			}
		}
	}
	return true
}
