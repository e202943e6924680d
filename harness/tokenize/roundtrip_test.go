package tokenize

import (
	"math/rand/v2"
	"testing"
)

func TestRoundTripCases(t *testing.T) {
	tok := trainSmall(t, TrainOptions{Specials: []string{"<|endoftext|>"}})
	cases := []string{
		"", "a", "hello world", "  leading", "trailing   ", "x\n\n y", "a\r\nb\r\n", "\t\t\tindent",
		"it's I'LL we'd", "123abc 4567 3.14", "日本語のテキスト", "中文 한국어 Привет",
		"😀👍🏽🇯🇵 family: 👨‍👩‍👧", "e\u0301 a\u0308\u0304 combining", "\u3000\u00a0\u2028 odd spaces",
		"\xff\xfe invalid \xc3( utf8 \xed\xa0\x80 surrogate", "\x00\x01\x7f control",
		"<|endoftext|> is data by default",
	}
	for _, s := range cases {
		ids := tok.Encode(s)
		got, err := tok.Decode(ids)
		if err != nil {
			t.Fatalf("Decode(Encode(%q)): %v", s, err)
		}
		if got != s {
			t.Errorf("round trip of %q gave %q (ids %v)", s, got, ids)
		}
	}
}

func TestRoundTripRandomBytes(t *testing.T) {
	tok := trainSmall(t, TrainOptions{})
	r := rand.New(rand.NewPCG(7, 8))
	alphabet := []byte(" \t\n\rab'sl0123.!\xff\xc3\xa9\xe6\x97\xa5")
	for i := 0; i < 2000; i++ {
		n := r.IntN(80)
		b := make([]byte, n)
		for j := range b {
			if r.IntN(2) == 0 {
				b[j] = byte(r.IntN(256))
			} else {
				b[j] = alphabet[r.IntN(len(alphabet))]
			}
		}
		s := string(b)
		got, err := tok.Decode(tok.Encode(s))
		if err != nil || got != s {
			t.Fatalf("round trip of %q gave %q, %v", s, got, err)
		}
	}
}

func TestEncodeEmptyAndDecodeErrors(t *testing.T) {
	tok := trainSmall(t, TrainOptions{})
	if ids := tok.Encode(""); len(ids) != 0 {
		t.Errorf("Encode(\"\") = %v, want no ids", ids)
	}
	for _, bad := range []int{-1, tok.VocabSize(), 1 << 30} {
		if _, err := tok.Decode([]int{0, bad}); err == nil {
			t.Errorf("Decode with id %d: no error", bad)
		}
		if b := tok.TokenBytes(bad); b != nil {
			t.Errorf("TokenBytes(%d) = %q, want nil", bad, b)
		}
	}
}

func TestTokenBytesConcatenateToText(t *testing.T) {
	tok := trainSmall(t, TrainOptions{})
	s := "The quick brown fox, it's 2024!\n"
	var all []byte
	for _, id := range tok.Encode(s) {
		all = append(all, tok.TokenBytes(id)...)
	}
	if string(all) != s {
		t.Errorf("TokenBytes concatenation = %q, want %q", all, s)
	}
}

// TestScanAndHeapMergeAgree checks the two merge loops on long chunks.
func TestScanAndHeapMergeAgree(t *testing.T) {
	tok := trainSmall(t, TrainOptions{})
	r := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 300; i++ {
		text := genText(r, 40)
		syms := make([]int32, len(text))
		for j := 0; j < len(text); j++ {
			syms[j] = tok.byteID[text[j]]
		}
		a := applyMergesScan(append([]int32(nil), syms...), tok.mergeRank)
		b := applyMergesHeap(append([]int32(nil), syms...), tok.mergeRank)
		if len(a) != len(b) {
			t.Fatalf("scan %v and heap %v differ for %q", a, b, text)
		}
		for j := range a {
			if a[j] != b[j] {
				t.Fatalf("scan %v and heap %v differ for %q", a, b, text)
			}
		}
	}
}
