package suites

import (
	"os"
	"path/filepath"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"
)

func TestParseValidDefaults(t *testing.T) {
	s, err := Parse("s.yaml", []byte(validSuite), testFS(), nil)
	require.NoError(t, err)
	require.Equal(t, "t", s.Name)
	require.Equal(t, "a test suite", s.About)
	require.Len(t, s.Probes, 7)
	for i, k := range Kinds() {
		require.Equal(t, k, s.Probes[i].Kind)
	}

	ppl := s.Probe("ppl")
	require.Equal(t, 32, ppl.Window)
	require.Zero(t, ppl.Stride, "an unset stride stays 0: the runner uses window/2")
	require.Equal(t, []string{"data/text.txt"}, ppl.DataFiles())
	require.Equal(t, 5, ppl.Line)
	require.Equal(t, 5, ppl.Col)
	// A metric named without fields gets the catalogue's defaults.
	info, ok := Metric(Perplexity, "perplexity")
	require.True(t, ok)
	def := DefaultTolerance(info)
	def.Line, def.Col = 10, 7
	require.Equal(t, def, *ppl.Tolerance("perplexity"))
	require.Equal(t, Tolerance{Metric: "mean_nll", Better: LowerIsBetter, Abs: 0.1, Rel: 0, MaxFlips: -1, MaxFlipFraction: -1,
		Test: TestNone, Alpha: 0.05, Power: 0.8, Resamples: 2000, FailIf: FailIfLarge, Line: 11, Col: 7}, *ppl.Tolerance("mean_nll"))
	require.Nil(t, ppl.Tolerance("bits_per_byte"))

	mc := s.Probe("mc")
	require.Equal(t, uint64(1), mc.Seed)
	require.Equal(t, "\n\n", mc.Separator)
	require.Equal(t, "total", mc.Score)
	require.Equal(t, 1, mc.Shots)
	require.Equal(t, []string{"data/items.jsonl", "data/pool.jsonl"}, mc.DataFiles())
	acc := mc.Tolerance("accuracy")
	require.Equal(t, TestMcNemar, acc.Test)
	require.Equal(t, FailIfBoth, acc.FailIf, "a test without fail_if fails on large and significant")
	require.Equal(t, 0.05, acc.Abs)

	gen := s.Probe("gen")
	require.Equal(t, 16, gen.MaxTokens)
	require.Equal(t, []string{"\n"}, gen.Stop)
	require.Zero(t, gen.Shots)

	require.Equal(t, []string{"mc", "gen"}, s.Probe("flips").Of)
	sp := s.Probe("speed")
	require.Equal(t, 128, sp.PromptTokens)
	require.Equal(t, 32, sp.MaxTokens)
	require.Equal(t, 5, sp.Repeats)

	require.Len(t, s.Hash, 64)
	for _, p := range s.Probes {
		require.Len(t, p.Hash, 64, p.Name)
	}
	require.Nil(t, s.Probe("nope"))
}

func TestTolerance(t *testing.T) {
	info, _ := Metric(Choice, "accuracy")
	tol := DefaultTolerance(info)
	tol.Abs, tol.Rel = 0.02, 0.1
	require.Equal(t, 0.05, tol.Bound(0.5))
	require.Equal(t, 0.02, tol.Bound(0.1))
	require.InDelta(t, 0.1, tol.WorseBy(0.8, 0.7), 1e-15) // higher is better: golden − candidate
	ppl, _ := Metric(Perplexity, "perplexity")
	lt := DefaultTolerance(ppl)
	require.InDelta(t, -1.0, lt.WorseBy(10, 9), 1e-15) // lower is better: candidate − golden
	require.Equal(t, 0.2, lt.Bound(-10))               // |golden|
}

func TestHashes(t *testing.T) {
	fsys := testFS()
	a, err := Parse("s.yaml", []byte(validSuite), fsys, nil)
	require.NoError(t, err)

	// A changed data file changes the suite hash and the hashes of the probes
	// that read it, and no other.
	changed := testFS()
	changed["data/pool.jsonl"] = &fstest.MapFile{Data: []byte(`{"id":"p2","context":"S:","options":[" x"," y"],"answer":1}` + "\n")}
	b, err := Parse("s.yaml", []byte(validSuite), changed, nil)
	require.NoError(t, err)
	require.NotEqual(t, a.Hash, b.Hash)
	require.NotEqual(t, a.Probe("mc").Hash, b.Probe("mc").Hash)
	require.Equal(t, a.Probe("ppl").Hash, b.Probe("ppl").Hash)
	require.Equal(t, a.Probe("gen").Hash, b.Probe("gen").Hash)

	// A changed gate changes the suite hash (the file changed) but no probe
	// hash: cached base results and golden values stay valid.
	gate := []byte(replaceOnce(t, validSuite, "mean_nll: {abs: 0.1}", "mean_nll: {abs: 0.3, rel: 0.01}"))
	c, err := Parse("s.yaml", gate, fsys, nil)
	require.NoError(t, err)
	require.NotEqual(t, a.Hash, c.Hash)
	for i := range a.Probes {
		require.Equal(t, a.Probes[i].Hash, c.Probes[i].Hash, a.Probes[i].Name)
	}

	// A changed parameter changes that probe's hash.
	win := []byte(replaceOnce(t, validSuite, "window: 32", "window: 33"))
	d, err := Parse("s.yaml", win, fsys, nil)
	require.NoError(t, err)
	require.NotEqual(t, a.Probe("ppl").Hash, d.Probe("ppl").Hash)
	require.Equal(t, a.Probe("drift").Hash, d.Probe("drift").Hash)

	// The same input hashes the same.
	e, err := Parse("s.yaml", []byte(validSuite), testFS(), nil)
	require.NoError(t, err)
	require.Equal(t, a.Hash, e.Hash)
}

func replaceOnce(t *testing.T, s, old, new string) string {
	t.Helper()
	out := ""
	n := 0
	for i := 0; i+len(old) <= len(s); {
		if s[i:i+len(old)] == old {
			out += new
			i += len(old)
			n++
			out += s[i:]
			break
		}
		out += s[i : i+1]
		i++
	}
	require.Equal(t, 1, n, "%q not found", old)
	return out
}

// writeSuiteDir writes the test suite and its data under a new directory.
func writeSuiteDir(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for name, f := range testFS() {
		p := filepath.Join(dir, filepath.FromSlash(name))
		require.NoError(t, os.MkdirAll(filepath.Dir(p), 0o755))
		require.NoError(t, os.WriteFile(p, f.Data, 0o644))
	}
	require.NoError(t, os.WriteFile(filepath.Join(dir, "suite.yaml"), []byte(validSuite), 0o644))
	return dir
}

func TestLoad(t *testing.T) {
	dir := writeSuiteDir(t)
	s, err := Load(filepath.Join(dir, "suite.yaml"))
	require.NoError(t, err)
	p, err := Parse("s.yaml", []byte(validSuite), testFS(), nil)
	require.NoError(t, err)
	require.Equal(t, p.Hash, s.Hash, "Load and Parse over the same bytes agree")
	require.Equal(t, filepath.Join(dir, "suite.yaml"), s.File)

	_, err = Load(filepath.Join(dir, "missing.yaml"))
	require.ErrorContains(t, err, "pass a suite file or a built-in suite name")
	_, err = Load(dir)
	require.ErrorContains(t, err, "is a directory")
}

func TestLoadSymlinks(t *testing.T) {
	dir := writeSuiteDir(t)
	outside := filepath.Join(t.TempDir(), "secret.txt")
	require.NoError(t, os.WriteFile(outside, []byte("not for suites\n"), 0o644))
	if err := os.Symlink(outside, filepath.Join(dir, "data", "out.txt")); err != nil {
		t.Skipf("no symbolic links here: %v", err)
	}
	require.NoError(t, os.Symlink("text.txt", filepath.Join(dir, "data", "in.txt")))

	suite := func(text string) string {
		return "format: 1\nname: t\nprobes:\n  - name: p\n    kind: perplexity\n    text: " + text + "\n"
	}
	file := filepath.Join(dir, "link.yaml")
	require.NoError(t, os.WriteFile(file, []byte(suite("data/out.txt")), 0o644))
	_, err := Load(file)
	require.Error(t, err)
	require.Contains(t, err.Error(), file+":6:11: ")
	require.Contains(t, err.Error(), "outside the suite's directory")

	require.NoError(t, os.WriteFile(file, []byte(suite("data/in.txt")), 0o644))
	s, err := Load(file)
	require.NoError(t, err, "a link that stays inside the directory is fine")
	require.Equal(t, "data/in.txt", s.Probes[0].Text)

	// Parse alone (no check) cannot see links; Load's check is what refuses them.
	require.NoError(t, os.WriteFile(file, []byte(suite("data/out.txt")), 0o644))
	_, err = Parse(file, []byte(suite("data/out.txt")), os.DirFS(dir), nil)
	require.NoError(t, err)
}

func TestLoadBuiltinDemo(t *testing.T) {
	s, err := LoadBuiltin("demo")
	require.NoError(t, err)
	require.Equal(t, "demo", s.Name)
	require.Equal(t, "builtin:demo/suite.yaml", s.File)
	require.NotEmpty(t, s.Probes)
	kinds := map[string]bool{}
	for _, p := range s.Probes {
		kinds[p.Kind] = true
	}
	for _, k := range Kinds() {
		require.True(t, kinds[k], "the demo suite has a %s probe", k)
	}
	ppl := s.Probe("heldout-ppl")
	require.NotNil(t, ppl)
	require.Equal(t, 256, ppl.Window)
	require.Equal(t, 128, ppl.Stride)
	require.Equal(t, FailIfEither, ppl.Tolerance("perplexity").FailIf)

	_, err = LoadBuiltin("nope")
	require.ErrorContains(t, err, `no built-in suite "nope"`)
	r, err := Resolve("demo")
	require.NoError(t, err)
	require.Equal(t, s.Hash, r.Hash)
}

func TestMetricsCatalogue(t *testing.T) {
	seen := map[string]bool{}
	for _, k := range Kinds() {
		for _, m := range Metrics(k) {
			require.Equal(t, k, m.Kind)
			require.Contains(t, []string{HigherIsBetter, LowerIsBetter}, m.Better, m.Name)
			require.NotEmpty(t, m.Doc, m.Name)
			require.Equal(t, k == Speed, m.Nondeterministic, m.Name)
			require.False(t, seen[m.Name], "metric names are unique across kinds: %s", m.Name)
			seen[m.Name] = true
		}
	}
	require.Len(t, Metrics(""), len(seen))
	for _, k := range Kinds() {
		if k != Speed && k != Sparsity && k != Flips {
			require.NotEmpty(t, Metrics(k), k)
		}
	}
}
