package sparsity

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// docExample returns the JSON example of MANIFEST.md.
func docExample(t testing.TB) []byte {
	doc, err := os.ReadFile("MANIFEST.md")
	require.NoError(t, err)
	s := string(doc)
	i := strings.Index(s, "```json\n")
	require.GreaterOrEqual(t, i, 0, "MANIFEST.md has a json example")
	s = s[i+len("```json\n"):]
	return []byte(s[:strings.Index(s, "```")])
}

// The documented example is valid and is exactly what Save writes for it.
func TestManifestDocExample(t *testing.T) {
	ex := docExample(t)
	m, pos, err := parseManifest("MANIFEST.md", ex)
	require.NoError(t, err)
	require.Empty(t, m.check(nil, pos))
	require.Len(t, m.Layers, 4)
	require.Equal(t, Rule{Mode: PredictorMode, K: 512, Rank: 128, Input: InputPrevious,
		Calibration: &Calibration{Recall: 0.9312, KeptFraction: 0.1667, Tokens: 20000}}, m.Layers[1].MLP)
	require.Equal(t, Rule{Mode: Threshold, Threshold: 0.35, On: OnInput}, m.Layers[2].MLP)
	dir := t.TempDir()
	require.NoError(t, m.Save(dir))
	saved, err := os.ReadFile(filepath.Join(dir, ManifestFile))
	require.NoError(t, err)
	require.Equal(t, string(ex), string(saved))
}

func TestManifestRoundTrip(t *testing.T) {
	m := &Manifest{
		Base: Base{Path: "base", SHA256: strings.Repeat("0f", 32)},
		// Layers out of order: Save sorts them.
		Layers: []LayerRules{
			{Layer: 1, MLP: Rule{Mode: Static, Keep: []int{}}, Attention: Rule{Mode: Oracle, K: 3}},
			{Layer: 0, MLP: Rule{Mode: Threshold, Threshold: 1e-3, On: OnActivation}, Attention: Rule{Mode: Dense, Calibration: &Calibration{Recall: 1, KeptFraction: 1}}},
		},
	}
	dir := t.TempDir()
	require.NoError(t, m.Save(dir))
	got, err := LoadManifest(dir)
	require.NoError(t, err)
	require.Equal(t, FormatName, got.Format)
	require.Equal(t, FormatVersion, got.Version)
	require.Equal(t, m.Base, got.Base)
	require.Equal(t, []LayerRules{m.Layers[1], m.Layers[0]}, got.Layers)
	require.NotNil(t, got.Layers[1].MLP.Keep, "an empty static list stays a list")
	require.Zero(t, m.Format, "Save does not change its receiver")

	var buf bytes.Buffer
	require.NoError(t, got.WriteSummary(&buf))
	require.Equal(t, "base base sha256 "+strings.Repeat("0f", 32)+"\n"+
		"layer 0 mlp            threshold t=0.001 on=activation\n"+
		"layer 0 attention      dense  calibration: recall 1.0000 kept 1.0000\n"+
		"layer 1 mlp            static keep=0\n"+
		"layer 1 attention      oracle k=3\n", buf.String())
}

func TestSaveRefusesInvalidManifests(t *testing.T) {
	good := func() *Manifest {
		return &Manifest{Base: Base{Path: "b", SHA256: strings.Repeat("a", 64)},
			Layers: []LayerRules{{Layer: 0, MLP: Rule{Mode: Dense}, Attention: Rule{Mode: Dense}}}}
	}
	cases := map[string]struct {
		edit func(*Manifest)
		want string
	}{
		"version":         {func(m *Manifest) { m.Version = 2 }, "this sparsegate writes \"sparsegate-build\" version 1"},
		"no base":         {func(m *Manifest) { m.Base.Path = "" }, "base: path is empty"},
		"predictor file":  {func(m *Manifest) { m.Layers[0].MLP = Rule{Mode: PredictorMode, K: 1, Rank: 1, Input: InputSelf} }, "needs the manifest's \"predictors\" file"},
		"predictor dir":   {func(m *Manifest) { m.Predictors = "../p.safetensors" }, "must be a file name beside the manifest"},
		"gap":             {func(m *Manifest) { m.Layers[0].Layer = 1 }, "layer 0: missing"},
		"stray field":     {func(m *Manifest) { m.Layers[0].Attention = Rule{Mode: Static, Keep: []int{0}, K: 2} }, "mode static does not use k"},
		"negative keep":   {func(m *Manifest) { m.Layers[0].Attention = Rule{Mode: Static, Keep: []int{-1}} }, "keep[0] = -1 is negative"},
		"bad calibration": {func(m *Manifest) { m.Layers[0].MLP.Calibration = &Calibration{Recall: -0.1} }, "calibration recall -0.1 must lie in [0, 1]"},
		"no mode":         {func(m *Manifest) { m.Layers[0].MLP = Rule{} }, "mode is missing"},
	}
	for name, c := range cases {
		t.Run(name, func(t *testing.T) {
			m := good()
			c.edit(m)
			dir := t.TempDir()
			err := m.Save(dir)
			require.ErrorContains(t, err, c.want)
			require.ErrorContains(t, err, filepath.Join(dir, ManifestFile))
			_, statErr := os.Stat(filepath.Join(dir, ManifestFile))
			require.True(t, os.IsNotExist(statErr), "nothing is written")
		})
	}
	require.NoError(t, good().Save(t.TempDir()))
}

func TestParseManifestShapes(t *testing.T) {
	for name, c := range map[string]struct{ in, want string }{
		"array":      {`[]`, "must hold one JSON object"},
		"empty":      {``, "must hold one JSON object"},
		"truncated":  {`{"format": "sparsegate-build", "version": 1`, "m.json:1:"},
		"trailing":   {`{"format": "sparsegate-build", "version": 1, "base": {"path": "b", "sha256": ""}, "layers": []} {}`, "unexpected data after the manifest object"},
		"no version": {`{"format": "sparsegate-build"}`, `"version" is missing`},
		"no format":  {`{"version": 1}`, `"format" is missing`},
		"no base":    {`{"format": "sparsegate-build", "version": 1}`, `"base" is missing`},
		"version 0":  {`{"format": "sparsegate-build", "version": 0}`, "format version 0 is invalid"},
		"no layer":   {"{\"format\": \"sparsegate-build\", \"version\": 1, \"base\": {},\n \"layers\": [{\"mlp\": {\"mode\": \"dense\"}}]}", `m.json:2:13: layers[0]: field "layer" is missing`},
		"no rule":    {`{"format": "sparsegate-build", "version": 1, "base": {}, "layers": [{"layer": 0, "mlp": {"mode": "dense"}}]}`, `layer 0 attention: field "attention" is missing`},
		"calib half": {`{"format": "sparsegate-build", "version": 1, "base": {}, "layers": [{"layer": 0, "mlp": {"mode": "dense", "calibration": {"recall": 1}}, "attention": {"mode": "dense"}}]}`, "calibration needs both recall and kept_fraction"},
		"deep field": {`{"format": "sparsegate-build", "version": 1, "base": {}, "layers": [{"layer": 0, "mlp": {"mode": "dense", "calibration": {"recal": 1}}}]}`, `m.json:1:123: field "layers[0].mlp.calibration.recal": unknown field; allowed here: kept_fraction, recall, tokens`},
	} {
		t.Run(name, func(t *testing.T) {
			_, _, err := parseManifest("m.json", []byte(c.in))
			require.ErrorContains(t, err, c.want)
		})
	}
}

// FuzzParseManifest checks that no input makes the parser panic, and that
// whatever it accepts and checks clean survives a Save round trip.
func FuzzParseManifest(f *testing.F) {
	f.Add(docExample(f))
	f.Add([]byte(`{"format": "sparsegate-build", "version": 1, "base": {"path": "b", "sha256": ""}, "layers": []}`))
	f.Add([]byte(`{"layers": [{"layer": 0, "mlp": {"mode": "static", "keep": [3, 1]}}]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		m, pos, err := parseManifest("fuzz.json", data)
		if err != nil || len(m.check(nil, pos)) > 0 {
			return
		}
		b, err := m.MarshalJSON()
		if err != nil {
			t.Fatal(err)
		}
		m2, pos2, err := parseManifest("again.json", b)
		if err != nil || len(m2.check(nil, pos2)) > 0 {
			t.Fatalf("a checked manifest does not parse back: %v\n%s", err, b)
		}
	})
}
