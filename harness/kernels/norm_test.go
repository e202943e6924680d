package kernels_test

import (
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

func TestSoftmax(t *testing.T) {
	r := newRand(50)
	for _, n := range []int{1, 2, 7, 300} {
		x := randVec(r, n)
		for i := range x {
			x[i] *= 20
		}
		// Reference: exp(x_i)/Σ exp(x_j) in float64 around the max (common practice, no source).
		mx := math.Inf(-1)
		for _, v := range x {
			mx = math.Max(mx, float64(v))
		}
		var sum float64
		for _, v := range x {
			sum += math.Exp(float64(v) - mx)
		}
		want := make([]float64, n)
		for i, v := range x {
			want[i] = math.Exp(float64(v)-mx) / sum
		}
		shift := make([]float64, n)
		for i, v := range x {
			shift[i] = mx - float64(v)
		}
		kernels.Softmax(x)
		var total float64
		for i, v := range x {
			// The float32 path: x_i − max rounds by up to half an ulp of the
			// difference d (a relative error of d·2^-24 in e^−d), exp32 adds
			// 2 ulp, the sum and the scaling one each.
			tol := (4 + shift[i]) * 0x1p-24 * want[i]
			if math.Abs(float64(v)-want[i]) > tol {
				t.Fatalf("Softmax n=%d [%d] = %v, want %v (tolerance %v)", n, i, v, want[i], tol)
			}
			total += float64(v)
		}
		if math.Abs(total-1) > 1e-5 {
			t.Fatalf("Softmax n=%d sums to %v", n, total)
		}
	}
	// Large inputs would overflow exp without the max shift.
	x := []float32{1000, 1000, -math.MaxFloat32}
	kernels.Softmax(x)
	if x[0] != 0.5 || x[1] != 0.5 || x[2] != 0 {
		t.Fatalf("Softmax large = %v, want [0.5 0.5 0]", x)
	}
	x = []float32{1, float32(math.NaN()), 2}
	kernels.Softmax(x)
	for i, v := range x {
		if v == v {
			t.Fatalf("Softmax with NaN: [%d] = %v, want NaN", i, v)
		}
	}
	kernels.Softmax(nil) // must not panic
}

func TestLogSumExp(t *testing.T) {
	r := newRand(51)
	x := randVec(r, 50)
	var sum float64
	for _, v := range x {
		sum += math.Exp(float64(v))
	}
	// Float32 exponentials summed in float64: a relative error of a few
	// 2^-24 in the sum is an absolute one in its log.
	if got, want := kernels.LogSumExp(x), math.Log(sum); math.Abs(got-want) > 4*0x1p-24 {
		t.Fatalf("LogSumExp = %v, want %v", got, want)
	}
	if got, want := kernels.LogSumExp([]float32{1000, 1000}), 1000+math.Ln2; math.Abs(got-want) > 1e-9 {
		t.Fatalf("LogSumExp large = %v, want %v", got, want)
	}
	inf := float32(math.Inf(1))
	if got := kernels.LogSumExp(nil); !math.IsInf(got, -1) {
		t.Fatalf("LogSumExp(empty) = %v", got)
	}
	if got := kernels.LogSumExp([]float32{-inf, -inf}); !math.IsInf(got, -1) {
		t.Fatalf("LogSumExp(-Inf) = %v", got)
	}
	if got := kernels.LogSumExp([]float32{1, inf}); !math.IsInf(got, 1) {
		t.Fatalf("LogSumExp(+Inf) = %v", got)
	}
	if got := kernels.LogSumExp([]float32{inf, float32(math.NaN())}); !math.IsNaN(got) {
		t.Fatalf("LogSumExp(NaN) = %v", got)
	}
}

func TestLayerNorm(t *testing.T) {
	r := newRand(52)
	const n = 257
	x := randVec(r, n)
	for i := range x {
		x[i] = x[i]*3 + 0.7
	}
	gamma, beta := randVec(r, n), randVec(r, n)
	const eps = 1e-5
	// Reference: biased variance over the vector, as PyTorch's layer_norm
	// documents (y = (x − E[x])/√(Var[x] + eps)·γ + β).
	var mean, v float64
	for _, a := range x {
		mean += float64(a)
	}
	mean /= n
	for _, a := range x {
		v += (float64(a) - mean) * (float64(a) - mean)
	}
	v /= n
	x0 := clone32(x)
	g := newGuarded(n)
	kernels.LayerNorm(g.s, x, gamma, beta, eps)
	g.check(t, "LayerNorm")
	for i, a := range x {
		want := (float64(a)-mean)/math.Sqrt(v+eps)*float64(gamma[i]) + float64(beta[i])
		if math.Abs(float64(g.s[i])-want) > 1e-6*(1+math.Abs(want)) {
			t.Fatalf("LayerNorm[%d] = %v, want %v", i, g.s[i], want)
		}
	}
	if bitsEqual(x, x0) >= 0 {
		t.Fatal("LayerNorm modified x")
	}
	// Without affine parameters: zero mean, unit (biased) variance; and in place.
	y := clone32(x)
	kernels.LayerNorm(y, y, nil, nil, 0)
	var m2, v2 float64
	for _, a := range y {
		m2 += float64(a)
	}
	m2 /= n
	for _, a := range y {
		v2 += (float64(a) - m2) * (float64(a) - m2)
	}
	if math.Abs(m2) > 1e-6 || math.Abs(v2/n-1) > 1e-5 {
		t.Fatalf("LayerNorm in place: mean %v, var %v", m2, v2/n)
	}
}

func TestRMSNorm(t *testing.T) {
	r := newRand(53)
	const n = 129
	x, gamma := randVec(r, n), randVec(r, n)
	const eps = 1e-6
	// Reference: x/√(mean(x²)+eps)·γ (the RMS norm definition; common practice, no source).
	var ms float64
	for _, a := range x {
		ms += float64(a) * float64(a)
	}
	ms /= n
	g := newGuarded(n)
	kernels.RMSNorm(g.s, x, gamma, eps)
	g.check(t, "RMSNorm")
	for i, a := range x {
		want := float64(a) / math.Sqrt(ms+eps) * float64(gamma[i])
		if math.Abs(float64(g.s[i])-want) > 1e-6*(1+math.Abs(want)) {
			t.Fatalf("RMSNorm[%d] = %v, want %v", i, g.s[i], want)
		}
	}
	y := clone32(x)
	kernels.RMSNorm(y, y, nil, 0)
	var rms float64
	for _, a := range y {
		rms += float64(a) * float64(a)
	}
	if math.Abs(rms/n-1) > 1e-5 {
		t.Fatalf("RMSNorm in place: mean square %v, want 1", rms/n)
	}
	z := []float32{1, float32(math.NaN()), 2}
	kernels.RMSNorm(z, z, nil, 1e-6)
	for i, v := range z {
		if v == v {
			t.Fatalf("RMSNorm with NaN: [%d] = %v", i, v)
		}
	}
}
