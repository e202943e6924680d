package golden

import (
	"bytes"
	"runtime"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// verdictAllocBound is the most bytes one DecodeVerdict call may allocate
// for an input of n bytes: a generous multiple of the input plus a fixed
// allowance (common practice, no source: a JSON decoder's working set grows
// linearly).
func verdictAllocBound(n int) uint64 { return 64*uint64(n) + 1<<20 }

// FuzzDecodeVerdict feeds DecodeVerdict arbitrary bytes. It must never
// panic, must allocate in proportion to the input, and any verdict it accepts
// must survive EncodeVerdict → DecodeVerdict unchanged, with EncodeVerdict a
// fixed point (so 'report' re-renders a saved verdict faithfully). Seeds:
// testdata/fuzz/FuzzDecodeVerdict. Run it longer with
//
//	go test ./golden/ -run '^$' -fuzz FuzzDecodeVerdict -fuzztime 5m
func FuzzDecodeVerdict(f *testing.F) {
	f.Add([]byte(`{"schema":1,"harness":"0.1.0","suite":{"name":"s","file":"s.yaml","hash":"ab"},"golden_dir":"g","outcome":"pass","passed":true,"allow_new":false,"fingerprint":{"suite":"ab","harness":"0.1.0"},"shard":{"index":1,"count":1},"probes":[]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 256<<10 {
			return
		}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		v, err := DecodeVerdict("fuzz.json", data)
		runtime.ReadMemStats(&after)
		if got, limit := after.TotalAlloc-before.TotalAlloc, verdictAllocBound(len(data)); got > limit {
			t.Fatalf("DecodeVerdict allocated %d bytes for a %d-byte input (limit %d)", got, len(data), limit)
		}
		if err != nil {
			if v != nil {
				t.Fatalf("DecodeVerdict returned a verdict with an error: %v", err)
			}
			return
		}
		first, err := EncodeVerdict(v)
		if err != nil {
			t.Fatalf("an accepted verdict does not encode: %v", err)
		}
		back, err := DecodeVerdict("re-encoded.json", first)
		if err != nil {
			t.Fatalf("the encoding of an accepted verdict does not decode: %v\n%s", err, first)
		}
		if d := cmp.Diff(v, back); d != "" {
			t.Fatalf("EncodeVerdict → DecodeVerdict changed the verdict (-first +second):\n%s", d)
		}
		second, err := EncodeVerdict(back)
		if err != nil {
			t.Fatalf("a re-decoded verdict does not encode: %v", err)
		}
		if !bytes.Equal(first, second) {
			t.Fatalf("EncodeVerdict is not a fixed point:\n%s\n---\n%s", first, second)
		}
	})
}
