package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/sparsity"
)

// The demo model and data in the source tree, relative to this package.
const (
	demoModelSrc = "../../suites/demo/model"
	demoDataSrc  = "../../suites/demo/data"
)

// demoLayers is the demo model's layer count (its config.json;
// TestDemoLayersMatchConfig checks it).
const demoLayers = 6

// abs returns the absolute form of a path, failing the test on error.
func abs(t testing.TB, p string) string {
	t.Helper()
	a, err := filepath.Abs(p)
	require.NoError(t, err)
	return a
}

// headBytes returns the first n bytes of a file, cut back to its last line end.
func headBytes(t testing.TB, path string, n int) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	require.NoError(t, err)
	if len(b) > n {
		b = b[:n]
	}
	if i := bytes.LastIndexByte(b, '\n'); i >= 0 {
		b = b[:i+1]
	}
	return b
}

// headLines returns the first n lines of a file.
func headLines(t testing.TB, path string, n int) []byte {
	t.Helper()
	f, err := os.Open(path)
	require.NoError(t, err)
	defer f.Close()
	var out bytes.Buffer
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for i := 0; i < n && sc.Scan(); i++ {
		out.Write(sc.Bytes())
		out.WriteByte('\n')
	}
	require.NoError(t, sc.Err())
	return out.Bytes()
}

// writeSuite writes a suite file into a new temporary directory next to
// small slices of the demo data (data/heldout.txt: the first 6000 bytes;
// data/status.jsonl: 16 items; data/status-pool.jsonl: 24 solved examples)
// and returns the suite file's absolute path.
func writeSuite(t testing.TB, yaml string) string {
	t.Helper()
	dir := t.TempDir()
	data := filepath.Join(dir, "data")
	require.NoError(t, os.MkdirAll(data, 0o755))
	files := map[string][]byte{
		"heldout.txt":       headBytes(t, filepath.Join(demoDataSrc, "heldout.txt"), 6000),
		"status.jsonl":      headLines(t, filepath.Join(demoDataSrc, "items", "status.jsonl"), 16),
		"status-pool.jsonl": headLines(t, filepath.Join(demoDataSrc, "pools", "status.jsonl"), 24),
	}
	for name, b := range files {
		require.NoError(t, os.WriteFile(filepath.Join(data, name), b, 0o644))
	}
	p := filepath.Join(dir, "suite.yaml")
	require.NoError(t, os.WriteFile(p, []byte(yaml), 0o644))
	return p
}

// smallSuite has a perplexity probe on 2000 bytes and a 12-item choice probe:
// the fast suite of the run and golden tests.
const smallSuite = `format: 1
name: cmdtest
probes:
  - name: ppl
    kind: perplexity
    text: data/heldout.txt
    max_bytes: 2000
    window: 128
    stride: 64
    gate:
      perplexity: {rel: 0.03}
  - name: status-mc
    kind: choice
    items: data/status.jsonl
    pool: data/status-pool.jsonl
    shots: 2
    limit: 12
    gate:
      accuracy: {abs: 0.1}
`

// shardSuite adds generation, flips and drift probes to smallSuite's kinds:
// every per-item kind that sharding splits.
const shardSuite = `format: 1
name: cmdshard
probes:
  - name: ppl
    kind: perplexity
    text: data/heldout.txt
    max_bytes: 2000
    window: 128
    stride: 64
    gate:
      perplexity: {rel: 0.03}
  - name: status-mc
    kind: choice
    items: data/status.jsonl
    pool: data/status-pool.jsonl
    shots: 2
    limit: 12
    gate:
      accuracy: {abs: 0.1}
  - name: status-gen
    kind: generation
    items: data/status.jsonl
    pool: data/status-pool.jsonl
    shots: 2
    limit: 8
    max_tokens: 4
    gate:
      exact_match: {abs: 0.1}
  - name: flips
    kind: flips
    gate:
      lost: {abs: 3}
  - name: drift
    kind: drift
    text: data/heldout.txt
    max_bytes: 1500
    window: 128
    stride: 64
    gate:
      kl_mean: {abs: 0.02, rel: 0.25}
`

// weightsHash is the SHA-256 of a checkpoint's weights, as a build manifest names its base.
func weightsHash(t testing.TB, dir string) string {
	t.Helper()
	w, err := checkpoint.OpenWeights(dir)
	require.NoError(t, err)
	defer w.Close()
	h, err := w.SHA256()
	require.NoError(t, err)
	return h
}

// writeBuild writes a sparse build over the checkpoint base (any path) into
// a new temporary directory, with rules(layer) giving each layer's MLP and
// attention rules, and returns the build directory.
func writeBuild(t testing.TB, base string, rules func(layer int) (mlp, attention sparsity.Rule)) string {
	t.Helper()
	base = abs(t, base)
	m := &sparsity.Manifest{Base: sparsity.Base{Path: base, SHA256: weightsHash(t, base)}}
	for l := range demoLayers {
		mlp, att := rules(l)
		m.Layers = append(m.Layers, sparsity.LayerRules{Layer: l, MLP: mlp, Attention: att})
	}
	dir := t.TempDir()
	require.NoError(t, m.Save(dir))
	return dir
}

// oracle is an oracle top-k rule.
func oracle(k int) sparsity.Rule { return sparsity.Rule{Mode: sparsity.Oracle, K: k} }

// dense is the dense rule.
func dense() sparsity.Rule { return sparsity.Rule{Mode: sparsity.Dense} }

// static keeps the units 0 … n−1 for every token.
func static(n int) sparsity.Rule {
	keep := make([]int, n)
	for i := range keep {
		keep[i] = i
	}
	return sparsity.Rule{Mode: sparsity.Static, Keep: keep}
}

// secondsField matches a "seconds" field of indented JSON with its value.
var secondsField = regexp.MustCompile(`"seconds": -?[0-9][0-9.eE+-]*`)

// zeroSeconds sets every "seconds" field of a JSON document to 0, leaving
// every other byte as it is, so outputs that differ only in wall times
// compare byte for byte. It fails the test on invalid JSON or on a document
// without any seconds field (the pattern would then be stale).
func zeroSeconds(t testing.TB, b []byte) string {
	t.Helper()
	require.True(t, json.Valid(b), "not JSON: %s", b)
	require.True(t, secondsField.Match(b), "no seconds field in %s", b)
	return secondsField.ReplaceAllString(string(b), `"seconds": 0`)
}

// junitTime matches the time attributes of JUnit XML.
var junitTime = regexp.MustCompile(`time="[^"]*"`)

// zeroJUnitTimes blanks every time attribute of a JUnit XML document.
func zeroJUnitTimes(b []byte) string { return junitTime.ReplaceAllString(string(b), `time="0"`) }

// readFile reads a file the test expects to exist.
func readFile(t testing.TB, p string) []byte {
	t.Helper()
	b, err := os.ReadFile(p)
	require.NoError(t, err)
	return b
}

// corruptCopy copies the checkpoint in src into a new temporary directory
// with the sign of every element of the named F16 tensors flipped (the top
// bit of each little-endian binary16 value), and returns the directory.
func corruptCopy(t testing.TB, src string, tensors ...string) string {
	t.Helper()
	dst := t.TempDir()
	entries, err := os.ReadDir(src)
	require.NoError(t, err)
	for _, e := range entries {
		if e.IsDir() || e.Name() == checkpoint.SingleFileName {
			continue
		}
		require.NoError(t, os.WriteFile(filepath.Join(dst, e.Name()), readFile(t, filepath.Join(src, e.Name())), 0o644))
	}
	f, err := checkpoint.Open(filepath.Join(src, checkpoint.SingleFileName))
	require.NoError(t, err)
	defer f.Close()
	flip := map[string]bool{}
	for _, n := range tensors {
		flip[n] = true
	}
	var out []checkpoint.NamedTensor
	for _, tn := range f.Tensors() {
		data := bytes.Clone(tn.Bytes())
		if flip[tn.Name] {
			require.Equal(t, checkpoint.F16, tn.DType, tn.Name)
			for i := 1; i < len(data); i += 2 {
				data[i] ^= 0x80
			}
			delete(flip, tn.Name)
		}
		out = append(out, checkpoint.NamedTensor{Name: tn.Name, DType: tn.DType, Shape: tn.Shape, Data: data})
	}
	require.Empty(t, flip, "tensors not in %s", src)
	require.NoError(t, checkpoint.Write(filepath.Join(dst, checkpoint.SingleFileName), out, f.Metadata()))
	return dst
}
