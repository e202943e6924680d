package engine

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
	"sparsegate/harness/synth"
	"sparsegate/harness/torchref"
)

// The numerical reference is PyTorch (Debian package python3-torch, 1.13.1 on
// Debian 12), driven by testdata/torchref/torchref.py: an independent forward
// pass in torch.nn.functional ops that reads the same checkpoint files.
// SPARSEGATE_REQUIRE_REFERENCE=1 (set by .ci/run) turns a missing torch into
// a failure, so the check cannot silently vanish in CI.
const systemPython = torchref.Python

func requireTorch(t *testing.T) { torchref.Require(t) }

type torchIn struct {
	Sequences [][]int    `json:"sequences"`
	Generate  []torchGen `json:"generate"`
}

type torchGen struct {
	Prompt  []int `json:"prompt"`
	MaxNew  int   `json:"max_new_tokens"`
	StopIDs []int `json:"stop_ids,omitempty"`
}

type torchOut struct {
	Logits    [][][]float64 `json:"logits"`
	Generated [][]int       `json:"generated"`
}

func runTorch(t *testing.T, dir string, in torchIn) torchOut {
	t.Helper()
	inPath, outPath := filepath.Join(dir, "ref-in.json"), filepath.Join(dir, "ref-out.json")
	b, err := json.Marshal(in)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(inPath, b, 0o644))
	cmd := exec.Command(systemPython, filepath.Join("testdata", "torchref", "torchref.py"),
		"--model", dir, "--input", inPath, "--output", outPath, "--threads", "2")
	outB, err := cmd.CombinedOutput()
	require.NoError(t, err, "torchref.py: %s", outB)
	var out torchOut
	b, err = os.ReadFile(outPath)
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(b, &out))
	return out
}

// refConfig is a small model of the family, big enough to exercise every
// path (several layers and heads, grouped-query attention for llama).
func refConfig(f checkpoint.Family) *checkpoint.Config {
	c := synth.Tiny(f)
	c.VocabSize, c.Hidden, c.Layers, c.Heads, c.HeadDim, c.FFN, c.MaxPositions = 211, 64, 3, 4, 16, 160, 96
	c.KVHeads = 4
	if f == checkpoint.Llama {
		c.KVHeads = 2
		c.TiedHead = false
	}
	return c
}

// engineLogits runs one sequence and returns its per-position logits.
func engineLogits(t *testing.T, m *Model, toks []int) [][]float32 {
	t.Helper()
	s := m.NewSession()
	hidden, err := m.Forward([]*Session{s}, [][]int{toks}, nil)
	require.NoError(t, err)
	V := m.Config.VocabSize
	flat := make([]float32, len(toks)*V)
	m.Logits(flat, hidden, len(toks))
	out := make([][]float32, len(toks))
	for i := range out {
		out[i] = flat[i*V : (i+1)*V]
	}
	return out
}

func TestMatchesPyTorchReference(t *testing.T) {
	requireTorch(t)
	for _, f := range families {
		for _, dt := range []checkpoint.DType{checkpoint.F32, checkpoint.F16, checkpoint.BF16} {
			t.Run(fmt.Sprintf("%s/%s", f, dt), func(t *testing.T) {
				dir := t.TempDir()
				cfg := refConfig(f)
				require.NoError(t, synth.Write(dir, cfg, synth.Options{Seed: 11, DType: dt}))
				m, err := Load(dir, Options{Threads: 2})
				require.NoError(t, err)
				defer m.Close()
				seqs := [][]int{seq(37, cfg.VocabSize, 1), seq(5, cfg.VocabSize, 2), seq(90, cfg.VocabSize, 3)}
				gens := []torchGen{{Prompt: seq(7, cfg.VocabSize, 4), MaxNew: 20}, {Prompt: seq(3, cfg.VocabSize, 5), MaxNew: 15}}
				ref := runTorch(t, dir, torchIn{Sequences: seqs, Generate: gens})
				require.Len(t, ref.Logits, len(seqs))
				// Tolerance from the issue: max |Δ| ≤ 1e-4 · max|logit| for f32
				// weights; 1e-3 relative for half-precision storage (both sides
				// compute in f32 from the same stored values, so the bound for
				// f32 holds there too in practice).
				tol := 1e-4
				if dt != checkpoint.F32 {
					tol = 1e-3
				}
				for i, s := range seqs {
					got := engineLogits(t, m, s)
					require.Len(t, ref.Logits[i], len(s))
					maxAbs, maxDiff := 0.0, 0.0
					for p := range got {
						for v := range got[p] {
							r := ref.Logits[i][p][v]
							maxAbs = math.Max(maxAbs, math.Abs(r))
							maxDiff = math.Max(maxDiff, math.Abs(float64(got[p][v])-r))
						}
					}
					t.Logf("sequence %d: max|logit| %.3g, max|Δ| %.3g (%.2g relative)", i, maxAbs, maxDiff, maxDiff/maxAbs)
					require.Greater(t, maxAbs, 1.0, "logits too flat to be a meaningful check")
					require.LessOrEqual(t, maxDiff, tol*maxAbs, "sequence %d", i)
				}
				for i, g := range gens {
					out, err := m.Generate(g.Prompt, GenerateOptions{MaxTokens: g.MaxNew})
					require.NoError(t, err)
					require.Equal(t, ref.Generated[i], out.Tokens, "greedy generation %d", i)
				}
			})
		}
	}
}
