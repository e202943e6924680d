package golden

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/suites"
)

// Fingerprint digests of the test builds (hex, as real digests are).
const (
	baseHash   = "ba5e"
	candHash   = "ca4d"
	manifest   = "3a4f"
	tokHash    = "70c0"
	otherBase  = "0b5e"
	testHarnes = "0.1.0-test"
)

// testData is the suite directory every test suite reads: tiny data files.
// Compare never reads them; they only feed the suite and probe hashes.
func testData() fstest.MapFS {
	return fstest.MapFS{
		"data/text.txt": {Data: []byte("the cat sat on the mat\n")},
		"data/items.jsonl": {Data: []byte(`{"id":"a","context":"Q:","options":[" x"," y"],"answer":0,"target":" x"}` + "\n" +
			`{"id":"b","context":"R:","options":[" x"," y"],"answer":1,"target":" y"}` + "\n")},
	}
}

// parseSuite parses a suite whose probes section is probes (YAML, indented
// by two spaces).
func parseSuite(t *testing.T, probes string) *suites.Suite {
	t.Helper()
	return parseSuiteFS(t, probes, testData())
}

func parseSuiteFS(t *testing.T, probes string, fsys fstest.MapFS) *suites.Suite {
	t.Helper()
	s, err := suites.Parse("suite.yaml", []byte("format: 1\nname: t\nprobes:\n"+probes), fsys, nil)
	require.NoError(t, err)
	return s
}

// choiceYAML is a choice probe named name with the given gate body, e.g.
// "accuracy: {abs: 0.02}".
func choiceYAML(name, gate string) string {
	return fmt.Sprintf("  - name: %s\n    kind: choice\n    items: data/items.jsonl\n    gate:\n      %s\n", name, gate)
}

// pplYAML is a perplexity probe named name with the given gate body.
func pplYAML(name, gate string) string {
	return fmt.Sprintf("  - name: %s\n    kind: perplexity\n    text: data/text.txt\n    window: 32\n    gate:\n      %s\n", name, gate)
}

// newResults returns unsharded Results of s on the test builds holding
// probes, each given its suite hash (and status ran when unset).
func newResults(s *suites.Suite, probes ...*results.Probe) *results.Results {
	r := &results.Results{Schema: results.Schema, Harness: testHarnes,
		Suite:     results.SuiteRef{Name: s.Name, File: s.File, Hash: s.Hash},
		Base:      &results.Build{Path: "base", Kind: "checkpoint", WeightsHash: baseHash, TokenizerHash: tokHash},
		Candidate: &results.Build{Path: "cand", Kind: "sparse", WeightsHash: baseHash, ManifestHash: manifest, TokenizerHash: tokHash},
		Shard:     results.Shard{Index: 1, Count: 1}}
	for _, p := range probes {
		if sp := s.Probe(p.Name); sp != nil {
			p.Hash = sp.Hash
		}
		if p.Status == "" {
			p.Status = results.Ran
		}
		r.Probes = append(r.Probes, p)
	}
	return r
}

func ptr[T any](v T) *T { return &v }

// choiceProbe builds a choice probe whose item i is right when correct[i],
// with metrics recomputed from the items (as the runner does).
func choiceProbe(t *testing.T, name string, correct []bool) *results.Probe {
	t.Helper()
	p := &results.Probe{Name: name, Kind: suites.Choice, Subject: "candidate"}
	for i, c := range correct {
		chosen := 0
		if !c {
			chosen = 1
		}
		p.Items = append(p.Items, results.Item{ID: fmt.Sprintf("i%04d", i), Index: i, Chosen: ptr(chosen),
			Margin: ptr(1 + float64(i%4)/4), Correct: ptr(c)})
	}
	require.NoError(t, runner.Recompute(p))
	return p
}

// pplProbe builds a perplexity probe of len(perTok) windows of 100 tokens
// each, window i with a mean NLL per token of perTok[i].
func pplProbe(t *testing.T, name string, perTok []float64) *results.Probe {
	t.Helper()
	p := &results.Probe{Name: name, Kind: suites.Perplexity, Subject: "candidate"}
	for i, m := range perTok {
		p.Items = append(p.Items, results.Item{ID: fmt.Sprintf("w%04d", i), Index: i, NLL: ptr(100 * m), Tokens: ptr(100), Bytes: ptr(400)})
	}
	require.NoError(t, runner.Recompute(p))
	return p
}

// bools returns n outcomes, the first right of them true.
func bools(n, right int) []bool {
	out := make([]bool, n)
	for i := range right {
		out[i] = true
	}
	return out
}

// flip returns a copy of c with the items at idx negated.
func flip(c []bool, idx ...int) []bool {
	out := append([]bool(nil), c...)
	for _, i := range idx {
		out[i] = !out[i]
	}
	return out
}

// record writes the golden file of every probe of r that ran, as an update
// would, without the approval log.
func record(t *testing.T, dir string, r *results.Results) {
	t.Helper()
	require.NoError(t, os.MkdirAll(dir, 0o755))
	for _, p := range r.Probes {
		if p.Status != results.Ran {
			continue
		}
		data, err := FromResults(r, p).Encode()
		require.NoError(t, err)
		require.NoError(t, os.WriteFile(Path(dir, p.Name), data, 0o644))
	}
}

// compareOne records golden from gr, compares cr with it and returns the
// verdict.
func compareOne(t *testing.T, s *suites.Suite, gr, cr *results.Results, opts Options) *Verdict {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "golden")
	record(t, dir, gr)
	v, err := Compare(s, cr, dir, opts)
	require.NoError(t, err)
	return v
}

// metricOf returns the named metric verdict of the named probe.
func metricOf(t *testing.T, v *Verdict, probe, metric string) *MetricVerdict {
	t.Helper()
	for _, p := range v.Probes {
		if p.Name != probe {
			continue
		}
		for _, m := range p.Metrics {
			if m.Metric == metric {
				return m
			}
		}
	}
	require.Failf(t, "no such metric verdict", "%s/%s", probe, metric)
	return nil
}

// probeOf returns the named probe verdict.
func probeOf(t *testing.T, v *Verdict, probe string) *ProbeVerdict {
	t.Helper()
	for _, p := range v.Probes {
		if p.Name == probe {
			return p
		}
	}
	require.Failf(t, "no such probe verdict", "%s", probe)
	return nil
}

// noiseAround returns n values m ± d·k/n alternating in sign, mean exactly m
// for even n up to rounding.
func noiseAround(n int, m, d float64) []float64 {
	out := make([]float64, n)
	for i := range out {
		e := d * float64(i/2+1) / float64(n)
		if i%2 == 1 {
			e = -e
		}
		out[i] = m + e
	}
	return out
}

func shifted(v []float64, by float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = x + by
	}
	return out
}

var nan = math.NaN()
