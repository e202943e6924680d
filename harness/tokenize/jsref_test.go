package tokenize

import (
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// The cross-check uses the npm package @huggingface/tokenizers, version
// 0.2.0 (pinned in testdata/jsref/package.json), a pure-JavaScript
// implementation of the tokenizer.json format written independently of this
// package, run through testdata/jsref/encode.mjs with Node.js.

const jsrefDir = "testdata/jsref"

// requireJSRef returns the node binary, or skips (fails when
// SPARSEGATE_REQUIRE_REFERENCE=1) when node or the package is missing.
func requireJSRef(t *testing.T) string {
	t.Helper()
	node, err := exec.LookPath("node")
	if err == nil {
		_, err = os.Stat(filepath.Join(jsrefDir, "node_modules", "@huggingface", "tokenizers", "package.json"))
	}
	if err != nil {
		msg := fmt.Sprintf("JavaScript reference not available (%v): install Node.js 20 and run `cd harness/tokenize/testdata/jsref && npm ci`", err)
		if os.Getenv("SPARSEGATE_REQUIRE_REFERENCE") == "1" {
			t.Fatal(msg + " (SPARSEGATE_REQUIRE_REFERENCE=1 makes this a failure)")
		}
		t.Skip(msg)
	}
	return node
}

// runJSRef encodes strs with the reference for the tokenizer saved in dir.
func runJSRef(t *testing.T, node, dir string, strs []string, addSpecial bool) [][]int {
	t.Helper()
	flag := ""
	if addSpecial {
		flag = "--add-special-tokens"
	}
	var ids [][]int
	runJSRefInto(t, node, filepath.Join(dir, fileTokenizerJSON), strs, flag, &ids)
	return ids
}

// runJSRefInto runs encode.mjs with one flag ("" for none) and decodes its
// output, one result per string, into dst.
func runJSRefInto[T any](t *testing.T, node, tokPath string, strs []string, flag string, dst *[]T) {
	t.Helper()
	in, err := json.Marshal(strs)
	if err != nil {
		t.Fatal(err)
	}
	inPath := filepath.Join(t.TempDir(), "strings.json")
	if err := os.WriteFile(inPath, in, 0o644); err != nil {
		t.Fatal(err)
	}
	args := []string{"encode.mjs", tokPath, inPath}
	if flag != "" {
		args = append(args, flag)
	}
	cmd := exec.Command(node, args...)
	cmd.Dir = jsrefDir
	out, err := cmd.Output()
	if err != nil {
		var ee *exec.ExitError
		if errors.As(err, &ee) {
			t.Fatalf("node encode.mjs: %v\n%s", err, ee.Stderr)
		}
		t.Fatalf("node encode.mjs: %v", err)
	}
	if err := json.Unmarshal(out, dst); err != nil {
		t.Fatalf("decode reference output: %v\n%.500s", err, out)
	}
	if len(*dst) != len(strs) {
		t.Fatalf("reference returned %d results for %d strings", len(*dst), len(strs))
	}
}

// crossCheckStrings returns a few hundred valid-UTF-8 test strings. They
// avoid U+0085 and U+FEFF, where JavaScript's \s (used by the reference)
// and the Unicode White_Space property used here differ, and characters
// newer than Unicode 15.0.
func crossCheckStrings() []string {
	fixed := []string{
		"hello", "IT'S DON'T", "  hello", "hello  world", "x\n\n y", "it's", "I'LL", "123abc", "a  \n", "trailing   ",
		"we'll they're I've you'd I'm don't", "'s 't 're 've 'm 'll 'd", "''s", " 's", "O'Neil's",
		"3.14159 2024 1,000,000 x=42", "٣٤٥ ١٢ Ⅻ ½ ²", "日本語のテキスト", "中文 한국어 Привет мир",
		"😀 👍🏽 🇯🇵 👨‍👩‍👧", "e\u0301 a\u0308", "\u3000x\u3000\u3000y", "a\u00a0b", "\t\tx\t", "\r\n\r\n",
		"line1\nline2\n", "   \n   ", "!!! ??? ...", "#include <stdio.h>", "f(x) = a+b*c;",
		"naïve café Straße über", "ΑΒΓ αβγ", "עברית ערבית العربية", "हिन्दी", "ไทย",
		" ", "  ", "\n", "x", "The The the THE", "http://example.invalid/a?b=c&d=e",
	}
	r := rand.New(rand.NewPCG(11, 12))
	out := append([]string(nil), fixed...)
	for len(out) < 300 {
		out = append(out, genText(r, 1+r.IntN(25)))
	}
	return out
}

func TestEncodeMatchesJSReference(t *testing.T) {
	node := requireJSRef(t)
	tok := trainSmall(t, TrainOptions{Specials: []string{"<|endoftext|>"}})
	dir := t.TempDir()
	if err := tok.Save(dir); err != nil {
		t.Fatal(err)
	}
	strs := crossCheckStrings()
	want := runJSRef(t, node, dir, strs, false)
	mismatches, ids, nbytes := 0, 0, 0
	for i, s := range strs {
		ids += len(want[i])
		nbytes += len(s)
		if got := tok.Encode(s); !slices.Equal(got, want[i]) {
			mismatches++
			if mismatches <= 5 {
				t.Errorf("Encode(%q) = %v, reference %v", s, got, want[i])
			}
		}
	}
	if mismatches > 0 {
		t.Errorf("%d of %d strings differ from the reference", mismatches, len(strs))
	}
	if ids*2 > nbytes {
		t.Errorf("reference used %d ids for %d bytes: the merges were not exercised", ids, nbytes)
	}
	// The reference always parses added tokens in the text; compare that
	// with ParseSpecials.
	specials := []string{"a<|endoftext|>b", "<|endoftext|><|endoftext|>", "x <|endoftext|> y"}
	wantSp := runJSRef(t, node, dir, specials, false)
	for i, s := range specials {
		if got := tok.EncodeWith(s, EncodeOptions{ParseSpecials: true}); !slices.Equal(got, wantSp[i]) {
			t.Errorf("EncodeWith(%q, ParseSpecials) = %v, reference %v", s, got, wantSp[i])
		}
	}
}

func TestEncodeForModelMatchesJSReferenceTemplate(t *testing.T) {
	node := requireJSRef(t)
	tok := trainSmall(t, TrainOptions{Specials: []string{"<s>", "</s>", "<pad>"}, AddBOS: true, AddEOS: true, BOS: "<s>", EOS: "</s>", PAD: "<pad>"})
	dir := t.TempDir()
	if err := tok.Save(dir); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(filepath.Join(dir, fileTokenizerJSON))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(data), `"TemplateProcessing"`) {
		t.Fatalf("saved tokenizer.json has no TemplateProcessing post-processor")
	}
	strs := crossCheckStrings()[:60]
	want := runJSRef(t, node, dir, strs, true)
	for i, s := range strs {
		got := tok.EncodeForModel(s)
		if !slices.Equal(got, want[i]) {
			t.Errorf("EncodeForModel(%q) = %v, reference %v", s, got, want[i])
		}
		if len(got) < 2 || got[0] != 0 || got[len(got)-1] != 1 {
			t.Errorf("EncodeForModel(%q) = %v, want <s>=0 first and </s>=1 last", s, got)
		}
	}
}

// TestPreTokenizeMatchesJSReference compares the hand-written splitter with
// the regular expression of the reference's ByteLevel pre-tokenizer.
func TestPreTokenizeMatchesJSReference(t *testing.T) {
	node := requireJSRef(t)
	strs := crossCheckStrings()
	// Random strings over a small alphabet with every character class
	// (the contractions' letters, spaces of several kinds, digits, marks).
	alphabet := []rune("'sStTrRevmlLdD xX\t\n\r\u3000\u00a0 09٣½.!,😀\u0301日")
	r := rand.New(rand.NewPCG(21, 22))
	for i := 0; i < 400; i++ {
		n := 1 + r.IntN(16)
		rs := make([]rune, n)
		for j := range rs {
			rs[j] = alphabet[r.IntN(len(alphabet))]
		}
		strs = append(strs, string(rs))
	}
	var want [][]string
	runJSRefInto(t, node, "-", strs, "--pre-tokenize", &want)
	bt := newByteTable()
	for i, s := range strs {
		var got []string
		for _, c := range preTokenize(s) {
			got = append(got, bt.encode([]byte(c)))
		}
		if !slices.Equal(got, want[i]) {
			t.Errorf("chunks of %q = %q, reference %q", s, got, want[i])
		}
	}
}
