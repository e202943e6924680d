package tokenize

import (
	"strings"
	"testing"
)

// TestLoadErrorsNameFileAndPlace feeds broken checkpoint directories and
// requires each error to name the file and the place inside it.
func TestLoadErrorsNameFileAndPlace(t *testing.T) {
	good := baseFixture.tokenizerJSON()
	replace := func(old, new string) string {
		if !strings.Contains(good, old) {
			t.Fatalf("fixture lacks %q", old)
		}
		return strings.Replace(good, old, new, 1)
	}
	vocab, _ := baseFixture.vocabAndMerges()
	goodVocab := vocabJSON(vocab)
	cases := []struct {
		name  string
		files map[string]string
		want  []string // substrings of the error
	}{
		{"empty directory", map[string]string{}, []string{"DIR: no tokenizer.json", "vocab.json"}},
		{"invalid JSON", map[string]string{fileTokenizerJSON: replace(`"normalizer": null,`, `"normalizer": null,,`)}, []string{"tokenizer.json", "line 3, column", "invalid JSON"}},
		{"truncated JSON", map[string]string{fileTokenizerJSON: good[:len(good)/2]}, []string{"tokenizer.json", "byte offset", "truncated"}},
		{"model type", map[string]string{fileTokenizerJSON: replace(`"type": "BPE"`, `"type": "WordPiece"`)}, []string{"tokenizer.json", "model.type", "WordPiece"}},
		{"pre-tokenizer", map[string]string{fileTokenizerJSON: replace(`{"type": "ByteLevel", "add_prefix_space": false}`, `{"type": "Metaspace"}`)}, []string{"tokenizer.json", "pre_tokenizer.type", "Metaspace"}},
		{"sequence member", map[string]string{fileTokenizerJSON: replace(`{"type": "ByteLevel", "add_prefix_space": false}`, `{"type": "Sequence", "pretokenizers": [{"type": "Digits"}]}`)}, []string{"tokenizer.json", "pre_tokenizer.pretokenizers[0].type", "Digits"}},
		{"roberta post-processor", map[string]string{fileTokenizerJSON: replace(`"post_processor": null`, `"post_processor": {"type": "RobertaProcessing"}`)}, []string{"tokenizer.json", "post_processor.type", "RobertaProcessing", "TemplateProcessing"}},
		{"template token missing", map[string]string{fileTokenizerJSON: replace(`"post_processor": null`, `"post_processor": {"type": "TemplateProcessing", "single": [{"SpecialToken": {"id": "<x>"}}, {"Sequence": {"id": "A"}}], "special_tokens": {}}`)}, []string{"tokenizer.json", "post_processor.single[0]", "<x>"}},
		{"normalizer", map[string]string{fileTokenizerJSON: replace(`"normalizer": null`, `"normalizer": {"type": "NFC"}`)}, []string{"tokenizer.json", "field normalizer", "NFC"}},
		{"decoder", map[string]string{fileTokenizerJSON: replace(`"decoder": {"type": "ByteLevel"}`, `"decoder": {"type": "WordPiece"}`)}, []string{"tokenizer.json", "field decoder"}},
		{"duplicate vocab id", map[string]string{fileTokenizerJSON: replace(`"!": 33`, `"!": 34`)}, []string{"tokenizer.json", "model.vocab", "duplicate id 34"}},
		{"duplicate vocab token", map[string]string{fileTokenizerJSON: replace(`"!": 33`, `"!": 33, "!": 999`)}, []string{"tokenizer.json", "model.vocab", `token "!"`, "twice"}},
		{"ids not contiguous", map[string]string{fileTokenizerJSON: replace(`"ll": 257`, `"ll": 300`)}, []string{"tokenizer.json", "model.vocab", "contiguous", "id 257 is missing"}},
		{"negative id", map[string]string{fileTokenizerJSON: replace(`"ll": 257`, `"ll": -1`)}, []string{"tokenizer.json", "model.vocab", `token "ll"`}},
		{"missing byte symbol", map[string]string{fileTokenizerJSON: replace(`"!": 33`, `"zz": 33`)}, []string{"tokenizer.json", "vocab", "byte 0x21"}},
		{"merge symbol not in vocab", map[string]string{fileTokenizerJSON: replace(`"h e"`, `"h zz"`)}, []string{"tokenizer.json", "model.merges[0]", `"zz"`}},
		{"merge result not in vocab", map[string]string{fileTokenizerJSON: replace(`"l l"`, `"l o"`)}, []string{"tokenizer.json", "model.merges[1]", `result "lo"`}},
		{"malformed merge", map[string]string{fileTokenizerJSON: replace(`"h e"`, `"he"`)}, []string{"tokenizer.json", "model.merges[0]", "two symbols"}},
		{"duplicate merge", map[string]string{fileTokenizerJSON: replace(`"l l"`, `"h e"`)}, []string{"tokenizer.json", "model.merges[1]", "repeats", "model.merges[0]"}},
		{"added token duplicate id", map[string]string{fileTokenizerJSON: replace(`"id": 259`, `"id": 258`)}, []string{"tokenizer.json", "added_tokens[1]", "duplicate id 258"}},
		{"merges.txt bad line", map[string]string{fileVocabJSON: goodVocab, fileMergesTxt: "#version: 0.2\nh e\nl l l\n"}, []string{"merges.txt", "line 3", "two symbols"}},
		{"merges.txt unknown symbol", map[string]string{fileVocabJSON: goodVocab, fileMergesTxt: "h e\nq€ l\n"}, []string{"merges.txt", "line 2", `"q€"`}},
		{"vocab.json invalid", map[string]string{fileVocabJSON: `{"a": 0,`, fileMergesTxt: ""}, []string{"vocab.json"}},
		{"merges.txt missing", map[string]string{fileVocabJSON: goodVocab}, []string{"merges.txt"}},
		{"config names unknown token", map[string]string{fileTokenizerJSON: good, fileTokenizerConfig: `{"bos_token": "<bos>"}`}, []string{"tokenizer_config.json", "field bos_token", "<bos>"}},
		{"config add_bos without bos", map[string]string{fileTokenizerJSON: good, fileTokenizerConfig: `{"add_bos_token": true}`}, []string{"tokenizer_config.json", "field add_bos_token"}},
		{"config bad bool", map[string]string{fileTokenizerJSON: good, fileTokenizerConfig: `{"add_eos_token": "yes"}`}, []string{"tokenizer_config.json", "field add_eos_token"}},
		{"config invalid JSON", map[string]string{fileTokenizerJSON: good, fileTokenizerConfig: "{\n\"bos_token\": }"}, []string{"tokenizer_config.json", "line 2", "invalid JSON"}},
		{"special map bad token", map[string]string{fileTokenizerJSON: good, fileSpecialTokens: `{"eos_token": 7}`}, []string{"special_tokens_map.json", "field eos_token"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			writeFiles(t, dir, c.files)
			_, err := LoadDir(dir)
			if err == nil {
				t.Fatal("LoadDir succeeded, want an error")
			}
			// Match without the directory, whose name holds the test's.
			msg := strings.ReplaceAll(err.Error(), dir, "DIR")
			for _, w := range c.want {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
		})
	}
}
