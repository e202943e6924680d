package tokenize

import (
	"math/rand/v2"
	"strings"
	"testing"
)

// testWords is a small lexicon with contractions, mixed case, digits,
// punctuation and non-Latin scripts, for generated corpora.
var testWords = []string{
	"the", "The", "quick", "brown", "fox", "jumps", "over", "lazy", "dog", "it's", "don't", "we'll",
	"they're", "I've", "you'd", "I'm", "HELLO", "World", "tokenizer", "tokens", "merge", "merges",
	"2024", "3.14159", "42", "1,000", "x", "y=3", "f(x)", "a+b", "--", "...", "!!", "?", "#include",
	"<stdio.h>", "naïve", "café", "Straße", "über", "日本語", "テキスト", "中文", "한국어", "Привет",
	"мир", "😀", "👍🏽", "e\u0301", "ℕ", "Ⅻ", "½", "\"quoted\"", "(paren)", "[x]", "{y}", "snake_case",
	"camelCase", "http://example.invalid/a?b=c", "tab\tsep", "l'homme", "O'Neil",
}

// testSeps are the separators between generated words.
var testSeps = []string{" ", " ", " ", " ", "  ", "\n", "\n\n", "\t", "\r\n", " \n", "   ", ", ", ". "}

// testSyllables build pseudo-words, so the corpus has many distinct chunks.
var testSyllables = []string{"ka", "ri", "to", "men", "sa", "lo", "qu", "ex", "ing", "tion", "pre", "un", "ab", "ze", "Vo", "ß", "é", "語", "ов"}

// genText returns deterministic pseudo-random text of about n words.
func genText(r *rand.Rand, n int) string {
	var sb strings.Builder
	for i := 0; i < n; i++ {
		if r.IntN(3) == 0 {
			for k := 1 + r.IntN(4); k > 0; k-- {
				sb.WriteString(testSyllables[r.IntN(len(testSyllables))])
			}
		} else {
			sb.WriteString(testWords[r.IntN(len(testWords))])
		}
		sb.WriteString(testSeps[r.IntN(len(testSeps))])
	}
	return sb.String()
}

// genCorpus returns docs documents of about words words each.
func genCorpus(seed uint64, docs, words int) []string {
	r := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	out := make([]string, docs)
	for i := range out {
		out[i] = genText(r, words)
	}
	return out
}

// trainSmall trains a tokenizer with a few hundred merges on a generated
// corpus.
func trainSmall(t testing.TB, opts TrainOptions) *Tokenizer {
	t.Helper()
	if opts.VocabSize == 0 {
		opts.VocabSize = len(opts.Specials) + 256 + 400
	}
	tok, err := Train(genCorpus(1, 200, 120), opts)
	if err != nil {
		t.Fatalf("Train: %v", err)
	}
	return tok
}
