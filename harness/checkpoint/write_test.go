package checkpoint

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// entries lists the names in dir, to catch leftover temporary files.
func entries(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

func oneTensor(v float32) []NamedTensor {
	return []NamedTensor{{Name: "w", DType: F32, Shape: []int{1}, Data: EncodeF32([]float32{v})}}
}

func TestWriteRejectsBadTensors(t *testing.T) {
	f32 := EncodeF32([]float32{1, 2})
	cases := []struct {
		name    string
		tensors []NamedTensor
		want    string
	}{
		{"duplicate", []NamedTensor{{Name: "w", DType: F32, Shape: []int{2}, Data: f32}, {Name: "w", DType: F32, Shape: []int{2}, Data: f32}}, `tensor "w" appears twice`},
		{"empty name", []NamedTensor{{Name: "", DType: F32, Shape: []int{2}, Data: f32}}, "tensor 0 has an empty name"},
		{"reserved name", []NamedTensor{{Name: "__metadata__", DType: F32, Shape: []int{2}, Data: f32}}, `named "__metadata__"`},
		{"bad utf8 name", []NamedTensor{{Name: "w\xff", DType: F32, Shape: []int{2}, Data: f32}}, "not valid UTF-8"},
		{"unknown dtype", []NamedTensor{{Name: "w", DType: "F24", Shape: []int{2}, Data: f32}}, `tensor "w": unknown dtype "F24"`},
		{"negative shape", []NamedTensor{{Name: "w", DType: F32, Shape: []int{-2}, Data: f32}}, `tensor "w": shape entry 0 is -2`},
		{"size mismatch", []NamedTensor{{Name: "w", DType: F32, Shape: []int{3}, Data: f32}}, `tensor "w": shape [3] of F32 needs 12 bytes (overflow: false) but Data holds 8`},
		{"overflow", []NamedTensor{{Name: "w", DType: F32, Shape: []int{1 << 62, 4}, Data: f32}}, `(overflow: true)`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "out.safetensors")
			err := Write(path, c.tensors, nil)
			if err == nil || !strings.Contains(err.Error(), path+": ") || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("Write error %v, want one naming %s and containing %q", err, path, c.want)
			}
			if left := entries(t, dir); len(left) != 0 {
				t.Fatalf("failed Write left %v", left)
			}
		})
	}
	if err := Write(filepath.Join(t.TempDir(), "m"), oneTensor(1), map[string]string{"k\xff": "v"}); err == nil || !strings.Contains(err.Error(), "metadata entry") {
		t.Fatalf("bad metadata: %v", err)
	}
}

func TestWriteEmptyFileRoundTrips(t *testing.T) {
	path := filepath.Join(t.TempDir(), "empty.safetensors")
	if err := Write(path, nil, map[string]string{}); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if len(f.Tensors()) != 0 || f.Metadata() == nil || len(f.Metadata()) != 0 {
		t.Fatalf("empty file: tensors %v metadata %#v", f.Tensors(), f.Metadata())
	}
}

func TestWriteReplacesOnlyOnSuccess(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "model.safetensors")
	if err := Write(path, oneTensor(1), nil); err != nil {
		t.Fatal(err)
	}
	first, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	bad := append(oneTensor(2), oneTensor(3)...) // duplicate name
	if err := Write(path, bad, nil); err == nil {
		t.Fatal("Write accepted duplicate names")
	}
	if got, _ := os.ReadFile(path); !bytes.Equal(got, first) {
		t.Fatal("a failed Write changed the existing file")
	}
	if err := Write(path, oneTensor(5), nil); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tt, _ := f.Tensor("w")
	if v, _ := tt.Float32s(); len(v) != 1 || v[0] != 5 {
		t.Fatalf("after replacing, w = %v, want [5]", v)
	}
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if st.Mode().Perm() != 0o644 {
		t.Fatalf("mode %v, want 0644", st.Mode().Perm())
	}
	if left := entries(t, dir); len(left) != 1 {
		t.Fatalf("directory holds %v, want only model.safetensors", left)
	}
}

func TestWriteFailsCleanly(t *testing.T) {
	t.Run("missing directory", func(t *testing.T) {
		path := filepath.Join(t.TempDir(), "nope", "out.safetensors")
		err := Write(path, oneTensor(1), nil)
		if err == nil || !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), "check that the directory exists") {
			t.Fatalf("Write into a missing directory: %v", err)
		}
	})
	t.Run("rename fails", func(t *testing.T) {
		// The target is a non-empty directory: the temporary file is fully
		// written and synced, then the rename fails and it must be removed.
		dir := t.TempDir()
		path := filepath.Join(dir, "out.safetensors")
		if err := os.MkdirAll(filepath.Join(path, "keep"), 0o755); err != nil {
			t.Fatal(err)
		}
		err := Write(path, oneTensor(1), nil)
		if err == nil || !strings.Contains(err.Error(), path) {
			t.Fatalf("Write over a directory: %v", err)
		}
		if left := entries(t, dir); len(left) != 1 || left[0] != "out.safetensors" {
			t.Fatalf("directory holds %v after a failed write, want only the original", left)
		}
		if _, err := os.Stat(filepath.Join(path, "keep")); err != nil {
			t.Fatalf("the directory in the way was damaged: %v", err)
		}
	})
	t.Run("read-only directory", func(t *testing.T) {
		if os.Geteuid() == 0 {
			t.Skip("root ignores directory permissions; the missing-directory and rename cases cover the cleanup path")
		}
		dir := t.TempDir()
		if err := os.Chmod(dir, 0o555); err != nil {
			t.Fatal(err)
		}
		defer os.Chmod(dir, 0o755)
		path := filepath.Join(dir, "out.safetensors")
		err := Write(path, oneTensor(1), nil)
		if err == nil || !strings.Contains(err.Error(), path) {
			t.Fatalf("Write into a read-only directory: %v", err)
		}
		if left := entries(t, dir); len(left) != 0 {
			t.Fatalf("failed Write left %v", left)
		}
	})
}

func TestEncode(t *testing.T) {
	// Little-endian layouts; 1.5 is 0x3fc00000 in IEEE 754 binary32.
	if got := EncodeF32([]float32{1.5}); !bytes.Equal(got, []byte{0x00, 0x00, 0xc0, 0x3f}) {
		t.Fatalf("EncodeF32(1.5) = %x", got)
	}
	if got := EncodeU16([]uint16{0x1234, 0xabcd}); !bytes.Equal(got, []byte{0x34, 0x12, 0xcd, 0xab}) {
		t.Fatalf("EncodeU16 = %x", got)
	}
	if len(EncodeF32(nil)) != 0 || len(EncodeU16(nil)) != 0 {
		t.Fatal("encoding nothing gave bytes")
	}
}
