package runner

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
)

// cacheFiles lists the cache's entries.
func cacheFiles(t *testing.T, dir string) []string {
	t.Helper()
	files, err := filepath.Glob(filepath.Join(dir, "*", "*.json"))
	require.NoError(t, err)
	return files
}

func TestBaseCache(t *testing.T) {
	s := writeSuite(t, mixedSuite, defaultFiles())
	base := openTarget(t, writeModel(t, 1, nil), 2)
	cacheDir := t.TempDir()
	opts := Options{CacheDir: cacheDir, Probes: []string{"ppl", "mc"}}
	first := run(t, s, base, nil, opts)
	files := cacheFiles(t, cacheDir)
	require.Len(t, files, 2, "one entry per cached probe (perplexity, choice)")
	ppl := ""
	for _, f := range files {
		data, err := os.ReadFile(f)
		require.NoError(t, err)
		var p results.Probe
		require.NoError(t, json.Unmarshal(data, &p))
		require.Equal(t, s.Probe(p.Name).Hash, p.Hash)
		if p.Name == "ppl" {
			ppl = f
		}
	}
	require.NotEmpty(t, ppl)

	// Same inputs: the same results.
	second := run(t, s, base, nil, opts)
	require.Empty(t, cmp.Diff(first, second))

	// The second run really reads the cache: a planted record shows up.
	var entry results.Probe
	data, err := os.ReadFile(ppl)
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(data, &entry))
	planted := *entry.Items[0].NLL + 1000
	entry.Items[0].NLL = &planted
	data, err = json.Marshal(entry)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(ppl, data, 0o644))
	third := run(t, s, base, nil, opts)
	require.Equal(t, planted, *third.Probe("ppl").Items[0].NLL)
	require.Greater(t, third.Probe("ppl").Metric("mean_nll").Value, first.Probe("ppl").Metric("mean_nll").Value)

	// A corrupt entry is ignored, recomputed and rewritten.
	require.NoError(t, os.WriteFile(ppl, []byte(`{"name": "ppl", "items": [`), 0o644))
	fourth := run(t, s, base, nil, opts)
	require.Empty(t, cmp.Diff(first, fourth))
	data, err = os.ReadFile(ppl)
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(data, &entry), "the entry was rewritten whole")
	require.Equal(t, *first.Probe("ppl").Items[0].NLL, *entry.Items[0].NLL)

	// Another shard, another build or another probe definition is another key.
	run(t, s, base, nil, Options{CacheDir: cacheDir, Probes: []string{"ppl"}, Shard: results.Shard{Index: 1, Count: 2}})
	require.Len(t, cacheFiles(t, cacheDir), 3)
	other := openTarget(t, writeModel(t, 2, nil), 2)
	run(t, s, other, nil, Options{CacheDir: cacheDir, Probes: []string{"ppl"}})
	require.Len(t, cacheFiles(t, cacheDir), 4)

	// With a candidate, the base's choice records use the same key (no new
	// entry) and agree with the base-only run; the candidate's are never
	// cached.
	cand := sparseTarget(t, base, 8)
	withCand := run(t, s, base, cand, Options{CacheDir: cacheDir, Probes: []string{"mc"}})
	require.Len(t, cacheFiles(t, cacheDir), 4)
	for i, it := range withCand.Probe("mc").Items {
		require.Equal(t, *first.Probe("mc").Items[i].Correct, *it.BaseCorrect, it.ID)
	}
}
