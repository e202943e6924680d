package results

import (
	"bytes"
	"math"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

func sample() *Results {
	nll, tok, by := 12.5, 10, 31
	right := true
	return &Results{Schema: Schema, Harness: "test", Suite: SuiteRef{Name: "s", File: "s.yaml", Hash: "ab"},
		Base: &Build{Path: "m", Kind: "checkpoint", WeightsHash: "cd", TokenizerHash: "ef"}, Shard: Shard{Index: 1, Count: 1},
		Probes: []*Probe{{Name: "p", Kind: "perplexity", Hash: "01", Status: Ran, Metrics: []Metric{{Name: "mean_nll", Value: 1.25}},
			Items: []Item{{ID: "w0000", NLL: &nll, Tokens: &tok, Bytes: &by}, {ID: "x", Index: 1, Correct: &right}}}}}
}

// Results survive Save and Load unchanged, and encoding is deterministic.
func TestSaveLoadRoundTrip(t *testing.T) {
	path := filepath.Join(t.TempDir(), "new", "dir", "r.json") // Save makes the directory
	r := sample()
	require.NoError(t, r.Save(path))
	got, err := Load(path)
	require.NoError(t, err)
	require.Equal(t, r, got)
	var a, b bytes.Buffer
	require.NoError(t, r.Encode(&a))
	require.NoError(t, got.Encode(&b))
	require.Equal(t, a.String(), b.String())
}

func TestDecodeRefusesOtherSchemasAndUnknownFields(t *testing.T) {
	_, err := Decode("r.json", []byte(`{"schema": 2, "probes": []}`))
	require.ErrorContains(t, err, "r.json: results schema 2; this sparsegate reads schema 1")
	_, err = Decode("r.json", []byte(`{"probes": []}`))
	require.ErrorContains(t, err, "no schema field")
	_, err = Decode("r.json", []byte(`{"schema": 1, "probes": [], "extra": 1}`))
	require.ErrorContains(t, err, `unknown field "extra"`)
	_, err = Decode("r.json", []byte(`{"schema": 1, "probes": [null]}`))
	require.ErrorContains(t, err, "probes[0] is null")
	_, err = Decode("r.json", []byte(`{"schema": 1, "probes": [`))
	require.ErrorContains(t, err, "r.json")
}

// A NaN metric is never written: it would read back as a number nobody computed.
func TestNaNMetricIsRefused(t *testing.T) {
	r := sample()
	r.Probes[0].Metrics[0].Value = math.NaN()
	err := r.Save(filepath.Join(t.TempDir(), "r.json"))
	require.ErrorContains(t, err, `probe "p": metric mean_nll is NaN`)
}
