package tokenize

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// fixture describes a hand-made checkpoint directory: 256 byte symbols
// (id = byte), then the results of merges, then added tokens.
type fixture struct {
	merges        [][2]string // raw (not byte-level) strings
	added         []string    // contents, ids following the vocabulary
	preTokenizer  string      // JSON; "" for plain ByteLevel
	postProcessor string      // JSON; "" for null
	config        string      // tokenizer_config.json text; "" for none
	specialMap    string      // special_tokens_map.json text; "" for none
}

// vocabAndMerges returns the vocabulary (byte-level strings by id) and the
// byte-level merges.
func (f fixture) vocabAndMerges() ([]string, [][2]string) {
	bt := newByteTable()
	var vocab []string
	for b := 0; b < 256; b++ {
		vocab = append(vocab, bt.encode([]byte{byte(b)}))
	}
	var merges [][2]string
	for _, m := range f.merges {
		a, b := bt.encode([]byte(m[0])), bt.encode([]byte(m[1]))
		merges = append(merges, [2]string{a, b})
		vocab = append(vocab, a+b)
	}
	return vocab, merges
}

func vocabJSON(vocab []string) string {
	parts := make([]string, len(vocab))
	for id, s := range vocab {
		parts[id] = fmt.Sprintf("%s: %d", jstr(s), id)
	}
	return "{" + strings.Join(parts, ", ") + "}"
}

// tokenizerJSON renders the fixture as a tokenizer.json.
func (f fixture) tokenizerJSON() string {
	vocab, merges := f.vocabAndMerges()
	var ms []string
	for _, m := range merges {
		ms = append(ms, jstr(m[0]+" "+m[1]))
	}
	var added []string
	for i, a := range f.added {
		added = append(added, fmt.Sprintf(`{"id": %d, "content": %s, "special": true}`, len(vocab)+i, jstr(a)))
	}
	pre := f.preTokenizer
	if pre == "" {
		pre = `{"type": "ByteLevel", "add_prefix_space": false}`
	}
	post := f.postProcessor
	if post == "" {
		post = "null"
	}
	return fmt.Sprintf(`{
  "added_tokens": [%s],
  "normalizer": null,
  "pre_tokenizer": %s,
  "post_processor": %s,
  "decoder": {"type": "ByteLevel"},
  "model": {"type": "BPE", "vocab": %s, "merges": [%s]}
}`, strings.Join(added, ", "), pre, post, vocabJSON(vocab), strings.Join(ms, ", "))
}

// write writes the files into a new directory; twoFile selects vocab.json +
// merges.txt instead of tokenizer.json (added tokens then go into the
// vocabulary).
func (f fixture) write(t *testing.T, twoFile bool) string {
	t.Helper()
	dir := t.TempDir()
	files := map[string]string{}
	if twoFile {
		vocab, merges := f.vocabAndMerges()
		vocab = append(vocab, f.added...)
		var lines []string
		for _, m := range merges {
			lines = append(lines, m[0]+" "+m[1])
		}
		files[fileVocabJSON] = vocabJSON(vocab)
		files[fileMergesTxt] = "#version: 0.2\n" + strings.Join(lines, "\n") + "\n"
	} else {
		files[fileTokenizerJSON] = f.tokenizerJSON()
	}
	if f.config != "" {
		files[fileTokenizerConfig] = f.config
	}
	if f.specialMap != "" {
		files[fileSpecialTokens] = f.specialMap
	}
	writeFiles(t, dir, files)
	return dir
}

func writeFiles(t *testing.T, dir string, files map[string]string) {
	t.Helper()
	for name, text := range files {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// templateBOS is a TemplateProcessing post-processor prepending <s> (id 258
// in fixtures with merges {"h","e"}, {"l","l"} and added <s>, </s>).
const templateBOS = `{"type": "TemplateProcessing",
  "single": [{"SpecialToken": {"id": "<s>", "type_id": 0}}, {"Sequence": {"id": "A", "type_id": 0}}],
  "pair": [],
  "special_tokens": {"<s>": {"id": "<s>", "ids": [258], "tokens": ["<s>"]}}}`

var baseFixture = fixture{merges: [][2]string{{"h", "e"}, {"l", "l"}}, added: []string{"<s>", "</s>"}}

func mustLoad(t *testing.T, dir string) *Tokenizer {
	t.Helper()
	tok, err := LoadDir(dir)
	if err != nil {
		t.Fatalf("LoadDir: %v", err)
	}
	return tok
}

// mustJSON is json.Marshal for test values that always marshal.
func mustJSON(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		panic(err)
	}
	return string(b)
}
