package results

import (
	"bytes"
	"runtime"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// fuzzAllocBound is the most bytes one Decode call may allocate for an
// input of n bytes: a generous multiple of the input plus a fixed allowance
// (common practice, no source: a JSON decoder's working set grows linearly).
func fuzzAllocBound(n int) uint64 { return 64*uint64(n) + 1<<20 }

// FuzzDecodeResults feeds Decode arbitrary bytes. It must never panic, must
// allocate in proportion to the input, and any Results it accepts must
// survive Encode → Decode unchanged, with Encode a fixed point (the same
// results always write the same bytes). Seeds: testdata/fuzz/FuzzDecodeResults.
// Run it longer with
//
//	go test ./harness/results/ -run '^$' -fuzz FuzzDecodeResults -fuzztime 5m
func FuzzDecodeResults(f *testing.F) {
	var buf bytes.Buffer
	if err := sample().Encode(&buf); err == nil {
		f.Add(buf.Bytes())
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 256<<10 {
			return
		}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		r, err := Decode("fuzz.json", data)
		runtime.ReadMemStats(&after)
		if got, limit := after.TotalAlloc-before.TotalAlloc, fuzzAllocBound(len(data)); got > limit {
			t.Fatalf("Decode allocated %d bytes for a %d-byte input (limit %d)", got, len(data), limit)
		}
		if err != nil {
			if r != nil {
				t.Fatalf("Decode returned results with an error: %v", err)
			}
			return
		}
		var first bytes.Buffer
		if err := r.Encode(&first); err != nil {
			t.Fatalf("accepted results do not encode: %v", err)
		}
		back, err := Decode("re-encoded.json", first.Bytes())
		if err != nil {
			t.Fatalf("the encoding of accepted results does not decode: %v\n%s", err, first.Bytes())
		}
		if d := cmp.Diff(r, back); d != "" {
			t.Fatalf("Encode → Decode changed the results (-first +second):\n%s", d)
		}
		var second bytes.Buffer
		if err := back.Encode(&second); err != nil {
			t.Fatalf("re-decoded results do not encode: %v", err)
		}
		if !bytes.Equal(first.Bytes(), second.Bytes()) {
			t.Fatalf("Encode is not a fixed point:\n%s\n---\n%s", first.Bytes(), second.Bytes())
		}
	})
}
