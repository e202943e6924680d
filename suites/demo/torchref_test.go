package demo

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/engine"
	"sparsegate/harness/torchref"
)

// The engine's logits on the demo model match the PyTorch reference
// (Debian's python3-torch through harness/engine/testdata/torchref/torchref.py,
// an independent forward pass) within the engine's tolerance: max |Δ| ≤ 1e-4 ·
// max|logit|. SPARSEGATE_REQUIRE_REFERENCE=1 turns a missing torch into a failure.
func TestMatchesPyTorchReference(t *testing.T) {
	const python = torchref.Python
	torchref.Require(t)
	m := loadDemo(t)
	text, err := os.ReadFile(filepath.Join("data", "heldout.txt"))
	require.NoError(t, err)
	seqs := [][]int{
		m.Tokenizer.EncodeForModel(string(text[:900])),
		m.Tokenizer.EncodeForModel(string(text[5000:5400])),
	}
	dir := t.TempDir()
	in, _ := json.Marshal(map[string]any{"sequences": seqs, "generate": []map[string]any{{"prompt": seqs[1][:40], "max_new_tokens": 24}}})
	require.NoError(t, os.WriteFile(filepath.Join(dir, "in.json"), in, 0o644))
	out, err := exec.Command(python, "../../harness/engine/testdata/torchref/torchref.py", "--model", "model",
		"--input", filepath.Join(dir, "in.json"), "--output", filepath.Join(dir, "out.json"), "--threads", "2").CombinedOutput()
	require.NoError(t, err, "%s", out)
	var ref struct {
		Logits    [][][]float64 `json:"logits"`
		Generated [][]int       `json:"generated"`
	}
	b, err := os.ReadFile(filepath.Join(dir, "out.json"))
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(b, &ref))
	V := m.Config.VocabSize
	for i, s := range seqs {
		sess := m.NewSession()
		hidden, err := m.Forward([]*engine.Session{sess}, [][]int{s}, nil)
		require.NoError(t, err)
		logits := make([]float32, len(s)*V)
		m.Logits(logits, hidden, len(s))
		maxAbs, maxDiff := 0.0, 0.0
		for p := range s {
			for v := 0; v < V; v++ {
				r := ref.Logits[i][p][v]
				maxAbs = math.Max(maxAbs, math.Abs(r))
				maxDiff = math.Max(maxDiff, math.Abs(float64(logits[p*V+v])-r))
			}
		}
		t.Logf("sequence %d (%d tokens): max|logit| %.3g, max|Δ| %.3g (%.2g relative)", i, len(s), maxAbs, maxDiff, maxDiff/maxAbs)
		require.LessOrEqual(t, maxDiff, 1e-4*maxAbs)
	}
	g, err := m.Generate(seqs[1][:40], engine.GenerateOptions{MaxTokens: 24})
	require.NoError(t, err)
	require.Equal(t, ref.Generated[0], g.Tokens)
}
