package tokenize

import (
	"slices"
	"strings"
	"testing"
)

// "hello" encodes as he(256) ll(257) o(111) in the base fixture.
var helloIDs = []int{256, 257, 'o'}

func TestSpecialTokenRules(t *testing.T) {
	withPost := func(post, cfg string) fixture {
		f := baseFixture
		f.postProcessor, f.config = post, cfg
		return f
	}
	cases := []struct {
		name     string
		f        fixture
		twoFile  bool
		want     []int
		bos, eos int // -1: not configured
		describe string
	}{
		{"template prepends BOS", withPost(templateBOS, ""), false, append([]int{258}, helloIDs...), 258, -1, "BOS <s>=258 prepended"},
		{"template governs over add_bos_token false", withPost(templateBOS, `{"add_bos_token": false, "bos_token": "<s>"}`), false, append([]int{258}, helloIDs...), 258, -1, "BOS <s>=258 prepended"},
		{"ByteLevel post-processor governs over add_bos_token true", withPost(`{"type": "ByteLevel"}`, `{"add_bos_token": true, "bos_token": "<s>"}`), false, helloIDs, 258, -1, "no special tokens added"},
		{"add_bos_token without post-processor", withPost("", `{"add_bos_token": true, "bos_token": "<s>", "eos_token": "</s>"}`), false, append([]int{258}, helloIDs...), 258, 259, "BOS <s>=258 prepended"},
		{"add_eos_token with content object, two-file layout", withPost("", `{"add_bos_token": false, "add_eos_token": true, "eos_token": {"content": "</s>", "special": true}}`), true, append(slices.Clone(helloIDs), 259), -1, 259, "EOS </s>=259 appended"},
		{"template inside a post-processor Sequence", withPost(`{"type": "Sequence", "processors": [{"type": "ByteLevel"}, `+templateBOS+`]}`, ""), false, append([]int{258}, helloIDs...), 258, -1, "BOS <s>=258 prepended"},
		{"neither says so", withPost("", ""), false, helloIDs, -1, -1, "no special tokens added"},
		{"names from special_tokens_map.json", fixture{merges: baseFixture.merges, added: baseFixture.added, config: `{"add_bos_token": true}`, specialMap: `{"bos_token": "<s>", "eos_token": {"content": "</s>"}}`}, false, append([]int{258}, helloIDs...), 258, 259, "BOS <s>=258 prepended"},
		{"tokenizer_config.json wins over special_tokens_map.json", fixture{merges: baseFixture.merges, added: baseFixture.added, config: `{"bos_token": "</s>"}`, specialMap: `{"bos_token": "<s>"}`}, false, helloIDs, 259, -1, "no special tokens added"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			tok := mustLoad(t, c.f.write(t, c.twoFile))
			if got := tok.Encode("hello"); !slices.Equal(got, helloIDs) {
				t.Errorf("Encode = %v, want %v (no specials)", got, helloIDs)
			}
			if got := tok.EncodeForModel("hello"); !slices.Equal(got, c.want) {
				t.Errorf("EncodeForModel = %v, want %v", got, c.want)
			}
			if id, ok := tok.BOS(); id != c.bos || ok != (c.bos >= 0) {
				t.Errorf("BOS() = %d, %v, want %d", id, ok, c.bos)
			}
			if id, ok := tok.EOS(); id != c.eos || ok != (c.eos >= 0) {
				t.Errorf("EOS() = %d, %v, want %d", id, ok, c.eos)
			}
			if d := tok.Describe(); !strings.Contains(d, c.describe) || !strings.HasPrefix(d, "byte-level BPE, 260 tokens, 2 merges") {
				t.Errorf("Describe() = %q, want it to start with the sizes and hold %q", d, c.describe)
			}
		})
	}
}

func TestSpecialsInTextAreDataByDefault(t *testing.T) {
	tok := mustLoad(t, baseFixture.write(t, false))
	text := "<s>hello</s>"
	plain := tok.Encode(text)
	if slices.Contains(plain, 258) || slices.Contains(plain, 259) {
		t.Errorf("Encode(%q) = %v holds a special id; specials in text must be data by default", text, plain)
	}
	if s, _ := tok.Decode(plain); s != text {
		t.Errorf("Decode(Encode(%q)) = %q", text, s)
	}
	parsed := tok.EncodeWith(text, EncodeOptions{ParseSpecials: true})
	want := append(append([]int{258}, helloIDs...), 259)
	if !slices.Equal(parsed, want) {
		t.Errorf("EncodeWith(%q, ParseSpecials) = %v, want %v", text, parsed, want)
	}
	if s, err := tok.Decode(parsed); err != nil || s != text {
		t.Errorf("Decode(%v) = %q, %v; specials decode to their content", parsed, s, err)
	}
	if got := tok.VocabSize(); got != 260 {
		t.Errorf("VocabSize() = %d, want 260 (256 bytes + 2 merges + 2 added)", got)
	}
}

func TestAddPrefixSpace(t *testing.T) {
	f := baseFixture
	f.merges = append(slices.Clone(f.merges), [2]string{" ", "he"})
	f.preTokenizer = `{"type": "Sequence", "pretokenizers": [{"type": "ByteLevel", "add_prefix_space": true, "use_regex": true}]}`
	tok := mustLoad(t, f.write(t, false))
	// " hello": Ġhe is merge 2 (id 258), then ll, o.
	if got, want := tok.Encode("hello"), []int{258, 257, 'o'}; !slices.Equal(got, want) {
		t.Errorf("Encode(hello) with add_prefix_space = %v, want %v", got, want)
	}
	if got := tok.Encode(" hello"); !slices.Equal(got, tok.Encode("hello")) {
		t.Errorf("text already starting with a space got a second one: %v", got)
	}
}

// TestAddedTokensSources covers a special token that is also a vocabulary
// entry (as GPT-2's <|endoftext|> is) and added_tokens_decoder in the
// two-file layout.
func TestAddedTokensSources(t *testing.T) {
	f := fixture{merges: baseFixture.merges}
	vocab, _ := f.vocabAndMerges()
	vocab = append(vocab, "<|endoftext|>")
	tj := strings.Replace(f.tokenizerJSON(), `"added_tokens": [],`, `"added_tokens": [{"id": 258, "content": "<|endoftext|>", "special": true}],`, 1)
	tj = strings.Replace(tj, vocabJSON(vocab[:258]), vocabJSON(vocab), 1)
	dir := t.TempDir()
	writeFiles(t, dir, map[string]string{fileTokenizerJSON: tj, fileTokenizerConfig: `{"eos_token": "<|endoftext|>"}`})
	tok := mustLoad(t, dir)
	if tok.VocabSize() != 259 {
		t.Errorf("VocabSize() = %d, want 259", tok.VocabSize())
	}
	if id, ok := tok.EOS(); !ok || id != 258 {
		t.Errorf("EOS() = %d, %v, want 258", id, ok)
	}
	if got := tok.EncodeWith("a<|endoftext|>", EncodeOptions{ParseSpecials: true}); !slices.Equal(got, []int{'a', 258}) {
		t.Errorf("ParseSpecials encode = %v, want [97 258]", got)
	}

	two := fixture{merges: baseFixture.merges, config: `{"add_bos_token": true, "bos_token": "<s>", "added_tokens_decoder": {"258": {"content": "<s>", "special": true}}}`}
	tok = mustLoad(t, two.write(t, true))
	if got := tok.EncodeForModel("hello"); !slices.Equal(got, append([]int{258}, helloIDs...)) {
		t.Errorf("two-file layout with added_tokens_decoder: EncodeForModel = %v", got)
	}
	if b := tok.TokenBytes(258); string(b) != "<s>" {
		t.Errorf("TokenBytes(258) = %q, want <s>", b)
	}
}
