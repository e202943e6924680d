package tokenize

import (
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// tokenizerAllocBound is the most bytes loading an n-byte tokenizer.json may
// allocate: a generous multiple of the input plus a fixed allowance for the
// byte table and the empty directory scan (common practice, no source: a
// loader's working set grows linearly with the file).
func tokenizerAllocBound(n int) uint64 { return 256*uint64(n) + 4<<20 }

// fuzzProbeText is encoded by the loaded and the reloaded tokenizer; both
// must give the same ids.
const fuzzProbeText = "Depot table: Saltquay = UCI\n  the parcel's 2 kg — on time!"

// FuzzTokenizerJSON loads arbitrary bytes as a checkpoint's tokenizer.json
// (there is no parser of tokenizer.json bytes, so each input is written to a
// temporary directory and read with LoadDir). Loading must never panic, must
// allocate in proportion to the file, and a tokenizer it accepts must survive
// Save → LoadDir with the same hash, vocabulary size and encoding. Seeds:
// testdata/fuzz/FuzzTokenizerJSON. Run it longer with
//
//	go test ./harness/tokenize/ -run '^$' -fuzz FuzzTokenizerJSON -fuzztime 5m
func FuzzTokenizerJSON(f *testing.F) {
	f.Add([]byte(fixture{}.tokenizerJSON()))
	f.Add([]byte(fixture{merges: [][2]string{{"a", "b"}, {"ab", "c"}}, added: []string{"<s>", "</s>"}}.tokenizerJSON()))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 64<<10 {
			return // keep inputs small: every one is written to disk
		}
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, fileTokenizerJSON), data, 0o644); err != nil {
			t.Fatal(err)
		}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		tok, err := LoadDir(dir)
		runtime.ReadMemStats(&after)
		if got, limit := after.TotalAlloc-before.TotalAlloc, tokenizerAllocBound(len(data)); got > limit {
			t.Fatalf("LoadDir allocated %d bytes for a %d-byte tokenizer.json (limit %d)", got, len(data), limit)
		}
		if err != nil {
			if tok != nil {
				t.Fatalf("LoadDir returned a tokenizer with an error: %v", err)
			}
			return
		}
		again := filepath.Join(t.TempDir(), "saved")
		if err := tok.Save(again); err != nil {
			t.Fatalf("an accepted tokenizer does not save: %v", err)
		}
		back, err := LoadDir(again)
		if err != nil {
			t.Fatalf("the saved form of an accepted tokenizer does not load: %v", err)
		}
		if tok.SHA256() != back.SHA256() || tok.VocabSize() != back.VocabSize() {
			t.Fatalf("Save → LoadDir changed the tokenizer: hash %s → %s, vocabulary %d → %d", tok.SHA256(), back.SHA256(), tok.VocabSize(), back.VocabSize())
		}
		a, b := tok.EncodeForModel(fuzzProbeText), back.EncodeForModel(fuzzProbeText)
		if len(a) != len(b) {
			t.Fatalf("Save → LoadDir changed the encoding: %v → %v", a, b)
		}
		for i := range a {
			if a[i] != b[i] {
				t.Fatalf("Save → LoadDir changed the encoding: %v → %v", a, b)
			}
		}
	})
}

// TestHugeAddedTokenID: a 3 KB tokenizer.json whose one added token has id
// 2,000,000,000 must be refused with an error naming the field, not make
// LoadDir allocate two billion vocabulary entries.
func TestHugeAddedTokenID(t *testing.T) {
	data := []byte(fixture{added: []string{"<s>"}}.tokenizerJSON())
	data = []byte(strings.Replace(string(data), `"id": 256,`, `"id": 2000000000,`, 1))
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, fileTokenizerJSON), data, 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := LoadDir(dir)
	if err == nil || !strings.Contains(err.Error(), "added_tokens[0]") {
		t.Fatalf("LoadDir: want an error naming added_tokens[0], got %v", err)
	}
}
