package kernels_test

import (
	"math"
	"testing"

	"sparsegate/harness/kernels"
)

// closeTo reports whether got is within a couple of float32 ulps of want.
func closeTo(got float32, want float64) bool {
	if math.IsNaN(want) {
		return got != got
	}
	d := math.Abs(float64(got) - want)
	return d <= 2.5e-7*math.Abs(want)+1e-30
}

// activationInputs spans negative, zero, small and large arguments.
func activationInputs() []float32 {
	x := []float32{0, 1, -1, 0.5, -0.5, 3, -3, 8, -8, 20, -20, 1e-4, -1e-4}
	r := newRand(40)
	for range 200 {
		x = append(x, float32(r.Float64()*16-8))
	}
	return x
}

func TestGELUFormulas(t *testing.T) {
	in := activationInputs()
	g := clone32(in)
	kernels.GELU(g)
	gt := clone32(in)
	kernels.GELUTanh(gt)
	s := clone32(in)
	kernels.SiLU(s)
	for i, v := range in {
		x := float64(v)
		// GELU(x) = x·Φ(x) with Φ the standard normal CDF (common practice, no source).
		if want := x * 0.5 * math.Erfc(-x/math.Sqrt2); !closeTo(g[i], want) {
			t.Fatalf("GELU(%v) = %v, want %v", v, g[i], want)
		}
		// tanh form ½x(1+tanh u) (common practice, no source). Where 1+tanh u
		// cancels (x < -2) the reference uses the identity
		// 1 + tanh u = 2/(1 + e^(−2u)) instead.
		u := math.Sqrt(2/math.Pi) * (x + 0.044715*x*x*x)
		want := 0.5 * x * (1 + math.Tanh(u))
		if x < -2 {
			want = x / (1 + math.Exp(-2*u))
		}
		if !closeTo(gt[i], want) {
			t.Fatalf("GELUTanh(%v) = %v, want %v", v, gt[i], want)
		}
		// SiLU(x) = x·σ(x) (common practice, no source).
		if want := x / (1 + math.Exp(-x)); !closeTo(s[i], want) {
			t.Fatalf("SiLU(%v) = %v, want %v", v, s[i], want)
		}
	}
	// Φ(1) = 0.8413447460685429 (standard normal table; from memory), so GELU(1) is that and
	// GELU(-1) = 1 - Φ(1) negated.
	x := []float32{1, -1}
	kernels.GELU(x)
	if !closeTo(x[0], 0.8413447460685429) || !closeTo(x[1], -0.15865525393145707) {
		t.Fatalf("GELU(±1) = %v", x)
	}
}

// TestSiLUIdentity uses silu(x) − silu(−x) = x·(σ(x)+σ(−x)) = x.
func TestSiLUIdentity(t *testing.T) {
	in := activationInputs()
	pos, neg := clone32(in), clone32(in)
	for i := range neg {
		neg[i] = -neg[i]
	}
	kernels.SiLU(pos)
	kernels.SiLU(neg)
	for i, v := range in {
		if d := float64(pos[i]) - float64(neg[i]) - float64(v); math.Abs(d) > 1e-6*math.Max(1, math.Abs(float64(v))) {
			t.Fatalf("silu(%v) - silu(%v) = %v, want %v", v, -v, pos[i]-neg[i], v)
		}
	}
}

func TestSiLUMul(t *testing.T) {
	r := newRand(41)
	gate, up := randVec(r, 100), randVec(r, 100)
	for i := range gate {
		gate[i] *= 6
	}
	want := clone32(gate)
	kernels.SiLU(want)
	for i := range want {
		want[i] *= up[i]
	}
	up0 := clone32(up)
	kernels.SiLUMul(gate, up)
	if i := bitsEqual(gate, want); i >= 0 {
		t.Fatalf("SiLUMul[%d] = %v, want silu·up = %v", i, gate[i], want[i])
	}
	if bitsEqual(up, up0) >= 0 {
		t.Fatal("SiLUMul modified up")
	}
}

func TestActivationsNaN(t *testing.T) {
	for name, f := range map[string]func([]float32){"GELU": kernels.GELU, "GELUTanh": kernels.GELUTanh, "SiLU": kernels.SiLU} {
		x := []float32{float32(math.NaN()), 1}
		f(x)
		if x[0] == x[0] || x[1] != x[1] {
			t.Errorf("%s: NaN handling gave %v", name, x)
		}
	}
}
