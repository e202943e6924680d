package golden

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
	"sparsegate/suites"
)

// everyField is a File using every record and every item field kind.
func everyField() *File {
	return &File{
		Probe: "mixed", Kind: suites.Choice,
		Fingerprint: Fingerprint{BaseWeights: "5d41", CandidateWeights: "5d41", Manifest: "9a0f", Suite: "77c2", Probe: "0b1e",
			Tokenizer: "3c44", Harness: "0.1.0 \"dev\""},
		Metrics: []results.Metric{
			{Name: "accuracy", Value: 0.1},
			{Name: "decode_speedup", Value: 1.7, Nondeterministic: true},
			{Name: "margin_mean", Value: 3.000000000000001},
			{Name: "tiny", Value: 1e-300},
			{Name: "zero", Value: 0},
		},
		Items: []results.Item{
			// choice
			{ID: "lookup-0000", Index: 0, Chosen: ptr(3), Margin: ptr(1.2345678901234567), Correct: ptr(true), BaseCorrect: ptr(false)},
			// generation, text with control characters, quotes, newlines and invalid UTF-8
			{ID: "gen \"q\"\n\x00", Index: 1, Correct: ptr(false), Prefix: ptr(true), Text: ptr("a\tb\r\nc \"quoted\" \\ \x00\x1b[31m\xff\xfe é 世")},
			// generation with empty text
			{ID: "gen-empty", Index: 2, Correct: ptr(true), Prefix: ptr(false), Text: ptr("")},
			// perplexity window
			{ID: "w0000", Index: 3, NLL: ptr(301.25123456789012), Tokens: ptr(255), Bytes: ptr(700)},
			// drift window, a KL list and an empty one
			{ID: "w0001", Index: 4, Agree: ptr(120), KL: []float64{0.001, 0.0004, 5e-324, 0, 0.30000000000000004}},
			{ID: "w0002", Index: 5, Agree: ptr(0), KL: []float64{}},
			// flips
			{ID: "mc/lookup-0000", Index: 6, Correct: ptr(false), BaseCorrect: ptr(true)},
			// an item with only its index
			{ID: "bare", Index: 7},
		},
		Units: []results.Unit{
			{Layer: 0, Component: "mlp", Kept: 0.30000000000000004, Recall: ptr(0.9900000000000001), Rule: "predictor k=154"},
			{Layer: 0, Component: "attention", Kept: 1, Rule: "dense"},
			{Layer: 11, Component: "mlp", Kept: 0.25, Recall: ptr(0.5), Rule: "a \"quoted\" rule\n"},
		},
	}
}

func TestEncodeParseRoundTrip(t *testing.T) {
	f := everyField()
	data, err := f.Encode()
	require.NoError(t, err)
	back, err := Parse("mixed.golden", data)
	require.NoError(t, err)
	require.Empty(t, cmp.Diff(f, back), "Encode → Parse loses nothing")

	// The same input gives identical bytes, and re-encoding is a fixed point.
	again, err := everyField().Encode()
	require.NoError(t, err)
	require.Equal(t, data, again)
	re, err := back.Encode()
	require.NoError(t, err)
	require.Equal(t, data, re)

	// Every line is one record; the text with a newline and invalid UTF-8
	// stays on one line, escaped.
	lines := strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
	require.Len(t, lines, 3+7+5+8+3)
	require.Equal(t, "sparsegate-golden 1", lines[0])
	require.Equal(t, `item "gen \"q\"\n\x00" index=1 correct=0 prefix=1 text="a\tb\r\nc \"quoted\" \\ \x00\x1b[31m\xff\xfe é 世"`, lines[3+7+5+1])
	require.Contains(t, string(data), "metric decode_speedup 1.7 nondeterministic\n")
	require.Contains(t, string(data), "item \"w0002\" index=5 agree=0 kl=\n")
	require.Contains(t, string(data), "unit 0 attention kept=1 rule=\"dense\"\n")
}

func TestEncodeSortsMetrics(t *testing.T) {
	f := everyField()
	f.Metrics[0], f.Metrics[4] = f.Metrics[4], f.Metrics[0]
	a, err := f.Encode()
	require.NoError(t, err)
	b, err := everyField().Encode()
	require.NoError(t, err)
	require.Equal(t, b, a, "metrics are written by name, whatever their order in memory")
}

func TestFloatsRoundTripExactly(t *testing.T) {
	vals := []float64{0.1, 1e-300, 3.000000000000001, 5e-324, math.MaxFloat64, -0.0, 1.0 / 3, 2.5e-8, 123456789012345680000}
	for _, v := range vals {
		f := &File{Probe: "p", Kind: suites.Perplexity, Metrics: []results.Metric{{Name: "m", Value: v}},
			Items: []results.Item{{ID: "w", NLL: ptr(v), KL: []float64{v, v}}}}
		data, err := f.Encode()
		require.NoError(t, err)
		back, err := Parse("p.golden", data)
		require.NoError(t, err)
		require.Equal(t, math.Float64bits(v), math.Float64bits(back.Metrics[0].Value), "%v via %q", v, data)
		require.Equal(t, math.Float64bits(v), math.Float64bits(*back.Items[0].NLL))
		require.Equal(t, math.Float64bits(v), math.Float64bits(back.Items[0].KL[1]))
	}
	// The shortest form is what is written (strconv 'g', -1).
	f := &File{Probe: "p", Kind: suites.Choice, Metrics: []results.Metric{{Name: "a", Value: 0.1}, {Name: "b", Value: 1e-300}, {Name: "c", Value: 3.000000000000001}}}
	data, err := f.Encode()
	require.NoError(t, err)
	require.Contains(t, string(data), "metric a 0.1\nmetric b 1e-300\nmetric c 3.000000000000001\n")
}

func TestEncodeRefusesNonFinite(t *testing.T) {
	cases := map[string]*File{
		"metric": {Probe: "p", Kind: suites.Choice, Metrics: []results.Metric{{Name: "accuracy", Value: math.NaN()}}},
		"margin": {Probe: "p", Kind: suites.Choice, Items: []results.Item{{ID: "a", Margin: ptr(math.Inf(1))}}},
		"nll":    {Probe: "p", Kind: suites.Perplexity, Items: []results.Item{{ID: "a", NLL: ptr(math.NaN())}}},
		"kl":     {Probe: "p", Kind: suites.Drift, Items: []results.Item{{ID: "a", KL: []float64{0, math.Inf(-1)}}}},
		"unit":   {Probe: "p", Kind: suites.Sparsity, Units: []results.Unit{{Component: "mlp", Kept: math.NaN()}}},
		"recall": {Probe: "p", Kind: suites.Sparsity, Units: []results.Unit{{Component: "mlp", Kept: 1, Recall: ptr(math.NaN())}}},
	}
	for name, f := range cases {
		_, err := f.Encode()
		require.ErrorContains(t, err, "must be finite", name)
		require.ErrorContains(t, err, `probe "p"`, name)
	}
}

const minimal = "sparsegate-golden 1\nprobe \"p\"\nkind choice\nfingerprint suite 77c2\nfingerprint harness \"0.1.0\"\n" +
	"metric accuracy 0.5\nitem \"a\" index=0 correct=1\nitem \"b\" index=1 correct=0\n"

func TestParseMinimal(t *testing.T) {
	f, err := Parse("p.golden", []byte(minimal))
	require.NoError(t, err)
	require.Equal(t, "p", f.Probe)
	require.Equal(t, 0.5, f.Metric("accuracy").Value)
	require.Nil(t, f.Metric("nope"))
	require.Len(t, f.Items, 2)
	// CRLF line ends (a checkout on another system) read the same.
	g, err := Parse("p.golden", []byte(strings.ReplaceAll(minimal, "\n", "\r\n")))
	require.NoError(t, err)
	require.Equal(t, f, g)
}

func TestParseErrors(t *testing.T) {
	lines := strings.SplitAfter(minimal, "\n")
	with := func(i int, line string) string { // replace line i (0-based)
		out := append([]string(nil), lines...)
		out[i] = line
		return strings.Join(out, "")
	}
	cases := []struct{ name, data, where, msg string }{
		{"wrong header", with(0, "golden 1\n"), "p.golden:1: ", `the first line must be "sparsegate-golden 1"`},
		{"newer version", with(0, "sparsegate-golden 2\n"), "p.golden:1: ", "newer sparsegate"},
		{"older version", with(0, "sparsegate-golden 0\n"), "p.golden:1: ", "golden format 0 is not supported"},
		{"bad version", with(0, "sparsegate-golden one\n"), "p.golden:1: ", "bad format version"},
		{"no probe line", with(1, "kind choice\n"), "p.golden:2: ", "expected the probe line"},
		{"unquoted probe", with(1, "probe p\n"), "p.golden:2: ", "quoted string"},
		{"unknown kind", with(2, "kind chioce\n"), "p.golden:3: ", `unknown probe kind "chioce"`},
		{"unknown record", with(5, "metrik accuracy 0.5\n"), "p.golden:6: ", `unknown record "metrik"`},
		{"unknown item field", with(6, "item \"a\" index=0 corect=1\n"), "p.golden:7: ", `unknown field "corect"`},
		{"duplicate item id", with(7, "item \"a\" index=1 correct=0\n"), "p.golden:8: ", `item "a" appears twice (first on line 7)`},
		{"duplicate item field", with(7, "item \"b\" index=1 index=2\n"), "p.golden:8: ", "field index twice"},
		{"item without index", with(7, "item \"b\" correct=0\n"), "p.golden:8: ", "no index"},
		{"empty item id", with(7, "item \"\" index=1\n"), "p.golden:8: ", "empty id"},
		{"NaN metric", with(5, "metric accuracy NaN\n"), "p.golden:6: ", "not a finite number"},
		{"infinite metric", with(5, "metric accuracy +Inf\n"), "p.golden:6: ", "not a finite number"},
		{"overflowing metric", with(5, "metric accuracy 1e999\n"), "p.golden:6: ", "not a finite number"},
		{"NaN margin", with(6, "item \"a\" index=0 margin=nan\n"), "p.golden:7: ", "not a finite number"},
		{"NaN in a KL list", with(6, "item \"a\" index=0 kl=0.1,NaN\n"), "p.golden:7: ", "not a finite number"},
		{"duplicate metric", with(6, "metric accuracy 0.6\n"), "p.golden:7: ", "listed twice"},
		{"metrics out of order", with(6, "metric a 0.6\n"), "p.golden:7: ", "metric a comes after metric accuracy"},
		{"metric after items", minimal + "metric z 1\n", "p.golden:9: ", "a metric record after the item records"},
		{"fingerprint twice", with(4, "fingerprint suite 88c2\n"), "p.golden:5: ", "fingerprint suite is listed twice"},
		{"non-hex fingerprint", with(3, "fingerprint suite XYZ\n"), "p.golden:4: ", "not a hex digest"},
		{"unknown fingerprint", with(3, "fingerprint weights 77c2\n"), "p.golden:4: ", `unknown fingerprint "weights"`},
		{"hand-edited: bool", with(6, "item \"a\" index=0 correct=yes\n"), "p.golden:7: ", "use 0 or 1"},
		{"hand-edited: count", with(6, "item \"a\" index=-1\n"), "p.golden:7: ", "is not a count"},
		{"hand-edited: value", with(5, "metric accuracy 0.5x\n"), "p.golden:6: ", `"0.5x" is not a finite number`},
		{"hand-edited: two spaces", with(6, "item \"a\"  index=0\n"), "p.golden:7: ", "expected key=value"},
		{"hand-edited: unterminated quote", with(6, "item \"a index=0\n"), "p.golden:7: ", "expected a quoted string"},
		{"hand-edited: blank line", with(6, "\n"), "p.golden:7: ", `unknown record ""`},
		{"bad unit component", minimal + "unit 0 ffn kept=1 rule=\"\"\n", "p.golden:9: ", "component must be mlp or attention"},
		{"unknown unit field", minimal + "unit 0 mlp kept=1 rule=\"\" k=3\n", "p.golden:9: ", `unknown field "k"`},
		{"truncated: only header", "sparsegate-golden 1\n", "p.golden:2: ", "ends before its header, probe and kind lines"},
		{"empty", "", "p.golden:1: ", "ends before"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse("p.golden", []byte(c.data))
			require.Error(t, err)
			require.True(t, strings.HasPrefix(err.Error(), c.where), "%q should start with %q", err, c.where)
			require.Contains(t, err.Error(), c.msg)
		})
	}
	// A damaged file's error says what to do.
	_, err := Parse("p.golden", []byte(with(6, "item \"a\" index=0 corect=1\n")))
	require.ErrorContains(t, err, "restore it from version control or re-record it")
	_, err = Parse("p.golden", []byte(with(0, "sparsegate-golden 2\n")))
	require.ErrorContains(t, err, "upgrade sparsegate")
}

func TestReadFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "p.golden")
	require.NoError(t, os.WriteFile(path, []byte(minimal), 0o644))
	f, err := ReadFile(path)
	require.NoError(t, err)
	require.Equal(t, "p", f.Probe)

	_, err = ReadFile(filepath.Join(dir, "none.golden"))
	require.ErrorContains(t, err, "reading golden file")

	link := filepath.Join(dir, "l.golden")
	if err := os.Symlink(path, link); err != nil {
		t.Skipf("no symbolic links here: %v", err)
	}
	_, err = ReadFile(link)
	require.ErrorContains(t, err, "is a symbolic link")
}

func TestFromResults(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}"))
	p := choiceProbe(t, "mc", bools(4, 3))
	r := newResults(s, p)
	f := FromResults(r, p)
	want := Fingerprint{BaseWeights: baseHash, CandidateWeights: baseHash, Manifest: manifest, Suite: s.Hash, Probe: s.Probe("mc").Hash,
		Tokenizer: tokHash, Harness: testHarnes}
	require.Empty(t, cmp.Diff(want, f.Fingerprint))
	require.Equal(t, 0.75, f.Metric("accuracy").Value)
	// The golden record is a copy: changing the results later leaves it alone.
	p.Items[0].ID = "changed"
	require.Equal(t, "i0000", f.Items[0].ID)

	// A candidate without a base records no base weights.
	r.Base = nil
	require.Empty(t, FingerprintOf(r, p).BaseWeights)
}

// TestFormatExample keeps FORMAT.md honest: its example golden file and log
// entry are testdata/example, which must parse, verify clean, and appear in
// the document verbatim.
func TestFormatExample(t *testing.T) {
	dir := filepath.Join("testdata", "example")
	rep, err := Verify(dir, nil)
	require.NoError(t, err)
	require.Equal(t, Report{Files: 1, Entries: 1}, *rep)
	f, err := ReadFile(Path(dir, "lookup-mc"))
	require.NoError(t, err)
	require.Equal(t, 0.75, f.Metric("accuracy").Value)
	data, err := os.ReadFile(Path(dir, "lookup-mc"))
	require.NoError(t, err)
	enc, err := f.Encode()
	require.NoError(t, err)
	require.Equal(t, data, enc, "the example is what Encode writes")

	doc, err := os.ReadFile("FORMAT.md")
	require.NoError(t, err)
	for _, name := range []string{"lookup-mc.golden", LogFile} {
		b, err := os.ReadFile(filepath.Join(dir, name))
		require.NoError(t, err)
		indented := "    " + strings.ReplaceAll(strings.TrimSuffix(string(b), "\n"), "\n", "\n    ") + "\n"
		require.Contains(t, string(doc), indented, "FORMAT.md shows %s verbatim", name)
	}
}
