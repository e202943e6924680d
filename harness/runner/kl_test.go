package runner

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os/exec"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/torchref"
)

func logs(p ...float64) []float64 {
	out := make([]float64, len(p))
	for i, v := range p {
		out[i] = math.Log(v)
	}
	return out
}

// Worked by hand: p = (1/2, 1/4, 1/4), q = (1/4, 1/2, 1/4).
//
//	KL(p ‖ q) = ½ ln(½ / ¼) + ¼ ln(¼ / ½) + ¼ ln(¼ / ¼)
//	          = ½ ln 2 − ¼ ln 2 + 0 = ¼ ln 2 ≈ 0.1732868 nats
//	KL(q ‖ p) = ¼ ln(¼ / ½) + ½ ln(½ / ¼) + 0 = ¼ ln 2 as well (a symmetric pair)
//
// and p = (1, 0, 0), q = (½, ¼, ¼): the zero terms of p contribute nothing,
// KL = 1 · ln(1 / ½) = ln 2.
func TestKLWorkedExample(t *testing.T) {
	p, q := logs(0.5, 0.25, 0.25), logs(0.25, 0.5, 0.25)
	require.InDelta(t, 0.25*math.Ln2, KL(p, q), 1e-15)
	require.InDelta(t, 0.1732868, KL(p, q), 1e-7)
	require.InDelta(t, 0.25*math.Ln2, KL(q, p), 1e-15)
	require.Zero(t, KL(p, p))
	onehot := []float64{0, math.Inf(-1), math.Inf(-1)}
	require.InDelta(t, math.Ln2, KL(onehot, logs(0.5, 0.25, 0.25)), 1e-15)
	// p = (0.9, 0.1), q = (0.5, 0.5): 0.9 ln 1.8 + 0.1 ln 0.2 = 0.3680642 (by hand, as above).
	require.InDelta(t, 0.9*math.Log(1.8)+0.1*math.Log(0.2), KL(logs(0.9, 0.1), logs(0.5, 0.5)), 1e-15)
	require.InDelta(t, 0.3680642, KL(logs(0.9, 0.1), logs(0.5, 0.5)), 1e-7)
}

// KL agrees with PyTorch's torch.nn.functional.kl_div(input=ln q, target=p,
// reduction="sum"), which computes Σ p (ln p − input), i.e. KL(p ‖ q)
// (PyTorch documentation of torch.nn.functional.kl_div / KLDivLoss), on
// random distributions, some with near-zero entries.
func TestKLMatchesTorch(t *testing.T) {
	torchref.Require(t)
	r := rand.New(rand.NewPCG(7, 8))
	var ps, qs [][]float64
	for i := range 6 {
		n := 3 + 40*i
		p, q := make([]float64, n), make([]float64, n)
		sp, sq := 0.0, 0.0
		for j := range n {
			p[j], q[j] = math.Exp(4*r.NormFloat64()), math.Exp(4*r.NormFloat64())
			sp, sq = sp+p[j], sq+q[j]
		}
		for j := range n {
			p[j], q[j] = math.Log(p[j]/sp), math.Log(q[j]/sq)
		}
		ps, qs = append(ps, p), append(qs, q)
	}
	in, err := json.Marshal(map[string]any{"lp": ps, "lq": qs})
	require.NoError(t, err)
	const script = `
import json, sys, torch
import torch.nn.functional as F
d = json.load(sys.stdin)
out = [F.kl_div(torch.tensor(lq, dtype=torch.float64), torch.tensor(lp, dtype=torch.float64).exp(), reduction="sum").item()
       for lp, lq in zip(d["lp"], d["lq"])]
print(json.dumps(out))
`
	cmd := exec.Command(torchref.Python, "-c", script)
	cmd.Stdin = bytesReader(in)
	out, err := cmd.Output()
	require.NoError(t, err)
	var want []float64
	require.NoError(t, json.Unmarshal(out, &want))
	require.Len(t, want, len(ps))
	for i := range ps {
		got := KL(ps[i], qs[i])
		t.Logf("n=%d: KL %.10g, torch %.10g", len(ps[i]), got, want[i])
		require.InDelta(t, want[i], got, 1e-12*max(1, math.Abs(want[i])), i)
	}
}
