package tokenize

import (
	"bytes"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func mergeStrings(tok *Tokenizer) []string {
	var out []string
	for _, m := range tok.merges {
		out = append(out, tok.vocab[m[0]]+" "+tok.vocab[m[1]])
	}
	return out
}

func TestTrainDeterministic(t *testing.T) {
	opts := TrainOptions{Specials: []string{"<|endoftext|>"}, VocabSize: 600}
	a := trainSmall(t, opts)
	b := trainSmall(t, opts)
	if !slices.Equal(mergeStrings(a), mergeStrings(b)) {
		t.Fatal("two training runs gave different merges")
	}
	if a.NumMerges() != 600-257 {
		t.Errorf("NumMerges = %d, want %d (the corpus has enough pairs)", a.NumMerges(), 600-257)
	}
	if a.SHA256() != b.SHA256() {
		t.Errorf("SHA256 differs between runs: %s vs %s", a.SHA256(), b.SHA256())
	}
	da, db := t.TempDir(), t.TempDir()
	if err := a.Save(da); err != nil {
		t.Fatal(err)
	}
	if err := b.Save(db); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{fileTokenizerJSON, fileTokenizerConfig} {
		x, _ := os.ReadFile(filepath.Join(da, f))
		y, _ := os.ReadFile(filepath.Join(db, f))
		if len(x) == 0 || !bytes.Equal(x, y) {
			t.Errorf("%s differs between runs (or is empty)", f)
		}
	}
}

func TestTrainCompresses(t *testing.T) {
	corpus := genCorpus(1, 200, 120)
	tok := trainSmall(t, TrainOptions{})
	ids, n := 0, 0
	for _, doc := range corpus {
		ids += len(tok.Encode(doc))
		n += len(doc)
	}
	// 400 merges over a 60-word lexicon must at least halve the length.
	if ids*2 > n {
		t.Errorf("%d ids for %d bytes of training text: the vocabulary does not compress it", ids, n)
	}
}

// TestTrainTieBreak works out by hand the merge order on tiny corpora:
// most frequent pair first, ties by the left token's bytes, then the
// right's ("Ġ" is the byte-level symbol of the space, byte 0x20).
func TestTrainTieBreak(t *testing.T) {
	cases := []struct {
		corpus []string
		want   []string
	}{
		// Chunks "ab", " cd": every pair once; " " < "a" < "c".
		{[]string{"ab cd"}, []string{"Ġ c", "Ġc d", "a b"}},
		// Chunks "ab", " ab", " cd": (a, b) occurs twice.
		{[]string{"ab ab cd"}, []string{"a b", "Ġ ab", "Ġ c"}},
		// One chunk "aaaa": (a, a) occurs 3 times; merged left to right
		// without overlap it gives "aa aa", then (aa, aa).
		{[]string{"aaaa"}, []string{"a a", "aa aa"}},
	}
	for _, c := range cases {
		tok, err := Train(c.corpus, TrainOptions{VocabSize: 256 + len(c.want)})
		if err != nil {
			t.Fatal(err)
		}
		if got := mergeStrings(tok); !slices.Equal(got, c.want) {
			t.Errorf("Train(%q) merges = %q, want %q", c.corpus, got, c.want)
		}
	}
}

func TestTrainMinFrequencyAndExhaustion(t *testing.T) {
	tok, err := Train([]string{"ab ab cd"}, TrainOptions{VocabSize: 1000, MinFrequency: 2})
	if err != nil {
		t.Fatal(err)
	}
	if got := mergeStrings(tok); !slices.Equal(got, []string{"a b"}) {
		t.Errorf("MinFrequency 2 merges = %q, want only \"a b\"", got)
	}
	tok, err = Train([]string{"ab"}, TrainOptions{VocabSize: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if tok.NumMerges() != 1 || tok.VocabSize() != 257 {
		t.Errorf("one-pair corpus: %d merges, %d tokens, want 1 and 257", tok.NumMerges(), tok.VocabSize())
	}
}

func TestTrainSpecialsAndOptionErrors(t *testing.T) {
	tok, err := Train([]string{"hello world"}, TrainOptions{VocabSize: 270, Specials: []string{"<s>", "</s>"}, AddBOS: true, BOS: "<s>", EOS: "</s>"})
	if err != nil {
		t.Fatal(err)
	}
	if id, ok := tok.BOS(); !ok || id != 0 {
		t.Errorf("BOS() = %d, %v, want 0, true", id, ok)
	}
	if id, ok := tok.EOS(); !ok || id != 1 {
		t.Errorf("EOS() = %d, %v, want 1, true", id, ok)
	}
	if _, ok := tok.PAD(); ok {
		t.Error("PAD() configured without a PAD option")
	}
	if got := tok.EncodeForModel("hello"); got[0] != 0 || slices.Contains(got[1:], 0) {
		t.Errorf("EncodeForModel = %v, want one leading BOS 0", got)
	}
	if got := tok.TokenBytes(2); !bytes.Equal(got, []byte{0}) {
		t.Errorf("TokenBytes(2) = %q, want byte 0x00 (byte symbols follow the specials)", got)
	}
	bad := []struct {
		opts TrainOptions
		want string
	}{
		{TrainOptions{VocabSize: 100}, "VocabSize"},
		{TrainOptions{VocabSize: 300, Specials: []string{"<s>", "<s>"}}, "Specials[1]"},
		{TrainOptions{VocabSize: 300, Specials: []string{""}}, "Specials[0]"},
		{TrainOptions{VocabSize: 300, BOS: "<s>"}, "TrainOptions.BOS"},
		{TrainOptions{VocabSize: 300, AddEOS: true}, "AddEOS"},
	}
	for _, b := range bad {
		if _, err := Train([]string{"x"}, b.opts); err == nil || !strings.Contains(err.Error(), b.want) {
			t.Errorf("Train(%+v) error = %v, want one naming %s", b.opts, err, b.want)
		}
	}
}
