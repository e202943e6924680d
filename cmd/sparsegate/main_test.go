package main

import (
	"bytes"
	"encoding/binary"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// sparsegate runs the command line in-process and returns exit code, stdout
// and stderr.
func sparsegate(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

const fixture = "../../harness/synth/testdata/tiny-opt"

func TestHelpAndVersion(t *testing.T) {
	code, out, _ := sparsegate(t, "help")
	require.Equal(t, 0, code)
	for _, c := range commands() {
		require.Contains(t, out, c.name)
	}
	code, out, _ = sparsegate(t, "help", "score")
	require.Equal(t, 0, code)
	require.Contains(t, out, "--window N")
	require.Contains(t, out, "example")
	code, out, _ = sparsegate(t, "version")
	require.Equal(t, 0, code)
	require.Regexp(t, `^sparsegate \d+\.\d+\.\d+ `, out)
	code, _, errs := sparsegate(t)
	require.Equal(t, 2, code)
	require.Contains(t, errs, "usage: sparsegate COMMAND")
	code, _, errs = sparsegate(t, "frobnicate")
	require.Equal(t, 2, code)
	require.Contains(t, errs, `unknown command "frobnicate"`)
	code, _, _ = sparsegate(t, "score", "--help")
	require.Equal(t, 0, code)
}

func TestInspectFixture(t *testing.T) {
	code, out, errs := sparsegate(t, "inspect", fixture)
	require.Equal(t, 0, code, errs)
	for _, want := range []string{"family       opt", "parameters   29,504", "byte-level BPE, 320 tokens", "layers 0–1", "fc1.weight", "non-finite   none"} {
		require.Contains(t, out, want)
	}
	// The weights hash is the plain SHA-256 of the single weights file.
	require.Regexp(t, `sha256       [0-9a-f]{64}\n`, out)
}

func TestScoreFixture(t *testing.T) {
	code, out, errs := sparsegate(t, "score", "--model", fixture, "--text", "../../harness/synth/testdata/sample.txt", "--window", "48", "--stride", "24", "--threads", "1")
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "perplexity")
	require.Contains(t, out, "bits/byte")
	// Any thread count prints the same bytes.
	_, out2, _ := sparsegate(t, "score", "--model", fixture, "--text", "../../harness/synth/testdata/sample.txt", "--window", "48", "--stride", "24", "--threads", "2")
	require.Equal(t, out, out2)
}

func TestSynthThenInspect(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "m")
	code, _, errs := sparsegate(t, "synth", "--family", "llama", "--dtype", "bf16", "--out", dir)
	require.Equal(t, 0, code, errs)
	code, out, errs := sparsegate(t, "inspect", dir)
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "family       llama")
	require.Contains(t, out, "BF16")
	require.Contains(t, out, "tokenizer    none")
}

// copyFixture copies the tiny checkpoint so a test can damage it.
func copyFixture(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	entries, err := os.ReadDir(fixture)
	require.NoError(t, err)
	for _, e := range entries {
		b, err := os.ReadFile(filepath.Join(fixture, e.Name()))
		require.NoError(t, err)
		require.NoError(t, os.WriteFile(filepath.Join(dir, e.Name()), b, 0o644))
	}
	return dir
}

func TestBadInputExitsTwo(t *testing.T) {
	type tc struct {
		name   string
		damage func(t *testing.T, dir string)
		args   func(dir string) []string
		want   string
	}
	inspectArgs := func(dir string) []string { return []string{"inspect", dir} }
	edit := func(file string, f func([]byte) []byte) func(*testing.T, string) {
		return func(t *testing.T, dir string) {
			p := filepath.Join(dir, file)
			b, err := os.ReadFile(p)
			require.NoError(t, err)
			require.NoError(t, os.WriteFile(p, f(b), 0o644))
		}
	}
	cases := []tc{
		{"truncated weights", edit("model.safetensors", func(b []byte) []byte { return b[:len(b)-100] }), inspectArgs, "model.safetensors"},
		{"header longer than file", edit("model.safetensors", func(b []byte) []byte { b[5] = 0x10; return b }), inspectArgs, "model.safetensors"},
		{"config contradicts weights", edit("config.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"ffn_dim": 64`, `"ffn_dim": 65`, 1))
		}), inspectArgs, `tensor "model.decoder.layers.0.fc1.weight" has shape [64 32] but config.json implies [65 32]`},
		{"unknown architecture", edit("config.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"model_type": "opt"`, `"model_type": "mamba"`, 1))
		}), inspectArgs, "supported: opt, gpt2, llama"},
		{"missing tensor", func(t *testing.T, dir string) {}, func(dir string) []string {
			require.NoError(t, os.Remove(filepath.Join(dir, "model.safetensors")))
			return []string{"inspect", dir}
		}, "model.safetensors"},
		{"tokenizer larger than embedding", edit("config.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"vocab_size": 320`, `"vocab_size": 300`, 1))
		}), inspectArgs, "300"},
		{"overlapping spans", func(t *testing.T, dir string) {
			// A hand-made safetensors file (format specification: u64 header
			// length, JSON header, data) whose two tensors share bytes 4..8.
			hdr := `{"a":{"dtype":"F32","shape":[2],"data_offsets":[0,8]},"b":{"dtype":"F32","shape":[2],"data_offsets":[4,12]}}`
			b := binary.LittleEndian.AppendUint64(nil, uint64(len(hdr)))
			b = append(append(b, hdr...), make([]byte, 12)...)
			require.NoError(t, os.WriteFile(filepath.Join(dir, "model.safetensors"), b, 0o644))
		}, inspectArgs, `tensor "b": data_offsets [4, 12] overlap tensor "a"`},
		{"score without text flag", func(*testing.T, string) {}, func(dir string) []string { return []string{"score", "--model", dir} }, "--text FILE is required"},
		{"score with missing text", func(*testing.T, string) {}, func(dir string) []string {
			return []string{"score", "--model", dir, "--text", filepath.Join(dir, "nope.txt")}
		}, "nope.txt"},
		{"unknown flag", func(*testing.T, string) {}, func(dir string) []string { return []string{"inspect", "--shots", "3", dir} }, "unknown flag: --shots"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := copyFixture(t)
			c.damage(t, dir)
			code, _, errs := sparsegate(t, c.args(dir)...)
			require.Equal(t, 2, code, errs)
			require.Contains(t, errs, c.want)
			require.NotContains(t, errs, "internal fault")
		})
	}
}

func TestInspectReportsNaNWeights(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "m")
	text := "../../harness/synth/testdata/sample.txt"
	code, _, errs := sparsegate(t, "synth", "--out", dir, "--tokenizer-text", text)
	require.Equal(t, 0, code, errs)
	// Plant a NaN (f32 0x7fc00000, little-endian) in the last tensor's data.
	p := filepath.Join(dir, "model.safetensors")
	b, err := os.ReadFile(p)
	require.NoError(t, err)
	copy(b[len(b)-4:], []byte{0x00, 0x00, 0xc0, 0x7f})
	require.NoError(t, os.WriteFile(p, b, 0o644))
	code, out, errs := sparsegate(t, "inspect", dir)
	require.Equal(t, 2, code)
	require.Contains(t, out, "1 values, first at element")
	require.Contains(t, errs, "hold NaN or Inf")
	// Scoring fails loudly instead of printing a NaN perplexity.
	code, out, errs = sparsegate(t, "score", "--model", dir, "--text", text)
	require.Equal(t, 2, code)
	require.Empty(t, out)
	require.Contains(t, errs, "non-finite logits")
}

func TestDefaultsToTheEmbeddedDemo(t *testing.T) {
	code, out, errs := sparsegate(t, "inspect")
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "checkpoint   (embedded demo model)")
	require.Contains(t, out, "family       opt")
	require.Contains(t, out, "byte-level BPE, 2048 tokens")
	code, out, errs = sparsegate(t, "score", "--text", "../../harness/synth/testdata/sample.txt", "--window", "128", "--stride", "64")
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "model        (embedded demo model)")
	require.Contains(t, out, "perplexity")
}
