package tokenize

import (
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// FuzzVocabMerges loads arbitrary merges.txt bytes beside a fixed, valid
// vocab.json (the two-file layout), the half of the tokenizer files most
// often edited by hand. Loading must never panic, must allocate in
// proportion to the input, and a tokenizer it accepts must survive Save →
// LoadDir with the same hash. Seeds: testdata/fuzz/FuzzVocabMerges.
func FuzzVocabMerges(f *testing.F) {
	fx := fixture{merges: [][2]string{{"a", "b"}, {"ab", "c"}, {" ", "t"}}}
	vocab, merges := fx.vocabAndMerges()
	var lines []string
	for _, m := range merges {
		lines = append(lines, m[0]+" "+m[1])
	}
	f.Add([]byte("#version: 0.2\n" + strings.Join(lines, "\n") + "\n"))
	f.Add([]byte(strings.Join(lines, "\r\n")))
	f.Add([]byte("#version: 0.2\na\n"))
	f.Add([]byte("\xff\xfe b\n"))
	vj := []byte(vocabJSON(vocab))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 64<<10 {
			return
		}
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, fileVocabJSON), vj, 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, fileMergesTxt), data, 0o644); err != nil {
			t.Fatal(err)
		}
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		tok, err := LoadDir(dir)
		runtime.ReadMemStats(&after)
		if got, limit := after.TotalAlloc-before.TotalAlloc, tokenizerAllocBound(len(data)+len(vj)); got > limit {
			t.Fatalf("LoadDir allocated %d bytes for %d bytes of tokenizer files (limit %d)", got, len(data)+len(vj), limit)
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
		if tok.SHA256() != back.SHA256() {
			t.Fatalf("Save → LoadDir changed the tokenizer")
		}
	})
}
