package tokenize

import (
	"testing"

	"github.com/google/go-cmp/cmp"
)

// TestPreTokenizeHandCases checks the hand-written splitter against chunk
// lists worked out by hand from the GPT-2 pattern
// 's|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+
// (the pattern as published with the GPT-2 encoder; recalled from memory
// and identical to the one in the @huggingface/tokenizers 0.2.0 sources).
func TestPreTokenizeHandCases(t *testing.T) {
	cases := []struct {
		in   string
		want []string
	}{
		{"", nil},
		{"hello", []string{"hello"}},
		{"  hello", []string{" ", " hello"}},
		{"hello  world", []string{"hello", " ", " world"}},
		{"x\n\n y", []string{"x", "\n\n", " y"}},
		{"it's", []string{"it", "'s"}},
		{"I'LL", []string{"I", "'", "LL"}},
		{"we'll they're I've you'd", []string{"we", "'ll", " they", "'re", " I", "'ve", " you", "'d"}},
		{"123abc", []string{"123", "abc"}},
		{"a  \n", []string{"a", "  \n"}},
		{"a \n b", []string{"a", " \n", " b"}},
		{"trailing   ", []string{"trailing", "   "}},
		{"\tx", []string{"\t", "x"}},
		// The lookahead gives up the last whitespace character before "b".
		{"a\r\nb", []string{"a", "\r", "\n", "b"}},
		{"hi!!! ok", []string{"hi", "!!!", " ok"}},
		{" 's", []string{" '", "s"}},
		{"''s", []string{"''", "s"}},
		{"x 42.5%", []string{"x", " 42", ".", "5", "%"}},
		{"😀😀 ok", []string{"😀😀", " ok"}},
		{"a 😀", []string{"a", " 😀"}},
		{"日本語 テキスト", []string{"日本語", " テキスト"}},
		{"e\u0301t", []string{"e", "\u0301", "t"}},
		// The ideographic space is \s but not ' ', so the run without its
		// last character is one chunk and the last one is a lone '\s+'.
		{"x\u3000\u3000y", []string{"x", "\u3000", "\u3000", "y"}},
		{"Ⅻ½", []string{"Ⅻ½"}},
		{"a\xffb", []string{"a", "\xff", "b"}},
		{" \xff\xfe!", []string{" \xff\xfe!"}},
		{"   ", []string{"   "}},
		{" ", []string{" "}},
	}
	for _, c := range cases {
		got := preTokenize(c.in)
		if diff := cmp.Diff(c.want, got); diff != "" {
			t.Errorf("preTokenize(%q) mismatch (-want +got):\n%s", c.in, diff)
		}
	}
}
