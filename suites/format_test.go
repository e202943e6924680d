package suites

import (
	"os"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"
)

// The example suite in FORMAT.md parses, and the document names every
// metric of the catalogue and every gate field the parser accepts.
func TestFormatDocExample(t *testing.T) {
	doc, err := os.ReadFile("FORMAT.md")
	require.NoError(t, err)
	text := string(doc)
	_, after, ok := strings.Cut(text, "## Example")
	require.True(t, ok)
	_, block, ok := strings.Cut(after, "```yaml\n")
	require.True(t, ok)
	block, _, ok = strings.Cut(block, "```")
	require.True(t, ok)
	items := `{"id":"a","context":"Log: x. Status:","options":[" on time"," delayed"],"answer":0,"target":" on time"}` + "\n"
	pool := `{"id":"p","context":"Log: y. Status:","options":[" on time"," delayed"],"answer":1,"target":" delayed"}` + "\n"
	fsys := fstest.MapFS{"data/heldout.txt": {Data: []byte("text\n")}, "data/status.jsonl": {Data: []byte(items)},
		"data/status-pool.jsonl": {Data: []byte(pool)}}
	s, err := Parse("FORMAT.md example", []byte(block), fsys, nil)
	require.NoError(t, err)
	require.Equal(t, "mini", s.Name)
	require.Len(t, s.Probes, 6)

	for _, m := range Metrics("") {
		require.Contains(t, text, "`"+m.Name+"`", "FORMAT.md documents metric %s", m.Name)
	}
	for _, f := range []string{"better", "abs", "rel", "max_flips", "max_flip_fraction", "test", "alpha", "power", "resamples", "fail_if"} {
		require.Contains(t, text, "| `"+f+"`", "FORMAT.md documents gate field %s", f)
	}
	for _, fields := range kindFields {
		for _, f := range fields {
			require.Contains(t, text, "`"+f+"`", "FORMAT.md documents probe field %s", f)
		}
	}
}

func TestResolve(t *testing.T) {
	dir := writeSuiteDir(t)
	s, err := Resolve(dir + "/suite.yaml")
	require.NoError(t, err)
	require.Equal(t, "t", s.Name)
	_, err = Resolve(dir + "/nope.yaml")
	require.ErrorContains(t, err, "nope.yaml")
	// The demo's source directory sits beside this test: it must not hide
	// the built-in suite of the same name.
	st, err := os.Stat("demo")
	require.NoError(t, err)
	require.True(t, st.IsDir())
	b, err := Resolve("demo")
	require.NoError(t, err)
	require.Equal(t, "builtin:demo/suite.yaml", b.File)
}
