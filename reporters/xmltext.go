package reporters

import (
	"fmt"
	"strings"
	"unicode/utf8"
)

// xmlAllowed reports whether r may appear in an XML 1.0 document. Source:
// XML 1.0 (Fifth Edition), section 2.2 "Characters", production [2]:
// #x9 | #xA | #xD | [#x20-#xD7FF] | [#xE000-#xFFFD] | [#x10000-#x10FFFF].
func xmlAllowed(r rune) bool {
	return r == 0x9 || r == 0xA || r == 0xD ||
		(r >= 0x20 && r <= 0xD7FF) ||
		(r >= 0xE000 && r <= 0xFFFD) ||
		(r >= 0x10000 && r <= 0x10FFFF)
}

// xmlEscape returns s escaped for XML character data (attr false) or a
// double-quoted attribute value (attr true). Characters XML 1.0 forbids and
// bytes of invalid UTF-8 become visible escapes (\x01, \xff, \ufffe); the
// five markup characters become entity references; carriage returns, and in
// attributes also tabs and newlines, become character references so that a
// parser's end-of-line and attribute-value normalisation keep them. '>' is
// always escaped, so "]]>" never appears in the output.
func xmlEscape(s string, attr bool) string {
	var b strings.Builder
	b.Grow(len(s))
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n == 1:
			fmt.Fprintf(&b, `\x%02x`, s[i])
		case !xmlAllowed(r) && r < 0x100:
			fmt.Fprintf(&b, `\x%02x`, r)
		case !xmlAllowed(r):
			fmt.Fprintf(&b, `\u%04x`, r)
		case r == '&':
			b.WriteString("&amp;")
		case r == '<':
			b.WriteString("&lt;")
		case r == '>':
			b.WriteString("&gt;")
		case r == '"':
			b.WriteString("&quot;")
		case r == '\'':
			b.WriteString("&apos;")
		case r == '\r':
			b.WriteString("&#xD;")
		case attr && r == '\n':
			b.WriteString("&#xA;")
		case attr && r == '\t':
			b.WriteString("&#x9;")
		default:
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}

// A capBuffer keeps the first max bytes written to it and counts the rest,
// so a report body of any size costs at most max bytes of memory.
type capBuffer struct {
	buf   []byte
	max   int
	total int
}

// WriteString keeps what fits and counts all of s.
func (c *capBuffer) WriteString(s string) (int, error) {
	c.total += len(s)
	if room := c.max - len(c.buf); room > 0 {
		c.buf = append(c.buf, s[:min(room, len(s))]...)
	}
	return len(s), nil
}

// truncateNote is the longest note bounded adds.
const truncateNote = "\n… truncated 18446744073709551615 bytes\n"

// bounded returns the text of c cut to at most limit bytes, the cut on a
// rune boundary and the result ending with a note "… truncated N bytes" that
// counts what was cut. c must have been made with room for limit bytes.
func (c *capBuffer) bounded(limit int) string {
	if c.total <= limit {
		return string(c.buf)
	}
	cut := limit - len(truncateNote)
	cut = min(max(cut, 0), len(c.buf))
	for cut > 0 && cut < len(c.buf) && !utf8.RuneStart(c.buf[cut]) {
		cut--
	}
	return fmt.Sprintf("%s\n… truncated %d bytes\n", c.buf[:cut], c.total-cut)
}
