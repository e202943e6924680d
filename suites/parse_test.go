package suites

import (
	"strings"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"
)

// testFS is a suite directory with one file of each data kind.
func testFS() fstest.MapFS {
	return fstest.MapFS{
		"data/text.txt": {Data: []byte("the cat sat on the mat\n")},
		"data/items.jsonl": {Data: []byte(`{"id":"a","context":"Q:","options":[" x"," y"],"answer":0,"target":" x"}` + "\n" +
			`{"id":"b","context":"R:","options":[" x"," y"],"answer":1,"target":" y"}` + "\n")},
		"data/pool.jsonl": {Data: []byte(`{"id":"p1","context":"S:","options":[" x"," y"],"answer":0,"target":" x"}` + "\n")},
	}
}

// validSuite names one probe of every kind.
const validSuite = `format: 1
name: t
about: a test suite
probes:
  - name: ppl
    kind: perplexity
    text: data/text.txt
    window: 32
    gate:
      perplexity:
      mean_nll: {abs: 0.1}
  - name: mc
    kind: choice
    items: data/items.jsonl
    pool: data/pool.jsonl
    shots: 1
    gate:
      accuracy: {abs: 0.05, test: mcnemar}
  - name: gen
    kind: generation
    items: data/items.jsonl
  - name: drift
    kind: drift
    text: data/text.txt
  - name: flips
    kind: flips
    of: [mc, gen]
  - name: sparsity
    kind: sparsity
    text: data/text.txt
  - name: speed
    kind: speed
    text: data/text.txt
`

func TestParseErrors(t *testing.T) {
	head := "format: 1\nname: t\nprobes:\n"
	cases := []struct {
		name, yaml, prefix, msg string
	}{
		{"unknown top-level field", "format: 1\nname: t\nprobs: []\n", "s.yaml:3:1: ", `unknown field "probs" (did you mean "probes"?)`},
		{"unknown probe field with suggestion", head + "  - name: mc\n    kind: choice\n    items: data/items.jsonl\n    shot: 2\n",
			"s.yaml:7:5: ", `probe "mc": unknown field "shot" (did you mean "shots"?)`},
		{"wrong type", head + "  - name: mc\n    kind: choice\n    items: data/items.jsonl\n    pool: data/pool.jsonl\n    shots: four\n",
			"s.yaml:8:12: ", `shots must be a whole number, not "four"`},
		{"missing required field", head + "  - name: mc\n    kind: choice\n", "s.yaml:4:5: ", `probe "mc": missing field "items"`},
		{"duplicate probe names", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n  - name: p\n    kind: drift\n    text: data/text.txt\n",
			"s.yaml:7:5: ", `probe "p" is defined twice (first at line 4)`},
		{"unknown kind", head + "  - name: p\n    kind: perplexty\n    text: data/text.txt\n", "s.yaml:5:11: ", `unknown kind "perplexty" (did you mean "perplexity"?)`},
		{"unknown metric in gate", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n    gate:\n      acuracy: {abs: 1}\n",
			"s.yaml:8:7: ", `a perplexity probe has no metric "acuracy"`},
		{"negative abs bound", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n    gate:\n      perplexity: {abs: -0.5}\n",
			"s.yaml:8:25: ", "abs -0.5 is negative"},
		{"fail_if both without a test", head + "  - name: mc\n    kind: choice\n    items: data/items.jsonl\n    gate:\n      accuracy: {fail_if: both}\n",
			"s.yaml:8:27: ", "fail_if both needs a statistical test; set test to mcnemar"},
		{"mcnemar on perplexity", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n    gate:\n      perplexity: {test: mcnemar}\n",
			"s.yaml:8:26: ", `test "mcnemar" does not apply to perplexity; use none or bootstrap`},
		{"path with ..", head + "  - name: p\n    kind: perplexity\n    text: ../secret.txt\n", "s.yaml:6:11: ", `text "../secret.txt" leaves the suite's directory`},
		{"absolute path", head + "  - name: p\n    kind: perplexity\n    text: /etc/passwd\n", "s.yaml:6:11: ", `text "/etc/passwd" is absolute`},
		{"missing data file", head + "  - name: p\n    kind: perplexity\n    text: data/nope.txt\n", "s.yaml:6:11: ", `text "data/nope.txt": no such file next to the suite`},
		{"alias and anchor", "format: 1\nname: &n t\nprobes: []\n", "s.yaml:2:7: ", "anchors and aliases (&, *) are not allowed"},
		{"alias to an unknown anchor", head + "  - *x\n", "s.yaml: ", "anchors and aliases (&, *) are not allowed"},
		{"alias to a known anchor", "format: 1\nname: t\nabout: &a hi\nprobes: [*a]\n", "s.yaml:3:8: ", "anchors and aliases (&, *) are not allowed"},
		{"format 2", "format: 2\nname: t\nprobes: []\n", "s.yaml:1:9: ", "format 2 is not supported; this sparsegate reads suite format 1"},
		{"invalid UTF-8", "format: 1\nname: t\xff\nprobes: []\n", "s.yaml:2:8: ", "not valid UTF-8 (byte offset 17)"},
		{"empty file", "", "s.yaml: ", "the file is empty"},
		{"only a comment", "# nothing yet\n", "s.yaml: ", "the file is empty"},
		{"YAML syntax error", "format: 1\nname: t\nprobes: [\n", "s.yaml:3: ", "not valid YAML: did not find expected node content"},
		{"second document", "format: 1\nname: t\nprobes:\n  - name: p\n    kind: perplexity\n    text: data/text.txt\n---\nformat: 1\n",
			"s.yaml:7:1: ", "a second YAML document"},
		{"stride not below window", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n    window: 8\n    stride: 8\n",
			"s.yaml:8:13: ", "stride 8 must be less than the window 8"},
		{"shots without pool", head + "  - name: mc\n    kind: choice\n    items: data/items.jsonl\n    shots: 2\n",
			"s.yaml:7:12: ", "2 shots need a pool"},
		{"flip cap on a non-binary metric", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n    gate:\n      perplexity: {max_flips: 2}\n",
			"s.yaml:8:7: ", "flip caps apply to per-item right/wrong metrics"},
		{"flips of a later probe", head + "  - name: f\n    kind: flips\n    of: [mc]\n  - name: mc\n    kind: choice\n    items: data/items.jsonl\n",
			"s.yaml:4:5: ", `of names "mc", which comes after it`},
		{"flips of a perplexity probe", head + "  - name: p\n    kind: perplexity\n    text: data/text.txt\n  - name: f\n    kind: flips\n    of: [p]\n",
			"s.yaml:7:5: ", `of names "p", which is not a choice or generation probe`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := Parse("s.yaml", []byte(c.yaml), testFS(), nil)
			require.Error(t, err)
			require.Nil(t, s)
			require.True(t, strings.HasPrefix(err.Error(), c.prefix), "error %q lacks prefix %q", err, c.prefix)
			require.Contains(t, err.Error(), c.msg)
		})
	}
}

// Several problems are all reported, in file order, the same way every time
// (the parser must not follow Go's random map order).
func TestParseErrorsInFileOrder(t *testing.T) {
	y := "format: 1\nname: t\nprobes:\n  - name: p\n    kind: perplexity\n    text: data/text.txt\n" +
		"    window: 1\n    max_bytes: 0\n    gate:\n      perplexity: {alpha: 2, abs: -1, rel: -1}\n"
	_, err := Parse("s.yaml", []byte(y), testFS(), nil)
	require.Error(t, err)
	want := err.Error()
	lines := strings.Split(want, "\n")
	require.Len(t, lines, 5, want)
	for i, prefix := range []string{"s.yaml:7:13: ", "s.yaml:8:16: ", "s.yaml:10:27: ", "s.yaml:10:35: ", "s.yaml:10:44: "} {
		require.True(t, strings.HasPrefix(lines[i], prefix), "line %d %q lacks %q", i, lines[i], prefix)
	}
	for range 20 {
		_, err := Parse("s.yaml", []byte(y), testFS(), nil)
		require.Equal(t, want, err.Error())
	}
}
