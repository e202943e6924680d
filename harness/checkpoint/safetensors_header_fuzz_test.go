package checkpoint

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// FuzzParseHeader checks that ParseHeader never panics and that any header
// it accepts survives re-encoding by the writer: the re-encoded header parses
// to the same tensors and metadata, with an 8-byte-aligned data start.
// Seeds live in testdata/fuzz/FuzzParseHeader.
func FuzzParseHeader(f *testing.F) {
	f.Fuzz(func(t *testing.T, prefix []byte, fileSize int64) {
		h, err := ParseHeader("fuzz.safetensors", prefix, fileSize)
		if err != nil {
			if h != nil {
				t.Fatal("ParseHeader returned a header with an error")
			}
			return
		}
		bufLen := fileSize - h.DataStart
		var end int64
		for i, ti := range h.Tensors {
			if ti.Begin != end {
				t.Fatalf("accepted tensor %d %q at %d, previous ends at %d", i, ti.Name, ti.Begin, end)
			}
			end = ti.End
		}
		if end != bufLen {
			t.Fatalf("accepted spans ending at %d for a %d-byte buffer", end, bufLen)
		}
		again, err := encodeHeader("fuzz.safetensors", h.Tensors, h.Metadata)
		if err != nil {
			t.Fatalf("writer refused an accepted header: %v", err)
		}
		h2, err := ParseHeader("re-encoded.safetensors", again, int64(len(again))+bufLen)
		if err != nil {
			t.Fatalf("re-encoded header rejected: %v\n%q", err, again)
		}
		if h2.DataStart != int64(len(again)) || h2.DataStart%8 != 0 {
			t.Fatalf("re-encoded DataStart %d, header bytes %d", h2.DataStart, len(again))
		}
		if d := cmp.Diff(h.Tensors, h2.Tensors); d != "" {
			t.Fatalf("tensors changed on re-encoding (-first +second):\n%s", d)
		}
		if d := cmp.Diff(h.Metadata, h2.Metadata); d != "" {
			t.Fatalf("metadata changed on re-encoding (-first +second):\n%s", d)
		}
	})
}

// TestFuzzSeedsValid makes sure the committed "valid_*" seeds really parse,
// so the fuzz target's re-encoding property is exercised from the start.
func TestFuzzSeedsValid(t *testing.T) {
	paths, err := filepath.Glob(filepath.Join("testdata", "fuzz", "FuzzParseHeader", "*"))
	if err != nil {
		t.Fatal(err)
	}
	if len(paths) < 8 {
		t.Fatalf("only %d fuzz seeds committed, want at least 8", len(paths))
	}
	valid := 0
	for _, p := range paths {
		raw, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSpace(string(raw)), "\n")
		if len(lines) != 3 || lines[0] != "go test fuzz v1" {
			t.Fatalf("%s: not a two-value fuzz corpus file", p)
		}
		prefix, err := strconv.Unquote(strings.TrimSuffix(strings.TrimPrefix(lines[1], "[]byte("), ")"))
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		size, err := strconv.ParseInt(strings.TrimSuffix(strings.TrimPrefix(lines[2], "int64("), ")"), 10, 64)
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		_, err = ParseHeader(p, []byte(prefix), size)
		isValid := strings.HasPrefix(filepath.Base(p), "valid_")
		if isValid && err != nil {
			t.Errorf("%s: %v", p, err)
		}
		if !isValid && err == nil {
			t.Errorf("%s: bad seed parses", p)
		}
		if isValid {
			valid++
		}
	}
	if valid == 0 {
		t.Fatal("no valid seeds")
	}
}
