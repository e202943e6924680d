package suites

import (
	"bytes"
	"encoding/json"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"
)

// FuzzParse feeds arbitrary bytes to Parse over a small suite directory. It
// must never panic, and a suite it accepts must parse again to the same
// hash and probes (parsing is a pure function of the bytes and the data).
func FuzzParse(f *testing.F) {
	f.Add([]byte(validSuite))
	f.Add([]byte("format: 1\nname: t\nprobes:\n  - name: p\n    kind: perplexity\n    text: data/text.txt\n"))
	f.Add([]byte("format: 1\nname: t\nprobes: [{name: g, kind: generation, items: data/items.jsonl, stop: [\"\\n\", \".\"]}]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Parse("s.yaml", data, testFS(), nil)
		if err != nil {
			if s != nil {
				t.Fatalf("Parse returned a suite and an error: %v", err)
			}
			if err.Error() == "" {
				t.Fatal("empty error message")
			}
			return
		}
		again, err := Parse("s.yaml", data, testFS(), nil)
		if err != nil {
			t.Fatalf("an accepted suite fails to re-parse: %v", err)
		}
		if s.Hash != again.Hash {
			t.Fatalf("re-parse changed the hash: %s then %s", s.Hash, again.Hash)
		}
		if d := cmp.Diff(s.Probes, again.Probes); d != "" {
			t.Fatalf("re-parse changed the probes (-first +second):\n%s", d)
		}
		if len(s.Probes) == 0 {
			t.Fatal("a suite without probes was accepted")
		}
	})
}

// FuzzReadItems feeds arbitrary bytes to the JSON Lines item reader. It must
// never panic; items it accepts, re-encoded with encoding/json one per line,
// must read back equal.
func FuzzReadItems(f *testing.F) {
	f.Add([]byte(goodChoice+"\n"), false)
	f.Add([]byte(`{"id":"g","context":"C:","target":" t"}`+"\n\n"), true)
	f.Add([]byte("{\"id\":\"a\\u00e9\",\"context\":\"\\n\",\"options\":[\"a\",\"b\"],\"answer\":0,\"target\":\"a\"}\r\n"), false)
	f.Fuzz(func(t *testing.T, data []byte, generation bool) {
		kind := Choice
		if generation {
			kind = Generation
		}
		items, err := parseItems("f.jsonl", bytes.NewReader(data), kind)
		if err != nil {
			if items != nil {
				t.Fatalf("items and an error: %v", err)
			}
			return
		}
		var buf bytes.Buffer
		for _, it := range items {
			b, err := json.Marshal(it)
			if err != nil {
				t.Fatalf("re-encoding item %q: %v", it.ID, err)
			}
			buf.Write(b)
			buf.WriteByte('\n')
		}
		again, err := parseItems("f.jsonl", &buf, kind)
		if err != nil {
			t.Fatalf("re-encoded items fail to read: %v\n%s", err, buf.String())
		}
		if d := cmp.Diff(items, again, cmpopts.IgnoreFields(Item{}, "Line"), cmpopts.EquateEmpty()); d != "" {
			t.Fatalf("re-read items differ (-first +second):\n%s", d)
		}
	})
}
