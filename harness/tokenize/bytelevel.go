package tokenize

import (
	"strings"
	"unicode/utf8"
)

// byteTable is the standard byte-level BPE byte↔unicode table (the GPT-2
// scheme, common practice, no source): the printable bytes '!'..'~',
// 0xA1..0xAC and 0xAE..0xFF map to the code point of the same value; the
// remaining 68 bytes map, in increasing byte order, to U+0100, U+0101, ...
type byteTable struct {
	toRune [256]rune
	toByte map[rune]byte
}

func newByteTable() *byteTable {
	t := &byteTable{toByte: make(map[rune]byte, 256)}
	next := rune(256)
	for b := 0; b < 256; b++ {
		printable := (b >= '!' && b <= '~') || (b >= 0xA1 && b <= 0xAC) || (b >= 0xAE && b <= 0xFF)
		if printable {
			t.toRune[b] = rune(b)
		} else {
			t.toRune[b] = next
			next++
		}
		t.toByte[t.toRune[b]] = byte(b)
	}
	return t
}

// encode maps raw bytes to the byte-level string used as vocabulary key.
func (t *byteTable) encode(raw []byte) string {
	var sb strings.Builder
	sb.Grow(len(raw) * 2)
	for _, b := range raw {
		sb.WriteRune(t.toRune[b])
	}
	return sb.String()
}

// decode maps a byte-level vocabulary string back to raw bytes. A string
// with any character outside the table is returned as its own UTF-8 bytes,
// unchanged (such a token cannot be produced from text by merges).
func (t *byteTable) decode(s string) []byte {
	out := make([]byte, 0, len(s))
	for _, r := range s {
		b, ok := t.toByte[r]
		if !ok {
			return []byte(s)
		}
		out = append(out, b)
	}
	return out
}

// isByteLevel reports whether every character of s is in the table.
func (t *byteTable) isByteLevel(s string) bool {
	for i := 0; i < len(s); {
		r, w := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && w <= 1 {
			return false
		}
		if _, ok := t.toByte[r]; !ok {
			return false
		}
		i += w
	}
	return true
}
