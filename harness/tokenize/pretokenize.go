package tokenize

import (
	"strings"
	"unicode"
	"unicode/utf8"
)

// charClass is the class of one character for the GPT-2 pre-tokenizer.
type charClass uint8

const (
	classLetter charClass = iota // \p{L}
	classNumber                  // \p{N}
	classSpace                   // \s (Unicode White_Space)
	classOther                   // anything else, including each invalid UTF-8 byte
)

// classAt returns the class and byte width of the character at s[i].
func classAt(s string, i int) (charClass, int) {
	c := s[i]
	if c < utf8.RuneSelf {
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z':
			return classLetter, 1
		case c >= '0' && c <= '9':
			return classNumber, 1
		case c == ' ', c >= '\t' && c <= '\r':
			return classSpace, 1
		default:
			return classOther, 1
		}
	}
	r, w := utf8.DecodeRuneInString(s[i:])
	if r == utf8.RuneError && w == 1 {
		return classOther, 1
	}
	switch {
	case unicode.IsLetter(r):
		return classLetter, w
	case unicode.IsNumber(r):
		return classNumber, w
	case unicode.IsSpace(r):
		return classSpace, w
	default:
		return classOther, w
	}
}

// runEnd returns the end of the run of characters of class c starting at i.
func runEnd(s string, i int, c charClass) int {
	for i < len(s) {
		ci, w := classAt(s, i)
		if ci != c {
			break
		}
		i += w
	}
	return i
}

// contractionLen returns the length of a contraction suffix ('s, 't, 're,
// 've, 'm, 'll, 'd; lowercase only, as in the pattern) at s[i], which must
// be an apostrophe, or 0.
func contractionLen(s string, i int) int {
	rest := s[i+1:]
	for _, suf := range [...]string{"s", "t", "re", "ve", "m", "ll", "d"} {
		if strings.HasPrefix(rest, suf) {
			return 1 + len(suf)
		}
	}
	return 0
}

// splitGPT2 calls emit(start, end) for each chunk of s, in order, exactly as
// the GPT-2 pattern
//
//	's|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+
//
// matches it when applied repeatedly (leftmost match, alternatives tried in
// order, greedy quantifiers with backtracking). The chunks cover s.
func splitGPT2(s string, emit func(start, end int)) {
	i := 0
	for i < len(s) {
		// 's|'t|'re|'ve|'m|'ll|'d
		if s[i] == '\'' {
			if n := contractionLen(s, i); n > 0 {
				emit(i, i+n)
				i += n
				continue
			}
		}
		// ' ?\p{L}+', ' ?\p{N}+', ' ?[^\s\p{L}\p{N}]+' with the optional space.
		if s[i] == ' ' && i+1 < len(s) {
			if c2, _ := classAt(s, i+1); c2 != classSpace {
				j := runEnd(s, i+1, c2)
				emit(i, j)
				i = j
				continue
			}
		}
		c, _ := classAt(s, i)
		if c != classSpace {
			j := runEnd(s, i, c)
			emit(i, j)
			i = j
			continue
		}
		// '\s+(?!\S)': the longest whitespace run not followed by a
		// non-space; that is the whole run at the end of s, otherwise the
		// run without its last character (which may then start ' ?X+').
		j := runEnd(s, i, classSpace)
		if j < len(s) {
			_, w := utf8.DecodeLastRuneInString(s[i:j])
			if j-w > i {
				emit(i, j-w)
				i = j - w
				continue
			}
		}
		// '\s+' (or the run reaching the end of s).
		emit(i, j)
		i = j
	}
}

// preTokenize returns the chunks of s as strings (used by tests and Train).
func preTokenize(s string) []string {
	var out []string
	splitGPT2(s, func(a, b int) { out = append(out, s[a:b]) })
	return out
}
