package runner

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/harness/sparsity"
	"sparsegate/harness/synth"
	"sparsegate/suites"
)

// corpus is the synthetic models' tokenizer training text and the text the
// text probes score.
var corpus = func() string {
	var b strings.Builder
	animals := []string{"cat", "dog", "owl", "fox", "eel", "yak"}
	places := []string{"mat", "log", "hill", "barn", "pier", "road"}
	for i := range 60 {
		fmt.Fprintf(&b, "The %s sat on the %s by day %d.\n", animals[i%6], places[(i*5)%6], i)
	}
	return b.String()
}()

// itemsJSONL returns n items usable by choice and generation probes, with
// ids prefix-0 … and short contexts so few-shot prompts fit in 64 positions.
func itemsJSONL(prefix string, n int) string {
	var b strings.Builder
	words := []string{" mat", " log", " hill", " barn", " pier", " road"}
	for i := range n {
		o := []string{words[i%6], words[(i+1)%6], words[(i+3)%6]}
		a := (i * 2) % 3
		fmt.Fprintf(&b, `{"id":"%s-%d","context":"The %s sat on the","options":["%s","%s","%s"],"answer":%d,"target":"%s"}`+"\n",
			prefix, i, []string{"cat", "dog", "owl", "fox", "eel"}[i%5], o[0], o[1], o[2], a, o[a])
	}
	return b.String()
}

// mixedSuite has one probe of each per-item kind, for sharding and
// determinism tests.
const mixedSuite = `format: 1
name: mixed
probes:
  - name: ppl
    kind: perplexity
    text: text.txt
    window: 32
    stride: 12
  - name: mc
    kind: choice
    items: items.jsonl
    pool: pool.jsonl
    shots: 2
    seed: 3
  - name: mc-bytes
    kind: choice
    items: items.jsonl
    limit: 9
    score: per-byte
  - name: gen
    kind: generation
    items: items.jsonl
    pool: pool.jsonl
    shots: 1
    max_tokens: 4
    stop: ["\n", "."]
  - name: drift
    kind: drift
    text: text.txt
    max_bytes: 600
    window: 24
    stride: 8
  - name: flips
    kind: flips
  - name: flips-rev
    kind: flips
    about: of in another order than the suite's
    of: [gen, mc]
`

// writeSuite writes a suite file and its data files into a new directory
// and loads it.
func writeSuite(t testing.TB, yaml string, files map[string]string) *suites.Suite {
	t.Helper()
	dir := t.TempDir()
	for name, data := range files {
		p := filepath.Join(dir, filepath.FromSlash(name))
		require.NoError(t, os.MkdirAll(filepath.Dir(p), 0o755))
		require.NoError(t, os.WriteFile(p, []byte(data), 0o644))
	}
	file := filepath.Join(dir, "suite.yaml")
	require.NoError(t, os.WriteFile(file, []byte(yaml), 0o644))
	s, err := suites.Load(file)
	require.NoError(t, err)
	return s
}

// defaultFiles are the data files of mixedSuite.
func defaultFiles() map[string]string {
	return map[string]string{"text.txt": corpus, "items.jsonl": itemsJSONL("it", 14), "pool.jsonl": itemsJSONL("pool", 5)}
}

// writeModel writes a tiny synthetic OPT-family checkpoint with a tokenizer
// trained on corpus; edit may change its weights.
func writeModel(t testing.TB, seed uint64, edit func(string, []float32)) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "model")
	cfg := synth.Tiny(checkpoint.OPT)
	require.NoError(t, synth.WithTokenizer(dir, cfg, []string{corpus, itemsJSONL("x", 8)}, 300))
	require.NoError(t, synth.Write(dir, cfg, synth.Options{Seed: seed, Edit: edit}))
	return dir
}

// openTarget opens a checkpoint directory as a target with the given threads.
func openTarget(t testing.TB, dir string, threads int) *Target {
	t.Helper()
	tg, err := Open(dir, engine.Options{Threads: threads})
	require.NoError(t, err)
	t.Cleanup(func() { tg.Close() })
	return tg
}

// sparseTarget is a sparse build over base's model whose MLPs keep only the
// oracle top-k neurons per token, a candidate that differs from the base.
func sparseTarget(t testing.TB, base *Target, k int) *Target {
	t.Helper()
	m := base.Model
	man := &sparsity.Manifest{Base: sparsity.Base{Path: m.Dir, SHA256: base.Info.WeightsHash}}
	for l := range m.Config.Layers {
		man.Layers = append(man.Layers, sparsity.LayerRules{Layer: l,
			MLP: sparsity.Rule{Mode: sparsity.Oracle, K: k}, Attention: sparsity.Rule{Mode: sparsity.Dense}})
	}
	b, err := sparsity.New(m, man, nil)
	require.NoError(t, err)
	info := base.Info
	info.Path, info.Kind, info.ManifestHash = "oracle-build", "sparse", fmt.Sprintf("oracle-k%d", k)
	return &Target{Model: m, Build: b, Info: info}
}

// fixedClock makes Seconds zero.
func fixedClock() time.Time { return time.Unix(0, 0) }

// run runs s and fails the test on error.
func run(t testing.TB, s *suites.Suite, base, cand *Target, opts Options) *results.Results {
	t.Helper()
	if opts.Now == nil {
		opts.Now = fixedClock
	}
	r, err := Run(s, base, cand, opts)
	require.NoError(t, err)
	return r
}

func bytesReader(b []byte) *bytes.Reader { return bytes.NewReader(b) }
