package checkpoint

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"unsafe"

	"github.com/google/go-cmp/cmp"
)

// roundTripTensors covers every accessor: aligned and unaligned F32, F16,
// BF16, I64, a scalar and zero-size tensors.
func roundTripTensors() []NamedTensor {
	i64 := make([]byte, 16)
	minus7 := int64(-7)
	binary.LittleEndian.PutUint64(i64, uint64(minus7))
	binary.LittleEndian.PutUint64(i64[8:], 1<<40)
	return []NamedTensor{
		{Name: "f32", DType: F32, Shape: []int{2, 3}, Data: EncodeF32([]float32{1, 2, 3, -4, 0.5, float32(math.Inf(1))})},
		{Name: "bf16", DType: BF16, Shape: []int{3}, Data: EncodeU16([]uint16{0x3f80, 0xc000, 0x7fc0})},
		{Name: "f32.unaligned", DType: F32, Shape: []int{2}, Data: EncodeF32([]float32{7.25, float32(math.Copysign(0, -1))})},
		{Name: "f16", DType: F16, Shape: []int{1, 2}, Data: EncodeU16([]uint16{0x3c00, 0xbc00})},
		{Name: "i64", DType: I64, Shape: []int{2}, Data: i64},
		{Name: "scalar", DType: F32, Shape: []int{}, Data: EncodeF32([]float32{42})},
		{Name: "empty", DType: F32, Shape: []int{0, 5}, Data: []byte{}},
		{Name: "empty16", DType: BF16, Shape: []int{4, 0}, Data: nil},
	}
}

func TestWriteOpenRoundTrip(t *testing.T) {
	path := filepath.Join(t.TempDir(), "rt.safetensors")
	in := roundTripTensors()
	md := map[string]string{"format": "pt", "note": "ünïcode & <tags>"}
	if err := Write(path, in, md); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if f.Path() != path {
		t.Fatalf("Path() = %q", f.Path())
	}
	if d := cmp.Diff(md, f.Metadata()); d != "" {
		t.Fatalf("metadata (-want +got):\n%s", d)
	}
	ts := f.Tensors()
	if len(ts) != len(in) {
		t.Fatalf("got %d tensors, want %d", len(ts), len(in))
	}
	for i, want := range in {
		got := ts[i] // written order is offset order
		if got.Name != want.Name || got.DType != want.DType || !sameInts(got.Shape, want.Shape) {
			t.Fatalf("tensor %d = %s %s %v, want %s %s %v", i, got.Name, got.DType, got.Shape, want.Name, want.DType, want.Shape)
		}
		if !bytes.Equal(got.Bytes(), want.Data) {
			t.Fatalf("tensor %s bytes %x, want %x", want.Name, got.Bytes(), want.Data)
		}
		if got.File != path {
			t.Fatalf("tensor %s File = %q", want.Name, got.File)
		}
		if !bytes.Equal(raw[got.Offset:got.Offset+int64(len(want.Data))], want.Data) {
			t.Fatalf("tensor %s Offset %d does not point at its data", want.Name, got.Offset)
		}
		byName, ok := f.Tensor(want.Name)
		if !ok || byName != got {
			t.Fatalf("Tensor(%q) = %v, %v", want.Name, byName, ok)
		}
	}
	if _, ok := f.Tensor("absent"); ok {
		t.Fatal("Tensor(absent) found something")
	}
	lens := map[string]int{"f32": 6, "bf16": 3, "scalar": 1, "empty": 0, "empty16": 0, "i64": 2}
	for name, want := range lens {
		tt, _ := f.Tensor(name)
		if tt.Len() != want {
			t.Errorf("%s.Len() = %d, want %d", name, tt.Len(), want)
		}
	}
}

// sameInts compares shapes, treating nil and empty alike (Write accepts either).
func sameInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func TestViews(t *testing.T) {
	path := filepath.Join(t.TempDir(), "views.safetensors")
	if err := Write(path, roundTripTensors(), nil); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if f.Metadata() != nil {
		t.Fatalf("Metadata() = %v, want nil", f.Metadata())
	}
	get := func(name string) *Tensor {
		tt, ok := f.Tensor(name)
		if !ok {
			t.Fatalf("no tensor %q", name)
		}
		return tt
	}

	a := get("f32")
	v, err := a.Float32s()
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff([]float32{1, 2, 3, -4, 0.5, float32(math.Inf(1))}, v); d != "" {
		t.Fatalf("f32 values (-want +got):\n%s", d)
	}
	if a.Offset%4 != 0 {
		t.Fatalf("f32 Offset %d: writer padding should align the first tensor", a.Offset)
	}
	if hostLittleEndian() && unsafe.Pointer(&v[0]) != unsafe.Pointer(&a.Bytes()[0]) {
		t.Fatal("aligned F32 view is a copy, want zero-copy")
	}

	// bf16 holds 3 half words, so the next F32 starts 2 bytes off alignment.
	u := get("f32.unaligned")
	if u.Offset%4 == 0 {
		t.Fatalf("test layout broken: f32.unaligned Offset %d is aligned", u.Offset)
	}
	uv, err := u.Float32s()
	if err != nil {
		t.Fatal(err)
	}
	if uv[0] != 7.25 || uv[1] != 0 || !math.Signbit(float64(uv[1])) {
		t.Fatalf("unaligned f32 values %v, want [7.25 -0]", uv)
	}
	if unsafe.Pointer(&uv[0]) == unsafe.Pointer(&u.Bytes()[0]) {
		t.Fatal("unaligned F32 view aliases misaligned memory, want a copy")
	}

	h := get("f16")
	hv, err := h.Uint16s()
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff([]uint16{0x3c00, 0xbc00}, hv); d != "" {
		t.Fatalf("f16 half words (-want +got):\n%s", d)
	}
	if hostLittleEndian() && h.Offset%2 == 0 && unsafe.Pointer(&hv[0]) != unsafe.Pointer(&h.Bytes()[0]) {
		t.Fatal("aligned F16 view is a copy, want zero-copy")
	}
	bv, err := get("bf16").Uint16s()
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff([]uint16{0x3f80, 0xc000, 0x7fc0}, bv); d != "" {
		t.Fatalf("bf16 half words (-want +got):\n%s", d)
	}

	s, err := get("scalar").Float32s()
	if err != nil || len(s) != 1 || s[0] != 42 {
		t.Fatalf("scalar = %v, %v; want [42]", s, err)
	}
	e, err := get("empty").Float32s()
	if err != nil || len(e) != 0 {
		t.Fatalf("empty = %v, %v; want []", e, err)
	}
	e16, err := get("empty16").Uint16s()
	if err != nil || len(e16) != 0 {
		t.Fatalf("empty16 = %v, %v; want []", e16, err)
	}

	if _, err := get("i64").Float32s(); err == nil || !strings.Contains(err.Error(), `tensor "i64" is I64, not F32`) || !strings.Contains(err.Error(), path) {
		t.Fatalf("Float32s on I64: %v", err)
	}
	if _, err := get("f32").Uint16s(); err == nil || !strings.Contains(err.Error(), `tensor "f32" is F32, not F16 or BF16`) {
		t.Fatalf("Uint16s on F32: %v", err)
	}
	i := get("i64").Bytes()
	if int64(binary.LittleEndian.Uint64(i)) != -7 || binary.LittleEndian.Uint64(i[8:]) != 1<<40 {
		t.Fatalf("i64 bytes %x", i)
	}
}

func TestNonFinite(t *testing.T) {
	// Bit patterns from the IEEE 754 binary32 and binary16 encodings;
	// bfloat16 is the top half of binary32 (common practice, no source).
	// Largest finite values (0x7f7fffff, 0x7bff, 0x7f7f) must not count.
	f32 := []uint32{0x3f800000, 0x7fc00000, 0x7f800000, 0xff800000, 0x7f7fffff, 0x7f800001}
	f32b := make([]byte, 4*len(f32))
	for i, x := range f32 {
		binary.LittleEndian.PutUint32(f32b[4*i:], x)
	}
	cases := []struct {
		name   string
		t      NamedTensor
		count  int
		first  int
		tensor string
	}{
		{"f32", NamedTensor{DType: F32, Shape: []int{6}, Data: f32b}, 4, 1, ""},
		{"f16", NamedTensor{DType: F16, Shape: []int{5}, Data: EncodeU16([]uint16{0x3c00, 0x7bff, 0xfc00, 0x7e00, 0x7c00})}, 3, 2, ""},
		{"bf16", NamedTensor{DType: BF16, Shape: []int{4}, Data: EncodeU16([]uint16{0x7f7f, 0xff7f, 0x3f80, 0x7f81})}, 1, 3, ""},
		{"bf16 finite", NamedTensor{DType: BF16, Shape: []int{2}, Data: EncodeU16([]uint16{0x7f7f, 0x0001})}, 0, -1, ""},
		{"f64", NamedTensor{DType: F64, Shape: []int{2}, Data: binary.LittleEndian.AppendUint64(binary.LittleEndian.AppendUint64(nil, math.Float64bits(1)), math.Float64bits(math.NaN()))}, 1, 1, ""},
		{"f8e5m2", NamedTensor{DType: F8E5M2, Shape: []int{3}, Data: []byte{0x3c, 0x7c, 0xfe}}, 2, 1, ""},
		{"f8e4m3", NamedTensor{DType: F8E4M3, Shape: []int{3}, Data: []byte{0x7e, 0xff, 0x78}}, 1, 1, ""},
		{"i32 never", NamedTensor{DType: I32, Shape: []int{1}, Data: []byte{0x00, 0x00, 0x80, 0x7f}}, 0, -1, ""},
		{"empty", NamedTensor{DType: F32, Shape: []int{0}, Data: nil}, 0, -1, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			tt := &Tensor{Name: c.name, DType: c.t.DType, Shape: c.t.Shape, data: c.t.Data}
			count, first := tt.NonFinite()
			if count != c.count || first != c.first {
				t.Fatalf("NonFinite() = %d, %d; want %d, %d", count, first, c.count, c.first)
			}
		})
	}
}

func TestOpenRejectsShortAndMissingFiles(t *testing.T) {
	dir := t.TempDir()
	short := filepath.Join(dir, "short.safetensors")
	if err := os.WriteFile(short, []byte{1, 2, 3}, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(short); err == nil || !strings.Contains(err.Error(), short+": file is 3 bytes") {
		t.Fatalf("Open(short) = %v", err)
	}
	empty := filepath.Join(dir, "empty.safetensors")
	if err := os.WriteFile(empty, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(empty); err == nil || !strings.Contains(err.Error(), empty+": file is 0 bytes") {
		t.Fatalf("Open(empty) = %v", err)
	}
	huge := filepath.Join(dir, "huge.safetensors")
	claim := binary.LittleEndian.AppendUint64(nil, 10<<30)
	if err := os.WriteFile(huge, append(claim, "{}"...), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Open(huge); err == nil || !strings.Contains(err.Error(), huge+": safetensors header length 10737418240") {
		t.Fatalf("Open(huge) = %v", err)
	}
	missing := filepath.Join(dir, "missing.safetensors")
	if _, err := Open(missing); err == nil || !strings.Contains(err.Error(), missing) {
		t.Fatalf("Open(missing) = %v", err)
	}
	if _, err := Open(dir); err == nil || !strings.Contains(err.Error(), "not a regular file") {
		t.Fatalf("Open(dir) = %v", err)
	}
}

func TestCloseInvalidatesViews(t *testing.T) {
	path := filepath.Join(t.TempDir(), "c.safetensors")
	if err := Write(path, roundTripTensors(), nil); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	tt, _ := f.Tensor("f32")
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	if tt.Bytes() != nil {
		t.Fatal("Bytes() after Close still returns the unmapped memory")
	}
	if err := f.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
}

// Open must map the file, not read it: after opening a 64 MiB file and
// touching one tensor the Go heap grows by far less than the file size.
func TestOpenDoesNotReadFileIntoHeap(t *testing.T) {
	const big = 16 << 20 // F32 elements: 64 MiB
	path := filepath.Join(t.TempDir(), "big.safetensors")
	infos := []TensorInfo{
		{Name: "big", DType: F32, Shape: []int{big}, Begin: 0, End: 4 * big},
		{Name: "small", DType: F32, Shape: []int{2}, Begin: 4 * big, End: 4*big + 8},
	}
	prefix, err := encodeHeader(path, infos, nil)
	if err != nil {
		t.Fatal(err)
	}
	fd, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := fd.Write(prefix); err != nil {
		t.Fatal(err)
	}
	// Extend with zeros (sparse where the file system allows).
	if err := fd.Truncate(int64(len(prefix)) + 4*big + 8); err != nil {
		t.Fatal(err)
	}
	if err := fd.Close(); err != nil {
		t.Fatal(err)
	}

	runtime.GC()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tt, ok := f.Tensor("big")
	if !ok {
		t.Fatal("no big tensor")
	}
	v, err := tt.Float32s()
	if err != nil {
		t.Fatal(err)
	}
	var sum float32
	for i := 0; i < len(v); i += 1 << 16 { // touch pages across the tensor
		sum += v[i]
	}
	runtime.ReadMemStats(&after)
	if sum != 0 || len(v) != big {
		t.Fatalf("big tensor: len %d sum %v, want %d zeros", len(v), sum, big)
	}
	grew := int64(after.HeapAlloc) - int64(before.HeapAlloc)
	if grew > 4<<20 {
		t.Fatalf("heap grew by %d bytes opening a %d-byte file; it must be mapped, not read", grew, 4*big)
	}
}

func TestUint16sUnalignedCopies(t *testing.T) {
	path := filepath.Join(t.TempDir(), "u.safetensors")
	err := Write(path, []NamedTensor{
		{Name: "pad", DType: U8, Shape: []int{1}, Data: []byte{9}},
		{Name: "h", DType: F16, Shape: []int{2}, Data: EncodeU16([]uint16{0x3c00, 0x8001})},
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	h, _ := f.Tensor("h")
	if h.Offset%2 == 0 {
		t.Fatalf("test layout broken: h Offset %d is aligned", h.Offset)
	}
	v, err := h.Uint16s()
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff([]uint16{0x3c00, 0x8001}, v); d != "" {
		t.Fatalf("unaligned half words (-want +got):\n%s", d)
	}
	if unsafe.Pointer(&v[0]) == unsafe.Pointer(&h.Bytes()[0]) {
		t.Fatal("unaligned F16 view aliases misaligned memory, want a copy")
	}
}

// Release drops a tensor's whole pages from the process's resident set
// (RssFile in /proc/self/status falls by about the tensor's size) and a
// later read still sees the file's bytes; the neighbouring tensor is
// untouched.
func TestReleaseKeepsTheBytes(t *testing.T) {
	path := filepath.Join(t.TempDir(), "rel.safetensors")
	big := make([]byte, 8<<20+123)
	for i := range big {
		big[i] = byte(i*7 + 3)
	}
	small := []byte{1, 2, 3, 4}
	in := []NamedTensor{{Name: "a", DType: U8, Shape: []int{len(small)}, Data: small},
		{Name: "big", DType: U8, Shape: []int{len(big)}, Data: big}}
	if err := Write(path, in, nil); err != nil {
		t.Fatal(err)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tb, _ := f.Tensor("big")
	ta, _ := f.Tensor("a")
	if !bytes.Equal(tb.Bytes(), big) { // faults every page in
		t.Fatal("bytes differ before Release")
	}
	before := rssFileKB(t)
	tb.Release()
	after := rssFileKB(t)
	if before-after < 6<<10 {
		t.Fatalf("RssFile %d kB before Release, %d kB after: want a drop of about 8 MiB", before, after)
	}
	if !bytes.Equal(tb.Bytes(), big) || !bytes.Equal(ta.Bytes(), small) {
		t.Fatal("bytes changed after Release")
	}
	(&Tensor{}).Release() // empty: a no-op
}

// rssFileKB reads the process's resident file-backed memory (RssFile, kB).
func rssFileKB(t *testing.T) int {
	t.Helper()
	data, err := os.ReadFile("/proc/self/status")
	if err != nil {
		t.Skipf("no /proc/self/status: %v", err)
	}
	for _, line := range strings.Split(string(data), "\n") {
		if rest, ok := strings.CutPrefix(line, "RssFile:"); ok {
			var kb int
			if _, err := fmt.Sscan(rest, &kb); err != nil {
				t.Fatal(err)
			}
			return kb
		}
	}
	t.Skip("no RssFile line in /proc/self/status")
	return 0
}
