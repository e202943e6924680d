package synth

import (
	"bytes"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
)

var update = flag.Bool("update", false, "rewrite testdata/tiny-opt from the generator")

// writeFixture writes the committed demo fixture: a tiny OPT-family model with
// a tokenizer trained on testdata/sample.txt.
func writeFixture(t *testing.T, dir string) {
	t.Helper()
	text, err := os.ReadFile(filepath.Join("testdata", "sample.txt"))
	require.NoError(t, err)
	cfg := Tiny(checkpoint.OPT)
	require.NoError(t, WithTokenizer(dir, cfg, strings.SplitAfter(string(text), "\n"), 320))
	require.NoError(t, Write(dir, cfg, Options{Seed: 1}))
}

// The fixture under testdata/tiny-opt is what the generator writes, byte for
// byte: this checks that writing is deterministic and keeps the committed
// copy (used by the README's first command) current. Regenerate with
// `go test ./harness/synth -run TestFixture -update`.
func TestFixtureIsCurrent(t *testing.T) {
	fixture := filepath.Join("testdata", "tiny-opt")
	if *update {
		require.NoError(t, os.MkdirAll(fixture, 0o755))
		writeFixture(t, fixture)
	}
	fresh := t.TempDir()
	writeFixture(t, fresh)
	names, err := os.ReadDir(fresh)
	require.NoError(t, err)
	require.NotEmpty(t, names)
	for _, e := range names {
		want, err := os.ReadFile(filepath.Join(fresh, e.Name()))
		require.NoError(t, err)
		have, err := os.ReadFile(filepath.Join(fixture, e.Name()))
		require.NoError(t, err, "run: go test ./harness/synth -run TestFixture -update")
		require.True(t, bytes.Equal(want, have), "%s differs from the generator's output; run: go test ./harness/synth -run TestFixture -update", e.Name())
	}
}

func TestSeedsAndDTypes(t *testing.T) {
	read := func(seed uint64, dt checkpoint.DType) []byte {
		dir := t.TempDir()
		require.NoError(t, Write(dir, Tiny(checkpoint.Llama), Options{Seed: seed, DType: dt}))
		b, err := os.ReadFile(filepath.Join(dir, "model.safetensors"))
		require.NoError(t, err)
		return b
	}
	a, b, c := read(1, checkpoint.F32), read(1, checkpoint.F32), read(2, checkpoint.F32)
	require.Equal(t, a, b)
	require.NotEqual(t, a, c)
	h := read(1, checkpoint.F16)
	require.Less(t, len(h), len(a)*6/10, "f16 storage should be about half the size")
	dir := t.TempDir()
	require.ErrorContains(t, Write(dir, Tiny(checkpoint.OPT), Options{DType: checkpoint.I64}), "F32, F16 or BF16")
}
