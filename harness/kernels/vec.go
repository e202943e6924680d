package kernels

// Dot returns Σ a[i]·b[i], one float32 accumulator in ascending i with each
// product rounded before it is added (the order Linear uses).
// len(a) must equal len(b).
func Dot(a, b []float32) float32 {
	if len(a) != len(b) {
		panic(msgVecLen)
	}
	return dotAcc(0, a, b)
}

// DotStrided sets dst[j] = Σ_k x[k]·M[j·stride+off+k] over k < len(x) for
// j < len(dst): the dot products of x with len(dst) equally spaced rows of
// the flat matrix m (an attention head's query against the cached keys).
// Each is exactly Dot's value (one accumulator, ascending k, each product
// rounded); eight rows at a time run through the eight-row GEMV kernel. m
// must hold (len(dst)-1)·stride+off+len(x) values.
func DotStrided(dst, x, m []float32, stride, off int) {
	n, rows := len(x), len(dst)
	if rows == 0 {
		return
	}
	if off < 0 || stride < 0 || (rows-1)*stride+off+n > len(m) {
		panic(msgVecLen)
	}
	w := Mat{DType: F32, F32: m} // dot8Rows reads only the F32 storage at offs
	var offs [8]int
	j := 0
	for ; j+8 <= rows; j += 8 {
		for q := range offs {
			offs[q] = (j+q)*stride + off
		}
		var acc [8]float32
		dot8Rows(&acc, x, &w, &offs, nil)
		copy(dst[j:j+8], acc[:])
	}
	for ; j < rows; j++ {
		o := j*stride + off
		dst[j] = dotAcc(0, x, m[o:o+n])
	}
}

// Axpy does y[i] += alpha·x[i] (product rounded, then added).
// len(x) must equal len(y).
func Axpy(alpha float32, x, y []float32) {
	if len(x) != len(y) {
		panic(msgVecLen)
	}
	axpyAcc(alpha, x, y)
}

// Scale does x[i] *= alpha in place (eight lanes at a time in AVX2 where
// the CPU has it: the same rounded products).
func Scale(alpha float32, x []float32) {
	blocks := len(x) &^ 7
	if blocks > 0 {
		scaleBlocks(alpha, x[:blocks])
	}
	scaleGo(alpha, x[blocks:])
}

// scaleGo is Scale's portable body.
func scaleGo(alpha float32, x []float32) {
	for i := range x {
		x[i] *= alpha
	}
}

// Add sets dst[i] = a[i] + b[i]; dst may alias a or b. All three lengths
// must be equal.
func Add(dst, a, b []float32) {
	if len(a) != len(dst) || len(b) != len(dst) {
		panic(msgVecLen)
	}
	for i := range dst {
		dst[i] = a[i] + b[i]
	}
}

// Argmax returns the first index of the maximum of x (ties go to the lowest
// index). A NaN counts as larger than every number, so if x holds a NaN the
// index of the first NaN is returned. It panics on an empty slice.
func Argmax(x []float32) int {
	if len(x) == 0 {
		panic(msgArgmaxEmpty)
	}
	best := 0
	for i, v := range x {
		if v != v {
			return i
		}
		if v > x[best] {
			best = i
		}
	}
	return best
}

// ReLU does x[i] = max(x[i], 0) in place; NaN stays NaN and -0 becomes +0.
// With AVX2 blocks of eight run in assembly (compare ≤ 0, then clear those
// lanes), the same bits as reluGo.
func ReLU(x []float32) {
	blocks := len(x) &^ 7
	if blocks > 0 {
		reluBlocks(x[:blocks])
	}
	reluGo(x[blocks:])
}

// reluGo is ReLU's portable body.
func reluGo(x []float32) {
	for i, v := range x {
		if v <= 0 {
			x[i] = 0
		}
	}
}

// AxpyRows does y[i] += Σ_j alpha[j]·m[j·stride+off+i] for i < len(y), over
// j < len(alpha) in ascending order, skipping every j with alpha[j] == 0,
// each product rounded to float32 before it is added: the bits of calling
// Axpy(alpha[j], row j, y) for each such j in turn. It serves attention's
// weighted sum of cached values, whose rows sit stride apart; on amd64 with
// AVX2 it keeps y in registers across the rows, 64 or 32 lanes at a time.
func AxpyRows(y, alpha, m []float32, stride, off int) {
	rows, n := len(alpha), len(y)
	if rows == 0 || n == 0 {
		return
	}
	if off < 0 || stride < 0 || (rows-1)*stride+off+n > len(m) {
		panic(msgVecLen)
	}
	i := axpyRowsFast(y, alpha, m, stride, off)
	if i == n {
		return
	}
	for j, a := range alpha {
		if a != 0 {
			o := j*stride + off
			axpyAcc(a, m[o+i:o+n], y[i:])
		}
	}
}
