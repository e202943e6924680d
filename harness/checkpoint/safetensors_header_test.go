package checkpoint

import (
	"bytes"
	"encoding/binary"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// rawFile assembles a safetensors file from a header JSON text and a data
// buffer, without any padding or checking, for feeding bad inputs.
func rawFile(header string, buf []byte) []byte {
	out := make([]byte, 8, 8+len(header)+len(buf))
	binary.LittleEndian.PutUint64(out, uint64(len(header)))
	out = append(out, header...)
	return append(out, buf...)
}

// TestWriteMatchesSpecBytes checks the writer against bytes written out by
// hand from the safetensors format specification (from memory): u64
// little-endian header length, JSON header padded with spaces (0x20) so the
// buffer starts 8-byte aligned, then the little-endian tensor data.
func TestWriteMatchesSpecBytes(t *testing.T) {
	want := []byte{
		// Header length N = 144 = 138 bytes of JSON + 6 spaces, u64 LE.
		0x90, 0, 0, 0, 0, 0, 0, 0,
	}
	want = append(want, `{"__metadata__":{"format":"pt"},`+
		`"a":{"dtype":"F32","shape":[2],"data_offsets":[0,8]},`+
		`"b":{"dtype":"F16","shape":[],"data_offsets":[8,10]}}`+
		`      `...)
	want = append(want,
		0x00, 0x00, 0x80, 0x3f, // 1.0 as binary32 (IEEE 754), little-endian
		0x00, 0x00, 0x00, 0xc0, // -2.0 as binary32 (IEEE 754), little-endian
		0x00, 0x3c, // 1.0 as binary16 (IEEE 754), little-endian
	)
	path := filepath.Join(t.TempDir(), "spec.safetensors")
	err := Write(path, []NamedTensor{
		{Name: "a", DType: F32, Shape: []int{2}, Data: EncodeF32([]float32{1, -2})},
		{Name: "b", DType: F16, Shape: []int{}, Data: EncodeU16([]uint16{0x3c00})},
	}, map[string]string{"format": "pt"})
	if err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Fatalf("written bytes differ from the specification layout:\n got %q\nwant %q", got, want)
	}
	h, err := ParseHeader("spec", want, int64(len(want)))
	if err != nil {
		t.Fatal(err)
	}
	wantH := &Header{
		Tensors: []TensorInfo{
			{Name: "a", DType: F32, Shape: []int{2}, Begin: 0, End: 8},
			{Name: "b", DType: F16, Shape: []int{}, Begin: 8, End: 10},
		},
		Metadata:  map[string]string{"format": "pt"},
		DataStart: 152,
	}
	if d := cmp.Diff(wantH, h); d != "" {
		t.Fatalf("ParseHeader (-want +got):\n%s", d)
	}
}

func TestParseHeaderAcceptsUnpaddedAndSortsByOffset(t *testing.T) {
	// Keys out of offset order, no padding, whitespace inside the JSON.
	hdr := ` { "z" : {"dtype":"U8","shape":[2],"data_offsets":[0,2]},
	          "a" : {"data_offsets":[2,3],"shape":[1],"dtype":"BOOL"} } `
	file := rawFile(hdr, []byte{1, 2, 3})
	h, err := ParseHeader("ok", file, int64(len(file)))
	if err != nil {
		t.Fatal(err)
	}
	if h.Tensors[0].Name != "z" || h.Tensors[1].Name != "a" {
		t.Fatalf("tensors not in offset order: %+v", h.Tensors)
	}
	if h.Metadata != nil {
		t.Fatalf("metadata = %v, want nil", h.Metadata)
	}
	if h.DataStart != int64(8+len(hdr)) {
		t.Fatalf("DataStart = %d, want %d", h.DataStart, 8+len(hdr))
	}
}

func TestParseHeaderRejects(t *testing.T) {
	const ok8 = `"data_offsets":[0,8]}`
	cases := []struct {
		name   string
		header string
		buf    int // data buffer length
		want   string
	}{
		{"not utf8", "{\"w\xff\":{}}", 0, "not valid UTF-8"},
		{"invalid json", `{"w":{"dtype":"F32",`, 0, "not valid JSON"},
		{"empty header", ``, 0, "not valid JSON: it ends early"},
		{"syntax error", `{"w" 1}`, 0, "not valid JSON at file offset"},
		{"not an object", `[1,2]`, 0, "the header must be a JSON object, found an array"},
		{"trailing data", `{} {}`, 0, "after the header object"},
		{"duplicate tensor", `{"w":{"dtype":"F32","shape":[2],` + ok8 + `,"w":{"dtype":"F32","shape":[2],` + ok8 + `}`, 8, `tensor "w" appears twice`},
		{"duplicate metadata", `{"__metadata__":{},"__metadata__":{}}`, 0, `"__metadata__" appears twice`},
		{"duplicate metadata key", `{"__metadata__":{"k":"a","k":"b"}}`, 0, `key "k" appears twice`},
		{"unknown dtype", `{"w":{"dtype":"F12","shape":[2],` + ok8 + `}`, 8, `tensor "w": unknown dtype "F12"`},
		{"dtype not string", `{"w":{"dtype":4,"shape":[2],` + ok8 + `}`, 8, `tensor "w": dtype must be a string`},
		{"negative shape", `{"w":{"dtype":"F32","shape":[-1],` + ok8 + `}`, 8, `tensor "w": shape entry 0 is -1`},
		{"fractional shape", `{"w":{"dtype":"F32","shape":[1.5],` + ok8 + `}`, 8, `tensor "w": shape entry 0 (1.5) must be an integer`},
		{"string shape", `{"w":{"dtype":"F32","shape":["2"],` + ok8 + `}`, 8, `tensor "w": shape entry 0 must be an integer`},
		{"huge shape entry", `{"w":{"dtype":"F32","shape":[99999999999999999999],` + ok8 + `}`, 8, `tensor "w": shape entry 0 (99999999999999999999) is too large`},
		{"shape overflow", `{"w":{"dtype":"F32","shape":[4611686018427387904,4],` + ok8 + `}`, 8, `tensor "w": shape [4611686018427387904 4] of F32 overflows`},
		{"size mismatch", `{"w":{"dtype":"F32","shape":[3],` + ok8 + `}`, 8, `tensor "w": shape [3] of F32 needs 12 bytes but data_offsets [0, 8] span 8`},
		{"begin after end", `{"w":{"dtype":"F32","shape":[1],"data_offsets":[8,4]}}`, 8, `tensor "w": data_offsets begin 8 is after end 4`},
		{"negative offset", `{"w":{"dtype":"F32","shape":[1],"data_offsets":[-4,0]}}`, 8, `tensor "w": data_offsets [-4 0] must not be negative`},
		{"three offsets", `{"w":{"dtype":"F32","shape":[1],"data_offsets":[0,4,8]}}`, 8, `tensor "w": data_offsets must be [begin, end], found 3`},
		{"outside buffer", `{"w":{"dtype":"F32","shape":[2],` + ok8 + `}`, 4, `tensor "w": data_offsets [0, 8] run past the end of the 4-byte data buffer`},
		{"overlap", `{"a":{"dtype":"F32","shape":[2],` + ok8 + `,"b":{"dtype":"F32","shape":[1],"data_offsets":[4,8]}}`, 8, `tensor "b": data_offsets [4, 8] overlap tensor "a"`},
		{"hole at start", `{"w":{"dtype":"F32","shape":[1],"data_offsets":[4,8]}}`, 8, `tensor "w": data_offsets [4, 8] leave bytes [0, 4) of the data buffer unused`},
		{"hole in middle", `{"a":{"dtype":"F32","shape":[1],"data_offsets":[0,4]},"b":{"dtype":"F32","shape":[1],"data_offsets":[8,12]}}`, 12, `tensor "b": data_offsets [8, 12] leave bytes [4, 8)`},
		{"uncovered tail", `{"w":{"dtype":"F32","shape":[1],"data_offsets":[0,4]}}`, 8, `data buffer is 8 bytes but its tensors cover only [0, 4)`},
		{"bytes without tensors", `{}`, 3, `data buffer is 3 bytes but its tensors cover only [0, 0)`},
		{"metadata not strings", `{"__metadata__":{"k":1}}`, 0, `__metadata__ value for "k" must be a string, found the number 1`},
		{"metadata not object", `{"__metadata__":"x"}`, 0, `__metadata__ must be a JSON object`},
		{"unknown field", `{"w":{"dtype":"F32","shape":[2],"foo":1,` + ok8 + `}`, 8, `tensor "w": unknown field "foo"`},
		{"duplicate field", `{"w":{"dtype":"F32","dtype":"F32","shape":[2],` + ok8 + `}`, 8, `tensor "w": field "dtype" appears twice`},
		{"missing offsets", `{"w":{"dtype":"F32","shape":[2]}}`, 8, `tensor "w": field "data_offsets" is missing`},
		{"missing dtype", `{"w":{"shape":[2],` + ok8 + `}`, 8, `tensor "w": field "dtype" is missing`},
		{"missing shape", `{"w":{"dtype":"F32",` + ok8 + `}`, 8, `tensor "w": field "shape" is missing`},
		{"entry not object", `{"w":[1]}`, 0, `tensor "w" must be a JSON object`},
		{"empty name", `{"":{"dtype":"F32","shape":[2],` + ok8 + `}`, 8, `a tensor has an empty name`},
	}
	dir := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			file := rawFile(c.header, make([]byte, c.buf))
			_, err := ParseHeader("bad.safetensors", file, int64(len(file)))
			if err == nil {
				t.Fatalf("ParseHeader accepted %q", c.header)
			}
			if !strings.Contains(err.Error(), "bad.safetensors: ") || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %q\nwant it to name the file and contain %q", err, c.want)
			}
			// The same through Open, which must name the path.
			path := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_")+".safetensors")
			if err := os.WriteFile(path, file, 0o644); err != nil {
				t.Fatal(err)
			}
			f, err := Open(path)
			if err == nil {
				f.Close()
				t.Fatalf("Open accepted %q", c.header)
			}
			if !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("Open error %q\nwant it to name %s and contain %q", err, path, c.want)
			}
		})
	}
}

func TestParseHeaderRejectsBadLengths(t *testing.T) {
	claim := func(n uint64) []byte {
		b := make([]byte, 8)
		binary.LittleEndian.PutUint64(b, n)
		return b
	}
	cases := []struct {
		name     string
		prefix   []byte
		fileSize int64
		want     string
	}{
		{"file under 8 bytes", []byte{1, 0, 0}, 3, "file is 3 bytes, shorter than the 8-byte"},
		{"prefix under 8 bytes", []byte{1, 0, 0}, 100, "only 3 bytes of the file given"},
		{"header past end of file", claim(100), 50, "header length 100 runs past the end of the 50-byte file"},
		{"header over cap", claim(MaxHeaderBytes + 1), 1 << 40, "exceeds the 104857600-byte limit"},
		{"huge header", claim(10 << 30), 20 << 30, "header length 10737418240 exceeds"},
		{"max uint64", claim(^uint64(0)), 1 << 40, "exceeds"},
		{"prefix shorter than header", append(claim(10), '{'), 100, "the safetensors header needs 18"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseHeader("len.safetensors", c.prefix, c.fileSize)
			if err == nil || !strings.Contains(err.Error(), "len.safetensors: ") || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one naming the file and containing %q", err, c.want)
			}
		})
	}
}

// A header claiming 10 GB must be refused before anything is allocated for it.
func TestParseHeaderHugeClaimDoesNotAllocate(t *testing.T) {
	prefix := make([]byte, 8)
	binary.LittleEndian.PutUint64(prefix, 10<<30)
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	_, err := ParseHeader("huge.safetensors", prefix, 20<<30)
	runtime.ReadMemStats(&after)
	if err == nil {
		t.Fatal("accepted a 10 GB header")
	}
	if grew := after.TotalAlloc - before.TotalAlloc; grew > 64<<10 {
		t.Fatalf("ParseHeader allocated %d bytes refusing a huge header", grew)
	}
}
