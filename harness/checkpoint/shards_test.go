package checkpoint

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// shardTensors returns n F32 tensors of 4 elements (16 bytes) each.
func shardTensors(n int) []NamedTensor {
	var ts []NamedTensor
	for i := 0; i < n; i++ {
		v := []float32{float32(i), float32(i) + 0.25, -float32(i), 1}
		ts = append(ts, NamedTensor{Name: fmt.Sprintf("layers.%d.w", i), DType: F32, Shape: []int{2, 2}, Data: EncodeF32(v)})
	}
	return ts
}

func TestWriteShardedRoundTrip(t *testing.T) {
	dir := t.TempDir()
	in := shardTensors(5)
	md := map[string]string{"format": "pt"}
	// 16-byte tensors, at most 40 bytes a shard: [0 1] [2 3] [4].
	if err := WriteSharded(dir, in, md, 40); err != nil {
		t.Fatal(err)
	}
	wantFiles := []string{
		"model-00001-of-00003.safetensors",
		"model-00002-of-00003.safetensors",
		"model-00003-of-00003.safetensors",
		IndexFileName,
	}
	if d := cmp.Diff(wantFiles, entries(t, dir)); d != "" {
		t.Fatalf("directory (-want +got):\n%s", d)
	}
	var idx struct {
		Metadata  map[string]int64  `json:"metadata"`
		WeightMap map[string]string `json:"weight_map"`
	}
	raw, err := os.ReadFile(filepath.Join(dir, IndexFileName))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &idx); err != nil {
		t.Fatal(err)
	}
	wantMap := map[string]string{
		"layers.0.w": wantFiles[0], "layers.1.w": wantFiles[0],
		"layers.2.w": wantFiles[1], "layers.3.w": wantFiles[1],
		"layers.4.w": wantFiles[2],
	}
	if d := cmp.Diff(wantMap, idx.WeightMap); d != "" {
		t.Fatalf("weight_map (-want +got):\n%s", d)
	}
	if idx.Metadata["total_size"] != 80 {
		t.Fatalf("total_size = %d, want 80", idx.Metadata["total_size"])
	}

	w, err := OpenWeights(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	if w.Dir() != dir {
		t.Fatalf("Dir() = %q", w.Dir())
	}
	var wantPaths []string
	for _, f := range wantFiles[:3] {
		wantPaths = append(wantPaths, filepath.Join(dir, f))
	}
	if d := cmp.Diff(wantPaths, w.Files()); d != "" {
		t.Fatalf("Files (-want +got):\n%s", d)
	}
	if d := cmp.Diff([]string{"layers.0.w", "layers.1.w", "layers.2.w", "layers.3.w", "layers.4.w"}, w.Names()); d != "" {
		t.Fatalf("Names (-want +got):\n%s", d)
	}
	if w.TotalBytes() != 80 {
		t.Fatalf("TotalBytes = %d, want 80", w.TotalBytes())
	}
	for _, want := range in {
		got, err := w.Tensor(want.Name)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got.Bytes(), want.Data) || filepath.Base(got.File) != wantMap[want.Name] {
			t.Fatalf("%s: bytes %x from %s", want.Name, got.Bytes(), got.File)
		}
		if _, ok := w.Lookup(want.Name); !ok {
			t.Fatalf("Lookup(%q) failed", want.Name)
		}
	}
	for _, p := range wantPaths {
		f, err := Open(p)
		if err != nil {
			t.Fatal(err)
		}
		if d := cmp.Diff(md, f.Metadata()); d != "" {
			t.Fatalf("%s metadata (-want +got):\n%s", p, d)
		}
		f.Close()
	}
	_, err = w.Tensor("lm_head.weight")
	wantErr := dir + `: tensor "lm_head.weight" not found in model-00001-of-00003.safetensors, model-00002-of-00003.safetensors, model-00003-of-00003.safetensors`
	if err == nil || !strings.Contains(err.Error(), wantErr) {
		t.Fatalf("missing tensor error %v\nwant it to contain %q", err, wantErr)
	}
	if _, ok := w.Lookup("lm_head.weight"); ok {
		t.Fatal("Lookup found a missing tensor")
	}

	// SHA256: the digest of the sha256sum-format lines of the shards,
	// computed here independently from the files on disk.
	var lines strings.Builder
	for _, f := range wantFiles[:3] {
		b, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil {
			t.Fatal(err)
		}
		fmt.Fprintf(&lines, "%x  %s\n", sha256.Sum256(b), f)
	}
	want := sha256.Sum256([]byte(lines.String()))
	got, err := w.SHA256()
	if err != nil {
		t.Fatal(err)
	}
	if got != hex.EncodeToString(want[:]) {
		t.Fatalf("SHA256 = %s, want %x", got, want)
	}
}

func TestWriteShardedOversizedTensorGetsOwnShard(t *testing.T) {
	dir := t.TempDir()
	if err := WriteSharded(dir, shardTensors(3), nil, 8); err != nil {
		t.Fatal(err)
	}
	w, err := OpenWeights(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	if len(w.Files()) != 3 {
		t.Fatalf("files %v, want one shard per 16-byte tensor", w.Files())
	}
}

func TestWriteShardedRejects(t *testing.T) {
	dir := t.TempDir()
	if err := WriteSharded(dir, shardTensors(2), nil, 0); err == nil || !strings.Contains(err.Error(), "must be positive") {
		t.Fatalf("max 0: %v", err)
	}
	if err := WriteSharded(dir, nil, nil, 10); err == nil || !strings.Contains(err.Error(), "no tensors") {
		t.Fatalf("no tensors: %v", err)
	}
	dup := append(shardTensors(2), shardTensors(1)...)
	if err := WriteSharded(dir, dup, nil, 16); err == nil || !strings.Contains(err.Error(), `tensor "layers.0.w" appears twice`) {
		t.Fatalf("duplicate across shards: %v", err)
	}
	if left := entries(t, dir); len(left) != 0 {
		t.Fatalf("failed WriteSharded left %v", left)
	}
	missing := filepath.Join(dir, "missing")
	if err := WriteSharded(missing, shardTensors(2), nil, 16); err == nil || !strings.Contains(err.Error(), missing) {
		t.Fatalf("missing directory: %v", err)
	}
}

func TestOpenWeightsSingleFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, SingleFileName)
	if err := Write(path, roundTripTensors(), nil); err != nil {
		t.Fatal(err)
	}
	w, err := OpenWeights(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	if d := cmp.Diff([]string{path}, w.Files()); d != "" {
		t.Fatalf("Files (-want +got):\n%s", d)
	}
	if len(w.Names()) != len(roundTripTensors()) || w.Names()[0] != "bf16" {
		t.Fatalf("Names = %v", w.Names())
	}
	var total int64
	for _, tt := range roundTripTensors() {
		total += int64(len(tt.Data))
	}
	if w.TotalBytes() != total {
		t.Fatalf("TotalBytes = %d, want %d", w.TotalBytes(), total)
	}
	_, err = w.Tensor("nope")
	if want := dir + `: tensor "nope" not found in model.safetensors`; err == nil || !strings.Contains(err.Error(), want) {
		t.Fatalf("error %v, want %q", err, want)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	want := sha256.Sum256(raw) // what `sha256sum model.safetensors` prints
	got, err := w.SHA256()
	if err != nil || got != hex.EncodeToString(want[:]) {
		t.Fatalf("SHA256 = %s, %v; want %x", got, err, want)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := w.SHA256(); err == nil || !strings.Contains(err.Error(), "closed") {
		t.Fatalf("SHA256 after Close: %v", err)
	}
}

// writeShard writes one shard file holding the named 16-byte tensors.
func writeShard(t *testing.T, dir, file string, names ...string) {
	t.Helper()
	var ts []NamedTensor
	for _, n := range names {
		ts = append(ts, NamedTensor{Name: n, DType: F32, Shape: []int{4}, Data: make([]byte, 16)})
	}
	if err := Write(filepath.Join(dir, file), ts, nil); err != nil {
		t.Fatal(err)
	}
}

func TestOpenWeightsRejects(t *testing.T) {
	const s1, s2 = "model-00001-of-00002.safetensors", "model-00002-of-00002.safetensors"
	index := func(pairs ...string) string {
		var b strings.Builder
		b.WriteString(`{"metadata":{"total_size":32},"weight_map":{`)
		for i := 0; i < len(pairs); i += 2 {
			if i > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, "%q:%q", pairs[i], pairs[i+1])
		}
		b.WriteString("}}")
		return b.String()
	}
	cases := []struct {
		name  string
		index string // "" writes no index
		setup func(t *testing.T, dir string)
		want  string
	}{
		{"no weights", "", nil, "no model.safetensors or model.safetensors.index.json found"},
		{"both layouts", index("a", s1), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a")
			writeShard(t, dir, SingleFileName, "a")
		}, "ambiguous"},
		{"index not json", `{"weight_map":{"a":`, nil, IndexFileName + ": near byte"},
		{"index not object", `[]`, nil, "the index must be a JSON object"},
		{"weight_map missing", `{"metadata":{}}`, nil, `no "weight_map" object`},
		{"weight_map empty", `{"weight_map":{}}`, nil, "lists no tensors"},
		{"weight_map value not string", `{"weight_map":{"a":1}}`, nil, `entry for tensor "a" must be a shard file name`},
		{"weight_map duplicate", `{"weight_map":{"a":"x","a":"x"}}`, nil, `weight_map lists tensor "a" twice`},
		{"dot dot", index("a", ".."), nil, `tensor "a": shard name ".." is not a file name`},
		{"escaping path", index("a", "../x.safetensors"), nil, `shard name "../x.safetensors" contains a path separator`},
		{"absolute path", index("a", "/etc/x.safetensors"), nil, `shard name "/etc/x.safetensors" is an absolute path`},
		{"backslash", index("a", `..\x.safetensors`), nil, `contains a path separator`},
		{"shard missing", index("a", s1, "b", s2), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a")
		}, `shard "` + s2 + `" named by the index is missing`},
		// A shard file the index does not name is not opened.
		{"tensor only in unindexed file", index("a", s1, "b", s1), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a")
			writeShard(t, dir, s2, "b")
		}, `assigns tensor "b" to shard ` + s1 + `, which does not hold it (no shard holds it)`},
		{"assigned shard lacks tensor", index("a", s1, "b", s1), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a")
		}, `assigns tensor "b" to shard ` + s1 + `, which does not hold it (no shard holds it)`},
		{"misassigned", index("a", s1, "b", s2, "c", s1), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a", "b")
			writeShard(t, dir, s2, "c")
		}, `assigns tensor "b" to shard ` + s2 + `, which does not hold it (it is in ` + s1 + `)`},
		{"unindexed tensor", index("a", s1), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a", "extra")
		}, `tensor "extra" is in shard ` + s1 + ` but not in the index`},
		{"two shards", index("a", s1, "b", s2), func(t *testing.T, dir string) {
			writeShard(t, dir, s1, "a")
			writeShard(t, dir, s2, "a", "b")
		}, `tensor "a" is in two shards, ` + s1 + ` and ` + s2},
		{"bad shard", index("a", s1), func(t *testing.T, dir string) {
			if err := os.WriteFile(filepath.Join(dir, s1), []byte("short"), 0o644); err != nil {
				t.Fatal(err)
			}
		}, s1 + ": file is 5 bytes"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			if c.index != "" {
				if err := os.WriteFile(filepath.Join(dir, IndexFileName), []byte(c.index), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			if c.setup != nil {
				c.setup(t, dir)
			}
			w, err := OpenWeights(dir)
			if err == nil {
				w.Close()
				t.Fatal("OpenWeights accepted a bad checkpoint")
			}
			if !strings.Contains(err.Error(), dir) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %q\nwant it to name %s and contain %q", err, dir, c.want)
			}
		})
	}
}

func TestWriteShardedRemovesShardsWhenIndexFails(t *testing.T) {
	dir := t.TempDir()
	// A non-empty directory where the index goes makes its rename fail.
	if err := os.MkdirAll(filepath.Join(dir, IndexFileName, "x"), 0o755); err != nil {
		t.Fatal(err)
	}
	err := WriteSharded(dir, shardTensors(3), nil, 16)
	if err == nil || !strings.Contains(err.Error(), IndexFileName) {
		t.Fatalf("WriteSharded with the index blocked: %v", err)
	}
	if d := cmp.Diff([]string{IndexFileName}, entries(t, dir)); d != "" {
		t.Fatalf("shards left behind (-want +got):\n%s", d)
	}
}
