package golden

import (
	"bytes"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// FuzzParse feeds Parse arbitrary bytes. It must never panic, and every file
// it accepts must survive Encode → Parse unchanged, with Encode of the result
// a fixed point (so re-recording never churns a golden file). The seed corpus
// is in testdata/fuzz/FuzzParse (valid files of every kind and a few damaged
// ones); run it longer with
//
//	go test ./golden/ -run '^$' -fuzz FuzzParse -fuzztime 60s
func FuzzParse(f *testing.F) {
	f.Add([]byte(minimal))
	if data, err := everyField().Encode(); err == nil {
		f.Add(data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		g, err := Parse("fuzz.golden", data)
		if err != nil {
			if g != nil {
				t.Fatalf("Parse returned a file and an error: %v", err)
			}
			return
		}
		enc, err := g.Encode()
		if err != nil {
			t.Fatalf("an accepted file does not encode: %v", err)
		}
		back, err := Parse("fuzz.golden", enc)
		if err != nil {
			t.Fatalf("the encoding of an accepted file does not parse: %v\n%s", err, enc)
		}
		if d := cmp.Diff(g, back); d != "" {
			t.Fatalf("Encode → Parse changed the file (-first +second):\n%s", d)
		}
		enc2, err := back.Encode()
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(enc, enc2) {
			t.Fatalf("Encode is not a fixed point:\n%q\n%q", enc, enc2)
		}
	})
}
