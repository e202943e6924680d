package checkpoint

import (
	"runtime"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// fuzzAllocBound is the most bytes one ParseConfig call may allocate for an
// input of n bytes: a generous multiple of the input plus a fixed allowance
// (common practice, no source: a parser's working set grows linearly).
func fuzzAllocBound(n int) uint64 { return 64*uint64(n) + 1<<20 }

// FuzzConfig feeds ParseConfig arbitrary bytes. It must never panic, must
// allocate in proportion to the input, and every config it accepts must
// survive MarshalJSON → ParseConfig unchanged (the writer's layout is read
// back as the same architecture). Seeds: testdata/fuzz/FuzzConfig and the
// fixtures in testdata/configs. Run it longer with
//
//	go test ./harness/checkpoint/ -run '^$' -fuzz FuzzConfig -fuzztime 5m
func FuzzConfig(f *testing.F) {
	for _, fam := range Families() {
		cfg := &Config{Family: fam, VocabSize: 64, Hidden: 16, Layers: 2, Heads: 2, KVHeads: 2, HeadDim: 8, FFN: 32,
			MaxPositions: 32, NormEps: 1e-5, RopeTheta: 10000, Activation: "relu", TiedHead: true, BOS: 1, EOS: 2, PAD: -1}
		switch fam {
		case GPT2:
			cfg.Activation = "gelu_new"
		case Llama:
			cfg.Activation, cfg.TiedHead = "silu", false
		}
		if b, err := cfg.MarshalJSON(); err == nil {
			f.Add(b)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 64<<10 {
			return // config files are small; keep the fuzzer on structure
		}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		c, err := ParseConfig(data)
		runtime.ReadMemStats(&after)
		if got, limit := after.TotalAlloc-before.TotalAlloc, fuzzAllocBound(len(data)); got > limit {
			t.Fatalf("ParseConfig allocated %d bytes for a %d-byte input (limit %d)", got, len(data), limit)
		}
		if err != nil {
			if c != nil {
				t.Fatalf("ParseConfig returned a config with an error: %v", err)
			}
			return
		}
		out, err := c.MarshalJSON()
		if err != nil {
			t.Fatalf("an accepted config does not marshal: %v\n%+v", err, c)
		}
		back, err := ParseConfig(out)
		if err != nil {
			t.Fatalf("the writer's layout of an accepted config does not parse: %v\n%s", err, out)
		}
		if d := cmp.Diff(c, back); d != "" {
			t.Fatalf("MarshalJSON → ParseConfig changed the config (-first +second):\n%s\ninput: %q\nwritten: %s", d, data, out)
		}
	})
}
