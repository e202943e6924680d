package sparsity

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/torchref"
)

// Masked execution checked against the outside reference: the engine running
// a static mask through the hook must give the logits that PyTorch (Debian's
// python3-torch, through harness/engine/testdata/torchref/torchref.py, an
// independent forward pass) gives on the same base with the dropped neurons'
// and heads' weights zeroed (written by Prune). Tolerance as for the engine:
// max |Δ| ≤ 1e-4 · max|logit|.
func TestMaskedMatchesPyTorchOnZeroedWeights(t *testing.T) {
	const python = torchref.Python
	torchref.Require(t)
	for _, f := range []checkpoint.Family{checkpoint.OPT, checkpoint.GPT2, checkpoint.Llama} {
		t.Run(string(f), func(t *testing.T) {
			fx := newFixture(t, f, nil)
			cfg := fx.cfg
			man := &Manifest{Base: Base{Path: "../base", SHA256: fx.sha}, Layers: make([]LayerRules, cfg.Layers)}
			keep := map[Unit][]int{}
			for l := range cfg.Layers {
				var neurons, heads []int
				for i := 0; i < cfg.FFN; i++ {
					if (i+l)%3 != 0 {
						neurons = append(neurons, i)
					}
				}
				heads = []int{0, 1} // llama: the first key/value group only
				if f != checkpoint.Llama {
					heads = []int{1, 3}
				}
				man.Layers[l] = LayerRules{Layer: l, MLP: Rule{Mode: Static, Keep: neurons}, Attention: Rule{Mode: Static, Keep: heads}}
				keep[Unit{l, MLP}], keep[Unit{l, Attention}] = neurons, heads
			}
			b, err := New(fx.base, man, nil)
			require.NoError(t, err)
			pruned := filepath.Join(t.TempDir(), "pruned")
			require.NoError(t, Prune(fx.base, pruned, keep))

			toks := make([]int, 30)
			for i := range toks {
				toks[i] = (i*37 + 11) % cfg.VocabSize
			}
			s := fx.base.NewSession()
			hidden, err := fx.base.Forward([]*engine.Session{s}, [][]int{toks}, b.Hook(HookOptions{}))
			require.NoError(t, err)
			V := cfg.VocabSize
			got := make([]float32, len(toks)*V)
			fx.base.Logits(got, hidden, len(toks))

			in, _ := json.Marshal(map[string]any{"sequences": [][]int{toks}})
			inPath, outPath := filepath.Join(t.TempDir(), "in.json"), filepath.Join(t.TempDir(), "out.json")
			require.NoError(t, os.WriteFile(inPath, in, 0o644))
			out, err := exec.Command(python, "../engine/testdata/torchref/torchref.py", "--model", pruned,
				"--input", inPath, "--output", outPath).CombinedOutput()
			require.NoError(t, err, "%s", out)
			var ref struct {
				Logits [][][]float64 `json:"logits"`
			}
			raw, err := os.ReadFile(outPath)
			require.NoError(t, err)
			require.NoError(t, json.Unmarshal(raw, &ref))
			maxAbs, maxDiff := 0.0, 0.0
			for p := range toks {
				for v := 0; v < V; v++ {
					r := ref.Logits[0][p][v]
					maxAbs = math.Max(maxAbs, math.Abs(r))
					maxDiff = math.Max(maxDiff, math.Abs(float64(got[p*V+v])-r))
				}
			}
			t.Log(fmt.Sprintf("max|logit| %.3g, max|Δ| %.3g", maxAbs, maxDiff))
			require.LessOrEqual(t, maxDiff, 1e-4*maxAbs)
		})
	}
}
